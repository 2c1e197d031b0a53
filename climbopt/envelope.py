"""The flight envelope: every limit written once, evaluated on numpy arrays or CasADi symbols.

Each limit is a *row*: a normalised value ``g`` with bounds ``lower <= g <= upper``. Its margin is
``max(g - upper, lower - g)``: negative inside, zero on the boundary, positive outside, in the
row's normalised unit. **One boundary rule** for every limit and every consumer (the scenario
check, the energy-state masks, the collocation constraints, the re-simulation check, the flown
schedules, the solvers' notes and the envelope plot): a point is inside a limit when its margin
is at most :data:`INSIDE_TOL` (1e-9; a value written exactly on a limit in other units, such as
a target of "340 kt" against a limit of "340 kt", is inside).

Rows (value and normalisation):

=====================  ===========================================  ==============================
name                   value g                                      bounds
=====================  ===========================================  ==============================
``altitude``           h / 1000 m                                   [h_lo, h_hi] / 1000 m
``table_mach``         M / M_table_max                              [M_table_min / M_table_max, 1]
``mach``               M / limits.max_mach                          <= 1
``dynamic_pressure``   q / limits.max_dynamic_pressure              <= 1
``cas``                q_c(M, p) / q_c(limits.max_cas)              <= 1
``cas_restriction``    q_c(M, p) / q_c(restriction CAS) where       <= 1
                       h < restriction altitude, else 0
``stall``              CL / CLmax(M)                                [-1, 1]
``load_factor``        n / limits.max_load_factor                   [-1, 1]
``climb``              flight-path angle gamma [rad] (procedure)    >= 0
=====================  ===========================================  ==============================

* ``altitude``: the tightest of the scenario's altitude limits, the engine tables' altitude range,
  the smooth atmosphere's range and, for the *procedure* climb profile, the start altitude
  (below) and the target altitude (above). The collocation solver imposes it, and ``climb``, as
  simple bounds on its states (so IPOPT never leaves them); everyone else evaluates the rows.
* ``table_mach``: the Mach range where every table of the model has data (the model is never
  used outside its data).
* ``cas`` and ``cas_restriction`` compare impact pressures, which are monotone in CAS (NACA
  Report 1135, 1953), so the row is exactly "CAS at most the limit". ``cas_restriction`` applies
  strictly *below* its altitude (as in 14 CFR 91.117(a): "below 10,000 feet MSL").
  The collocation solver needs a smooth constraint; it uses the same impact-pressure ratio with
  the restriction released by a C2 quintic step over the :data:`CAS_RESTRICTION_BAND_M` above the
  restriction altitude: at least as strict as the rule everywhere, equal to it below the
  restriction altitude and above the band (its solutions therefore satisfy the rule).
* ``stall``: the lift coefficient the flight needs (from the load factor, or the control) against
  CLmax(M) of the drag data. Negative lift is bounded symmetrically.
* ``climb`` (procedure profile only): altitude never decreases.

Fuel is a limit of a whole trajectory, not of a point: :meth:`Envelope.fuel_excess`.

Verification tolerances (the re-simulation of an open-loop control history drifts a little):
1 % of the limit for the ratio rows, 20 m for ``altitude``, 0.01 rad for ``climb``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from climbopt.airspeed import impact_pressure_from_cas, impact_pressure_pa
from climbopt.atmosphere import G0
from climbopt.fits import smoothstep

__all__ = ["CAS_RESTRICTION_BAND_M", "Envelope", "FlightQuantities", "INSIDE_TOL", "LimitRow",
           "ALTITUDE_UNIT_M", "envelope_for", "flight_quantities"]

#: A margin up to this value counts as inside (the one boundary rule).
INSIDE_TOL = 1.0e-9
#: The altitude row is in units of this many metres.
ALTITUDE_UNIT_M = 1000.0
#: Width of the band above a CAS-restriction altitude over which the collocation solver's smooth
#: constraint releases the restriction [m].
CAS_RESTRICTION_BAND_M = 300.0
#: Verification tolerance of the ratio rows (1 % of the limit).
RATIO_TOLERANCE = 1.0e-2


@dataclass(frozen=True)
class LimitRow:
    """One limit: its name, words for messages, normalised bounds and re-simulation tolerance."""

    name: str
    words: str
    lower: float
    upper: float
    tolerance: float


@dataclass(frozen=True)
class FlightQuantities:
    """What the limits are evaluated on (numpy arrays broadcast together, or CasADi symbols).

    altitude_m [m], mach [-], pressure_pa [Pa], dynamic_pressure_pa [Pa], lift_coefficient [-],
    cl_max [-] (CLmax(M)), load_factor [-], flight_path_angle_rad [rad] (None: not checked).
    """

    altitude_m: object
    mach: object
    pressure_pa: object
    dynamic_pressure_pa: object
    lift_coefficient: object
    cl_max: object
    load_factor: object
    flight_path_angle_rad: object = None


def _is_casadi(x) -> bool:
    try:
        import casadi as ca
    except ImportError:  # pragma: no cover
        return False
    return isinstance(x, (ca.SX, ca.MX))


def flight_quantities(model, altitude_m, tas_m_s, mass_kg, *, lift_coefficient=None,
                      load_factor=None, flight_path_angle_rad=None,
                      cl_max=None) -> FlightQuantities:
    """Air data, lift coefficient and load factor at flight points of ``model`` (numpy).

    Give either the ``lift_coefficient`` (a control) or the ``load_factor`` n = L / (m g0)
    (default 1); the other follows from L = q S CL. ``cl_max`` may be passed when already known.
    Altitude [m], TAS [m/s], mass [kg].
    """
    h = np.asarray(altitude_m, dtype=float)
    v = np.asarray(tas_m_s, dtype=float)
    atm = model.atmosphere(np.clip(h, model.atmosphere.altitude_min_m,
                                   model.atmosphere.altitude_max_m))
    mach = v / atm.speed_of_sound_m_s
    q = 0.5 * atm.density_kg_m3 * v * v
    weight = np.asarray(mass_kg, dtype=float) * G0
    lift_area = q * model.reference_area_m2
    with np.errstate(divide="ignore", invalid="ignore"):
        if lift_coefficient is None:
            n = np.asarray(1.0 if load_factor is None else load_factor, dtype=float)
            cl = n * weight / lift_area
        else:
            cl = np.asarray(lift_coefficient, dtype=float)
            n = lift_area * cl / weight
    if cl_max is None:
        fd = model.fit_domain
        cl_max = model.cl_max(np.clip(mach, fd.mach_min, fd.mach_max), check=False)
    return FlightQuantities(h, mach, atm.pressure_pa, q, cl, cl_max, n, flight_path_angle_rad)


class Envelope:
    """The limits of one scenario and model (see the module docstring for the rows and rule).

    Build with :func:`envelope_for`. Attributes: ``rows`` (tuple of :class:`LimitRow`),
    ``altitude_min_m`` / ``altitude_max_m`` [m], ``mach_min`` / ``mach_max`` (table data),
    ``profile`` ("procedure" or "free"), ``fuel_capacity_kg`` (or None).
    """

    def __init__(self, limits, model=None, *, profile: str = "free",
                 start_altitude_m: float | None = None, target_altitude_m: float | None = None,
                 fuel_capacity_kg: float | None = None, buffet_load_factor: float = 1.0):
        self.limits = limits
        self.profile = profile
        self.fuel_capacity_kg = fuel_capacity_kg
        self.buffet_load_factor = float(buffet_load_factor)
        lo = float(limits.min_altitude_m)
        hi = math.inf if limits.max_altitude_m is None else float(limits.max_altitude_m)
        self.mach_min, self.mach_max = 0.0, math.inf
        if model is not None:
            d = model.domain
            lo = max(lo, d.altitude_min_m, model.atmosphere.altitude_min_m)
            hi = min(hi, d.altitude_max_m, model.atmosphere.altitude_max_m)
            self.mach_min, self.mach_max = float(d.mach_min), float(d.mach_max)
        if profile == "procedure":
            if start_altitude_m is not None:
                lo = max(lo, float(start_altitude_m))
            if target_altitude_m is not None:
                hi = min(hi, float(target_altitude_m))
        elif profile != "free":
            raise ValueError(f"profile must be 'procedure' or 'free', got {profile!r}")
        self.altitude_min_m, self.altitude_max_m = lo, hi
        rows = [LimitRow("altitude", "altitude", lo / ALTITUDE_UNIT_M, hi / ALTITUDE_UNIT_M,
                         20.0 / ALTITUDE_UNIT_M)]
        if math.isfinite(self.mach_max):
            rows.append(LimitRow("table_mach", "table Mach range", self.mach_min / self.mach_max,
                                 1.0, RATIO_TOLERANCE))
        ratio = [("mach", "Mach", limits.max_mach),
                 ("dynamic_pressure", "dynamic pressure", limits.max_dynamic_pressure_pa),
                 ("cas", "CAS", limits.max_cas_m_s)]
        rows += [LimitRow(n, w, -math.inf, 1.0, RATIO_TOLERANCE) for n, w, v in ratio
                 if v is not None]
        if limits.cas_restriction is not None:
            rows.append(LimitRow("cas_restriction", "CAS restriction", -math.inf, 1.0,
                                 RATIO_TOLERANCE))
        rows.append(LimitRow("stall", "stall (CLmax)", -1.0, 1.0, RATIO_TOLERANCE))
        rows.append(LimitRow("load_factor", "load factor", -1.0, 1.0, RATIO_TOLERANCE))
        if profile == "procedure":
            rows.append(LimitRow("climb", "no descent", 0.0, math.inf, 1.0e-2))
        self.rows = tuple(rows)
        self._row = {r.name: r for r in self.rows}
        self._qc_max = (None if limits.max_cas_m_s is None
                        else float(impact_pressure_from_cas(limits.max_cas_m_s)))
        self._qc_restriction = None
        if limits.cas_restriction is not None:
            self._qc_restriction = float(impact_pressure_from_cas(limits.cas_restriction[0]))

    # ------------------------------------------------------------------ rows
    def row(self, name: str) -> LimitRow:
        """The row called ``name`` (KeyError if the scenario has no such limit)."""
        return self._row[name]

    @property
    def names(self) -> tuple[str, ...]:
        """Row names, in order."""
        return tuple(r.name for r in self.rows)

    def values(self, fq: FlightQuantities, *, smooth: bool = False) -> dict:
        """Normalised value ``g`` of every row (numpy arrays, or CasADi expressions).

        ``smooth=True`` gives the collocation solver's C2 form of the CAS restriction (see the
        module docstring); every other row is the same expression either way.
        """
        lim = self.limits
        casadi = _is_casadi(fq.mach) or _is_casadi(fq.altitude_m)
        out = {"altitude": fq.altitude_m / ALTITUDE_UNIT_M}
        if "table_mach" in self._row:
            out["table_mach"] = fq.mach / self.mach_max
        if "mach" in self._row:
            out["mach"] = fq.mach / lim.max_mach
        if "dynamic_pressure" in self._row:
            out["dynamic_pressure"] = fq.dynamic_pressure_pa / lim.max_dynamic_pressure_pa
        qc = None
        if self._qc_max is not None or self._qc_restriction is not None:
            mach = fq.mach if casadi else np.maximum(fq.mach, 0.0)
            qc = impact_pressure_pa(mach, fq.pressure_pa)
        if self._qc_max is not None:
            out["cas"] = qc / self._qc_max
        if self._qc_restriction is not None:
            out["cas_restriction"] = self._restriction_value(qc, fq.altitude_m, smooth, casadi)
        out["stall"] = fq.lift_coefficient * self.buffet_load_factor / fq.cl_max
        out["load_factor"] = fq.load_factor / lim.max_load_factor
        if "climb" in self._row and fq.flight_path_angle_rad is not None:
            out["climb"] = fq.flight_path_angle_rad
        return out

    def _restriction_value(self, qc, altitude_m, smooth: bool, casadi: bool):
        ratio = qc / self._qc_restriction
        below = self.limits.cas_restriction[1]
        if not casadi:
            h = np.asarray(altitude_m, dtype=float)
            return np.where(h < below, ratio, 0.0)
        if not smooth:
            import casadi as ca

            return ca.if_else(altitude_m < below, ratio, 0.0)
        # C2 release over the band above the restriction altitude (never looser than the rule):
        # subtract up to the largest ratio the tables allow there (Mach cap at that altitude).
        release = self._restriction_release(below)
        return ratio - release * smoothstep((altitude_m - below) / CAS_RESTRICTION_BAND_M)

    def _restriction_release(self, below_m: float) -> float:
        from climbopt.atmosphere import standard_atmosphere

        p = float(standard_atmosphere(max(below_m, -400.0)).pressure_pa)
        cap = self.mach_max if math.isfinite(self.mach_max) else 3.0
        if self.limits.max_mach is not None:
            cap = min(cap, self.limits.max_mach)
        return max(float(impact_pressure_pa(cap, p)) / self._qc_restriction, 1.1)

    def margins(self, fq: FlightQuantities) -> dict[str, np.ndarray]:
        """Margin of every row at numpy points (<= :data:`INSIDE_TOL` inside)."""
        out = {}
        for name, g in self.values(fq).items():
            r = self._row[name]
            with np.errstate(invalid="ignore"):
                m = np.maximum(g - r.upper, r.lower - g)
            out[name] = np.where(np.isnan(m), np.inf, m)
        return out

    def inside(self, fq: FlightQuantities) -> dict[str, np.ndarray]:
        """Boolean per row: True where the point meets that limit (the one boundary rule)."""
        return {k: m <= INSIDE_TOL for k, m in self.margins(fq).items()}

    def fuel_excess(self, fuel_used_kg: float) -> float:
        """Fuel burnt over the capacity, as a fraction of the capacity (<= 0: within it)."""
        if self.fuel_capacity_kg is None:
            return -math.inf
        return float(fuel_used_kg) / self.fuel_capacity_kg - 1.0

    def riding(self, fq: FlightQuantities, fraction: float = 0.02) -> dict[str, np.ndarray]:
        """Boolean per row: True where the point lies inside and within ``fraction`` of the row's
        verification tolerance of a bound (the path rides that limit: 2e-4 of the limit for the
        ratio rows, 0.4 m for altitude)."""
        return {k: (m <= INSIDE_TOL) & (m >= -fraction * self._row[k].tolerance)
                for k, m in self.margins(fq).items()}


def envelope_for(scenario, model=None, *, path: bool = True) -> Envelope:
    """The envelope of ``scenario`` with ``model``'s table ranges.

    ``path=True`` applies the mission's climb profile (procedure: altitude window from the start
    to the target altitude and no descent); ``path=False`` gives the aircraft's envelope alone
    (energy maps and their plots).
    """
    mission = scenario.mission
    profile = getattr(mission, "profile", "free") if path else "free"
    limits = scenario.limits
    return Envelope(limits, model, profile=profile,
                    start_altitude_m=mission.start.altitude_m,
                    target_altitude_m=mission.target.altitude_m,
                    fuel_capacity_kg=scenario.aircraft.fuel_capacity_kg,
                    buffet_load_factor=getattr(limits, "buffet_load_factor", None) or 1.0)
