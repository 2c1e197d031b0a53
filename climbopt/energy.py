"""Energy-state fields: energy height, specific excess power, fuel flow and the flight envelope
over altitude x true airspeed (or altitude x Mach), for one mass, rating, load factor and throttle.

Definitions (energy-state method; Rutowski, J. Aeronautical Sciences 21(3), 1954; Anderson,
*Aircraft Performance and Design*, McGraw-Hill 1999, sec. 6.2-6.3):

* energy height ``he = h + V^2 / (2 g0)`` [m];
* specific excess power ``Ps = V (T - D) / (m g0)`` [m/s] with drag at lift ``L = n m g0``
  (from :meth:`climbopt.aircraft.AircraftModel.evaluate`);
* fuel-specific energy ``fs = Ps / fuel flow`` [m/kg] (Rutowski 1954; energy height gained per
  kilogram of fuel);
* feasibility: every limit of the flight envelope (:mod:`climbopt.envelope`, one boundary rule
  for all of climbopt): lift coefficient at load factor ``n`` against CLmax(M), dynamic pressure,
  Mach and CAS limits, the CAS restriction below an altitude, the altitude limits, the load
  factor, and the data domain of the aircraft tables (the model is never used outside it).

Everything is vectorised numpy. Grids are evaluated with the altitude as a column vector, so the
atmosphere is evaluated once per altitude row. Altitude is geometric [m]; CAS is from the
compressible pitot formulas of :mod:`climbopt.airspeed`.

The module also holds :func:`maximise_on_lines`, the vectorised 1-D maximiser (fine sampling,
then an iterated grid-search refinement of the best peaks) used for the best climb speed at an
altitude (:func:`best_climb_speed`) and by the Rutowski solver on lines of constant energy.
"""

from __future__ import annotations

import weakref
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from climbopt.airspeed import cas_from_mach
from climbopt.atmosphere import energy_height_m
from climbopt.envelope import Envelope, FlightQuantities
from climbopt.scenario import Limits, Scenario

__all__ = [
    "EnergyFields",
    "EnergyMap",
    "best_climb_speed",
    "build_energy_map",
    "energy_fields",
    "energy_height_m",
    "maximise_on_lines",
]



class EnergyFields:
    """Energy-state quantities at a set of flight points (all arrays share one broadcast shape).

    Built by :func:`energy_fields`. Attributes (SI): ``altitude_m``, ``tas_m_s``, ``mach``,
    ``energy_height_m``, ``dynamic_pressure_pa``, ``cl`` (at load factor n), ``cl_max``
    (CLmax(M) where CL comes within 10% of the model's lowest CLmax; elsewhere that lowest
    value, which is all the stall test needs),
    ``thrust_n``, ``drag_n``, ``ps_m_s``, ``fuel_flow_kg_s``, ``feasible`` (bool) and
    ``limits`` (dict: limit name of :mod:`climbopt.envelope` -> bool array, True where that
    limit is met). Outside the data
    domain the aerodynamic and engine values are those of the nearest fit point and meaningless:
    use ``feasible`` (or ``limits["table_mach"]`` and ``limits["altitude"]``). ``cas_m_s`` and ``fuel_specific_energy_m_kg`` are
    computed on first access.
    """

    def __init__(self, altitude_m, tas_m_s, mach, pressure_pa, perf, cl_max, limits, shape):
        self.altitude_m = np.broadcast_to(altitude_m, shape)
        self.tas_m_s = np.broadcast_to(tas_m_s, shape)
        self.mach = np.broadcast_to(mach, shape)
        self._pressure_pa = pressure_pa
        self.dynamic_pressure_pa = np.broadcast_to(perf.dynamic_pressure_pa, shape)
        self.cl = np.broadcast_to(perf.cl, shape)
        self.cl_max = np.broadcast_to(cl_max, shape)
        self.thrust_n = np.broadcast_to(perf.thrust_n, shape)
        self.drag_n = np.broadcast_to(perf.drag_n, shape)
        self.ps_m_s = np.broadcast_to(perf.ps_m_s, shape)
        self.fuel_flow_kg_s = np.broadcast_to(perf.fuel_flow_kg_s, shape)
        self.limits = {k: np.broadcast_to(v, shape) for k, v in limits.items()}
        ok = np.ones(shape, dtype=bool)
        for v in limits.values():
            ok = ok & v
        self.feasible = ok

    @cached_property
    def energy_height_m(self) -> np.ndarray:
        """he = h + V^2 / (2 g0) [m]."""
        return energy_height_m(self.altitude_m, self.tas_m_s)

    @cached_property
    def cas_m_s(self) -> np.ndarray:
        """Calibrated airspeed [m/s] (compressible pitot formulas, :mod:`climbopt.airspeed`)."""
        return np.broadcast_to(cas_from_mach(self.mach, self._pressure_pa), self.mach.shape)

    @cached_property
    def fuel_specific_energy_m_kg(self) -> np.ndarray:
        """Ps / fuel flow [m/kg]: energy height gained per kg of fuel (NaN where no fuel flow)."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(self.fuel_flow_kg_s > 0.0, self.ps_m_s / self.fuel_flow_kg_s, np.nan)


def energy_fields(model, altitude_m, tas_m_s, mass_kg, *, limits=None,
                  load_factor: float = 1.0, throttle: float = 1.0,
                  rating: str | None = None) -> EnergyFields:
    """Energy-state quantities and the feasibility mask at flight points.

    Parameters
    ----------
    model : climbopt.aircraft.AircraftModel
        The aircraft (its atmosphere carries the day's temperature offset).
    altitude_m, tas_m_s : array_like
        Geometric altitude [m] and true airspeed [m/s]; broadcast together (pass the altitude as
        a column for a grid: the atmosphere is then evaluated once per row).
    mass_kg : float or array_like
        Aircraft mass [kg] (broadcasts too).
    limits : climbopt.envelope.Envelope or climbopt.scenario.Limits, optional
        The flight envelope (:mod:`climbopt.envelope`; a ``Limits`` record is wrapped in one with
        this model's table ranges). ``None`` applies only the table data and CLmax.
    load_factor : float
        Lift over weight n [-] (1 for climbing flight; > 1 in turns).
    throttle : float
        Fraction of the rating [-].
    rating : str, optional
        Engine rating name (model default when None).
    """
    h = np.asarray(altitude_m, dtype=float)
    v = np.asarray(tas_m_s, dtype=float)
    shape = np.broadcast_shapes(h.shape, v.shape, np.shape(mass_kg))
    atm = model.atmosphere(h)
    mach = v / atm.speed_of_sound_m_s
    perf = model.evaluate(h, v, mass_kg, load_factor, throttle, rating, check=False)
    env = _as_envelope(limits, model)
    cl_max = _cl_max_where_needed(model, mach, perf.cl * env.buffet_load_factor)
    fq = FlightQuantities(h, mach, atm.pressure_pa, perf.dynamic_pressure_pa, perf.cl, cl_max,
                          np.asarray(load_factor, dtype=float))
    lim = env.inside(fq)
    lim["table_mach"] = lim["table_mach"] & (v > 0.0)
    return EnergyFields(h, v, mach, atm.pressure_pa, perf, cl_max, lim, shape)


def _as_envelope(limits, model) -> Envelope:
    """The envelope to apply: as given, built from a Limits record, or the tables alone."""
    if isinstance(limits, Envelope):
        return limits
    if limits is None:
        limits = Limits(min_altitude_m=-np.inf, max_load_factor=np.inf)
    return Envelope(limits, model)


_CL_MAX_FLOOR: "weakref.WeakKeyDictionary" = weakref.WeakKeyDictionary()


def _cl_max_where_needed(model, mach, cl):
    """CLmax(M), evaluated only where the lift coefficient comes near it.

    Elsewhere the lowest CLmax of the model over its Mach range (sampled once per model at
    2001 points; a stall test cannot fail there) is returned instead: on typical maps most
    points fly far from stall, and this saves most of the CLmax fit evaluations."""
    floor = _CL_MAX_FLOOR.get(model)
    if floor is None:
        d = model.domain
        floor = float(np.min(model.cl_max(np.linspace(d.mach_min, d.mach_max, 2001),
                                          check=False)))
        _CL_MAX_FLOOR[model] = floor
    mach_b, cl_b = np.broadcast_arrays(mach, cl)
    with np.errstate(invalid="ignore"):
        near = ~(cl_b < 0.9 * floor)  # includes NaN/inf lift coefficients
    out = np.full(mach_b.shape, floor)
    if near.any():
        out[near] = model.cl_max(mach_b[near], check=False)
    return out


@dataclass
class EnergyMap:
    """Energy-state fields on a grid: rows over altitude, columns over true airspeed or Mach.

    Attributes
    ----------
    altitude_m : ndarray (nh,)
        Geometric altitude of the rows [m].
    speed : ndarray (nv,)
        Column axis: true airspeed [m/s] (``speed_kind == "tas"``) or Mach [-] (``"mach"``).
    speed_kind : str
        "tas" or "mach".
    fields : EnergyFields
        Arrays of shape (nh, nv): ``tas_m_s``, ``mach``, ``ps_m_s``, ``fuel_flow_kg_s``,
        ``feasible``, ``limits``, ...
    mass_kg, load_factor, throttle : float
        Conditions of the map [kg], [-], [-].
    rating : str
        Engine rating used.
    temperature_offset_k : float
        ISA + dT of the model's atmosphere [K].
    """

    altitude_m: np.ndarray
    speed: np.ndarray
    speed_kind: str
    fields: EnergyFields
    mass_kg: float
    load_factor: float
    throttle: float
    rating: str
    temperature_offset_k: float = 0.0
    notes: list[str] = field(default_factory=list)

    # Short-cuts to the most used fields.
    @property
    def tas_m_s(self) -> np.ndarray:
        """True airspeed at each grid point [m/s], shape (nh, nv)."""
        return self.fields.tas_m_s

    @property
    def mach(self) -> np.ndarray:
        """Mach number at each grid point [-], shape (nh, nv)."""
        return self.fields.mach

    @property
    def energy_height_m(self) -> np.ndarray:
        """Energy height [m], shape (nh, nv)."""
        return self.fields.energy_height_m

    @property
    def ps_m_s(self) -> np.ndarray:
        """Specific excess power [m/s] (NaN where infeasible), shape (nh, nv)."""
        return np.where(self.fields.feasible, self.fields.ps_m_s, np.nan)

    @property
    def fuel_flow_kg_s(self) -> np.ndarray:
        """Fuel flow [kg/s] (NaN where infeasible), shape (nh, nv)."""
        return np.where(self.fields.feasible, self.fields.fuel_flow_kg_s, np.nan)

    @property
    def fuel_specific_energy_m_kg(self) -> np.ndarray:
        """Ps / fuel flow [m/kg] (NaN where infeasible), shape (nh, nv)."""
        return np.where(self.fields.feasible, self.fields.fuel_specific_energy_m_kg, np.nan)

    @property
    def feasible(self) -> np.ndarray:
        """True where every limit is met, shape (nh, nv)."""
        return self.fields.feasible

    @property
    def shape(self) -> tuple[int, int]:
        """(number of altitudes, number of speeds)."""
        return (self.altitude_m.size, self.speed.size)

    def to_xarray(self):
        """The fields as an xarray Dataset over ``altitude_m`` x ``tas_m_s`` (or ``mach``),
        each variable with a ``units`` attribute; the conditions (mass, load factor, throttle,
        rating, temperature offset) as attributes. ``.to_netcdf(path)`` writes it. Needs xarray.
        """
        try:
            import xarray as xr
        except ImportError:  # pragma: no cover - xarray is an optional dependency
            raise ImportError("EnergyMap.to_xarray needs xarray: pip install xarray") from None
        col = "tas_m_s" if self.speed_kind == "tas" else "mach"
        dims = ("altitude_m", col)
        f = self.fields
        data = {
            "tas_m_s": (self.tas_m_s, "m/s"), "mach": (self.mach, "1"),
            "energy_height_m": (self.energy_height_m, "m"), "ps_m_s": (f.ps_m_s, "m/s"),
            "fuel_flow_kg_s": (f.fuel_flow_kg_s, "kg/s"),
            "fuel_specific_energy_m_kg": (f.fuel_specific_energy_m_kg, "m/kg"),
            "feasible": (self.feasible, "1"),
        }
        data.update({f"limit_{k}": (v, "1") for k, v in f.limits.items()})
        variables = {name: (dims, np.array(np.broadcast_to(v, self.shape)), {"units": u})
                     for name, (v, u) in data.items() if name != col}
        coords = {"altitude_m": ("altitude_m", self.altitude_m, {"units": "m"}),
                  col: (col, self.speed, {"units": "m/s" if col == "tas_m_s" else "1"})}
        return xr.Dataset(variables, coords=coords, attrs={
            "mass_kg": self.mass_kg, "load_factor": self.load_factor,
            "throttle": self.throttle, "rating": self.rating,
            "temperature_offset_k": self.temperature_offset_k,
            "note": "specific excess power and fuel fields of climbopt (SI); engineering "
                    "estimate, not for operational use"})


def build_energy_map(source, *, altitude_m=None, speed=None, speed_kind: str = "tas",
                     mass_kg: float | None = None, load_factor: float = 1.0,
                     throttle: float | None = None, rating: str | None = None,
                     limits=None, shape: tuple[int, int] | None = None,
                     model=None) -> EnergyMap:
    """Build an :class:`EnergyMap` over altitude x TAS (``speed_kind="tas"``) or altitude x Mach.

    Parameters
    ----------
    source : Scenario or AircraftModel
        With a scenario the model is built (unless ``model`` is given) and the scenario's
        envelope (without the climb profile's path rules), rating and grid size are used by
        default.
    altitude_m, speed : array_like, optional
        Row and column axes [m], [m/s or -]. Default: the model's data domain in altitude
        (cut to the altitude limits), and speeds from 0 to its highest Mach at the warmest
        altitude, with ``shape`` points (default the scenario's grid size, else 400 x 400).
    mass_kg : float, optional
        Mass [kg]; default the start mass.
    load_factor : float
        n = L / W [-].
    throttle : float, optional
        Fraction of the rating; default the model's maximum throttle.
    limits : Envelope or Limits, optional
        Overrides the scenario's envelope.
    """
    from climbopt.envelope import envelope_for

    if speed_kind not in ("tas", "mach"):
        raise ValueError(f"speed_kind must be 'tas' or 'mach', got {speed_kind!r}")
    scen = source if isinstance(source, Scenario) else None
    if model is None:
        if scen is None:
            model = source
        else:
            from climbopt.aircraft import build_model

            model = build_model(scen)
    if limits is None and scen is not None:
        limits = envelope_for(scen, model, path=False)
    limits = _as_envelope(limits, model) if limits is not None else None
    rating = rating or (None if scen is not None else model.default_rating)
    altitude_m, speed = _map_axes(model, scen, limits, shape, altitude_m, speed, speed_kind)
    mass = model.mass_kg if mass_kg is None else float(mass_kg)
    throttle = model.throttle_max if throttle is None else float(throttle)
    h_col = altitude_m[:, None]
    if speed_kind == "mach":
        tas = speed[None, :] * model.atmosphere(h_col).speed_of_sound_m_s
    else:
        tas = speed[None, :]
    f = _grid_fields(model, h_col, tas, mass, limits=limits, load_factor=load_factor,
                     throttle=throttle, rating=rating)
    label = rating
    if label is None:  # the mission's rating, in words when it is a schedule
        label = model.rating_label if getattr(model, "scheduled", False) else model.default_rating
    return EnergyMap(altitude_m, speed, speed_kind, f, mass, float(load_factor), throttle, label,
                     float(getattr(model, "temperature_offset_k", 0.0)))


def _map_axes(model, scen, limits, shape, altitude_m, speed, speed_kind: str):
    """(altitudes [m], speeds [m/s or -]) of a map, as flat float arrays: the given ones, or by
    default ``shape`` points (default the scenario's grid size, else 400 x 400) over the
    model's data domain in altitude (cut to the altitude limits) and speeds from 0 to its
    highest Mach at the warmest altitude (TAS, the first point above 0) or over its Mach range
    (Mach)."""
    if shape is None:
        if scen is not None:
            shape = (scen.solver.grid_altitude_points, scen.solver.grid_speed_points)
        else:
            shape = (400, 400)
    d = model.domain
    if altitude_m is None:
        lo, hi = d.altitude_min_m, d.altitude_max_m
        if limits is not None:
            lo, hi = max(lo, limits.altitude_min_m), min(hi, limits.altitude_max_m)
        altitude_m = np.linspace(lo, hi, shape[0])
    altitude_m = np.asarray(altitude_m, dtype=float).ravel()
    if speed is None:
        if speed_kind == "mach":
            speed = np.linspace(d.mach_min, d.mach_max, shape[1])
        else:
            a_max = float(np.max(model.atmosphere(altitude_m).speed_of_sound_m_s))
            speed = np.linspace(0.0, d.mach_max * a_max, shape[1] + 1)[1:]
    return altitude_m, np.asarray(speed, dtype=float).ravel()


#: Grid points per block of rows in :func:`_grid_fields` (the temporaries of one block stay at a
#: few MiB, so a map's peak memory is little more than its results).
_BLOCK_POINTS = 40_000

#: Per-point fields that :func:`_grid_fields` assembles block by block.
_GRID_FIELDS = ("mach", "dynamic_pressure_pa", "cl", "cl_max", "thrust_n", "drag_n", "ps_m_s",
                "fuel_flow_kg_s")


def _grid_fields(model, h_col, tas, mass, **options) -> EnergyFields:
    """:func:`energy_fields` on a grid (altitude column ``h_col`` (nh, 1), ``tas`` (1, nv) or
    (nh, nv)), computed in blocks of rows into preallocated arrays: the same numbers, with the
    temporaries of one block instead of the whole grid's (an 800 x 800 map peaked at about
    112 MiB in one piece, about 60 MiB in blocks; measured with tracemalloc)."""
    shape = (h_col.shape[0], tas.shape[1])
    rows = max(1, _BLOCK_POINTS // max(shape[1], 1))
    if shape[0] <= rows:
        return energy_fields(model, h_col, tas, mass, **options)
    out = {name: np.empty(shape) for name in _GRID_FIELDS}
    pressure = np.empty((shape[0], 1))
    limits: dict = {}
    for r0 in range(0, shape[0], rows):
        r1 = min(r0 + rows, shape[0])
        part = energy_fields(model, h_col[r0:r1], tas if tas.shape[0] == 1 else tas[r0:r1], mass,
                             **options)
        for name in _GRID_FIELDS:
            out[name][r0:r1] = getattr(part, name)
        pressure[r0:r1] = np.broadcast_to(part._pressure_pa, (r1 - r0, 1))
        for name, ok in part.limits.items():
            limits.setdefault(name, np.empty(shape, dtype=bool))[r0:r1] = ok
    perf = _Perf(**{k: out[k] for k in _GRID_FIELDS if k not in ("mach", "cl_max")})
    return EnergyFields(h_col, tas, out["mach"], pressure, perf, out["cl_max"], limits, shape)


@dataclass
class _Perf:
    """The point-performance arrays :class:`EnergyFields` keeps (a grid assembled in blocks)."""

    dynamic_pressure_pa: np.ndarray
    cl: np.ndarray
    thrust_n: np.ndarray
    drag_n: np.ndarray
    ps_m_s: np.ndarray
    fuel_flow_kg_s: np.ndarray


# ---------------------------------------------------------------------------------------------
# 1-D maximisation along many lines at once


def maximise_on_lines(objective, lo, hi, points: int = 300, *, refine: bool = True,
                      peaks: int = 2, rounds: int = 6, refine_points: int = 15):
    """Maximise ``objective`` along many 1-D intervals at once.

    Each line ``i`` is sampled at ``points`` equally spaced parameters in ``[lo[i], hi[i]]``.
    The best ``peaks`` sampled local maxima of each line are then refined by iterated grid
    search (a derivative-free bracketing search, like golden section but evaluating
    ``refine_points`` points per line per round so that the work is vectorised): each round
    samples the current bracket evenly and shrinks it to the two neighbours of the best sample,
    i.e. by a factor ``(refine_points + 1) / 2``. The best point ever evaluated is returned.
    Infeasible points must return ``-inf``: a maximum on a feasibility boundary is then
    approached from the feasible side to within the final bracket.

    Parameters
    ----------
    objective : callable
        ``objective(x, line)`` with ``x`` of shape (R, K) and ``line`` (R,) the index of the
        line each row belongs to, returns values of shape (R, K) (``-inf`` where infeasible).
    lo, hi : array_like (L,)
        Parameter bounds of each line.
    points : int
        Samples per line (>= 3).
    refine : bool
        Refine the best sampled peaks (True) or return the best sample (False).
    peaks : int
        How many distinct sampled local maxima per line are refined (2 catches a second branch
        whose refined value overtakes the first).
    rounds, refine_points : int
        Refinement rounds and samples per round; the bracket (initially two sample spacings)
        shrinks by ``((refine_points + 1) / 2) ** rounds`` (8 ** 6 = 2.6e5 by default).

    Returns
    -------
    x_best, f_best : ndarray (L,)
        Best parameter and its value (``-inf`` and NaN parameter where nothing was feasible).
    """
    lo = np.atleast_1d(np.asarray(lo, dtype=float))
    hi = np.atleast_1d(np.asarray(hi, dtype=float))
    n_lines = lo.size
    if points < 3:
        raise ValueError("maximise_on_lines needs at least 3 points per line")
    s = np.linspace(0.0, 1.0, points)
    width = hi - lo
    x = lo[:, None] + width[:, None] * s[None, :]
    rows = np.arange(n_lines)
    f = _clean(objective(x, rows))
    best_i = np.argmax(f, axis=1)
    x_best = x[rows, best_i]
    f_best = f[rows, best_i]
    if refine and n_lines > 0:
        x_best, f_best = _refine_peaks(objective, x, f, x_best, f_best, peaks, rounds,
                                       refine_points)
    x_best = np.where(np.isfinite(f_best), x_best, np.nan)
    return x_best, f_best


def _refine_peaks(objective, x, f, x_best, f_best, peaks: int, rounds: int,
                  refine_points: int):
    """(x_best, f_best) of :func:`maximise_on_lines` after refining the best ``peaks`` sampled
    local maxima of each line (samples ``x``, values ``f``, shape (L, points)) by
    :func:`_grid_refine`, each from the bracket of its two neighbouring samples; a refined
    point replaces the best sample only where it is better."""
    n_lines, points = x.shape
    rows = np.arange(n_lines)
    # sampled local maxima (plateaus count once: strict rise on the left)
    pad = np.full((n_lines, 1), -np.inf)
    left = np.concatenate([pad, f[:, :-1]], axis=1)
    right = np.concatenate([f[:, 1:], pad], axis=1)
    is_peak = (f > left) & (f >= right) & np.isfinite(f)
    peak_val = np.where(is_peak, f, -np.inf)
    n_peaks = min(peaks, points)
    order = np.argsort(-peak_val, axis=1, kind="stable")[:, :n_peaks]  # (L, P)
    idx = order.T.ravel()  # peak-major: row j*L + i is peak j of line i
    line = np.tile(rows, n_peaks)
    a = x[line, np.maximum(idx - 1, 0)]
    b = x[line, np.minimum(idx + 1, points - 1)]
    xr, fr = _grid_refine(objective, line, a, b, rounds, refine_points)
    xr = xr.reshape(n_peaks, n_lines)
    fr = fr.reshape(n_peaks, n_lines)
    for j in range(n_peaks):
        ok = np.isfinite(peak_val[rows, order[:, j]])
        better = ok & (fr[j] > f_best)
        x_best = np.where(better, xr[j], x_best)
        f_best = np.where(better, fr[j], f_best)
    return x_best, f_best


def _clean(values):
    v = np.asarray(values, dtype=float)
    return np.where(np.isnan(v), -np.inf, v)


def _grid_refine(objective, line, a, b, rounds, m):
    """Iterated grid search on [a, b] per line (vectorised); returns the best evaluated point."""
    t = np.arange(1, m + 1) / (m + 1)
    x_best = 0.5 * (a + b)
    f_best = np.full(a.shape, -np.inf)
    r = np.arange(a.size)
    for _ in range(rounds):
        w = b - a
        x = a[:, None] + w[:, None] * t[None, :]
        f = _clean(objective(x, line))
        j = np.argmax(f, axis=1)
        fj = f[r, j]
        better = fj > f_best
        x_best = np.where(better, x[r, j], x_best)
        f_best = np.where(better, fj, f_best)
        # new bracket: the neighbours of the best sample (bracket ends count as neighbours)
        step = w / (m + 1)
        a = np.where(np.isfinite(fj), x[r, j] - step, a)
        b = np.where(np.isfinite(fj), x[r, j] + step, b)
    return x_best, f_best


def best_climb_speed(model, altitude_m, mass_kg=None, *, objective: str = "time",
                     limits: Limits | None = None, load_factor: float = 1.0,
                     throttle: float | None = None, rating: str | None = None,
                     points: int = 400, refine: bool = True):
    """Speed of maximum Ps (``objective="time"``) or of maximum Ps / fuel flow (``"fuel"``) at
    each given altitude: the steady (constant-speed) best-rate and most-economical climb speeds.

    For steady climb Ps is the rate of climb (Anderson 1999, ch. 5: R/C = V (T - D) / W).

    Returns
    -------
    tas_m_s, value : ndarray
        Best true airspeed [m/s] and the maximum Ps [m/s] (or Ps / fuel flow [m/kg]); NaN and
        -inf where no speed is feasible.
    """
    if objective not in ("time", "fuel"):
        raise ValueError(f"objective must be 'time' or 'fuel', got {objective!r}")
    h = np.atleast_1d(np.asarray(altitude_m, dtype=float))
    mass = model.mass_kg if mass_kg is None else mass_kg
    throttle = model.throttle_max if throttle is None else throttle
    d = model.domain
    a = model.atmosphere(h).speed_of_sound_m_s
    lo = np.maximum(d.mach_min, 1e-3) * a
    hi = d.mach_max * a

    def obj(v, line):
        f = energy_fields(model, h[line][:, None], v, mass, limits=limits, load_factor=load_factor,
                          throttle=throttle, rating=rating)
        val = f.ps_m_s if objective == "time" else f.fuel_specific_energy_m_kg
        ok = f.feasible if objective == "time" else f.feasible & (f.ps_m_s > 0.0)
        return np.where(ok, val, -np.inf)

    return maximise_on_lines(obj, lo, hi, points, refine=refine)
