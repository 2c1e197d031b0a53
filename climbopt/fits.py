"""Smooth (C2) fits of sparse tables, evaluated identically on numpy arrays and CasADi MX symbols.

Method (chosen so the fits are twice continuously differentiable for IPOPT yet do not overshoot):

1. The table is resampled densely with a monotone piecewise-cubic Hermite interpolant (PCHIP;
   Fritsch & Carlson, SIAM J. Numer. Anal. 17(2), 1980), which never overshoots the data: between
   two table points it stays within their values, and it keeps local extrema at table points.
   Each table interval is split into ``SUBDIVISIONS`` equal pieces. 2-D tables are resampled
   along each axis in turn (tensor-product PCHIP).
2. Beyond the data the samples are extended linearly with PCHIP's end slope over a margin (see
   :func:`margin`), so that stray solver iterates just outside the data still see finite,
   smooth values rather than the exact zero a CasADi B-spline returns outside its knots.
3. A C2 cubic interpolating B-spline (not-a-knot ends) is passed through the dense samples
   (de Boor, *A Practical Guide to Splines*, 1978). Because the samples are dense and PCHIP is C1,
   the spline's deviation from PCHIP is a small fraction of the data spacing's curvature jump.

The knots and coefficients are computed once with :mod:`scipy.interpolate`; the numpy path then
evaluates them itself (Cox-de Boor recursion for the four cubic B-splines that are nonzero at a
point; de Boor 1978, ch. IX), the MX path hands the same knots and coefficients to
``casadi.bspline``, so both agree to rounding. Two 2-D fits over the same table grid (e.g. thrust
and fuel flow over Mach x altitude) can share one basis evaluation (:meth:`Fit2D.basis`,
:meth:`Fit2D.at`), and a grid whose second input is constant along rows (an altitude column
against a Mach grid) evaluates that input's basis once per row.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np
from scipy.interpolate import PchipInterpolator, RectBivariateSpline, make_interp_spline

from climbopt.staging import bspline_function, call_table


#: Dense pieces per table interval in step 1.
SUBDIVISIONS = 8


class ModelDomainError(ValueError):
    """A model table was asked for a value far outside its data."""


def is_casadi(x) -> bool:
    """True when ``x`` is a CasADi symbolic or numeric matrix type (without importing CasADi,
    which numpy-only work such as energy maps never needs: about 0.15 s of start-up)."""
    if type(x).__module__.split(".")[0] != "casadi":
        return False
    import casadi as ca

    return isinstance(x, (ca.MX, ca.SX, ca.DM))


def smoothstep(s):
    """C2 quintic step 6 s^5 - 15 s^4 + 10 s^3 of ``s`` clipped to [0, 1]: 0 below, 1 above,
    with continuous first and second derivatives (numpy arrays or CasADi symbols)."""
    if is_casadi(s):
        import casadi as ca

        c = ca.fmin(ca.fmax(s, 0.0), 1.0)
    else:
        c = np.clip(s, 0.0, 1.0)
    return c**3 * (10.0 - 15.0 * c + 6.0 * c**2)


def margin(grid: np.ndarray) -> float:
    """Width of the linear extension beyond each end of a table axis: 10% of the axis span."""
    return 0.10 * float(grid[-1] - grid[0])


def _dense_axis(grid: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Dense sample points: each interval split in SUBDIVISIONS pieces, plus margin points.

    Returns (all points, points inside the data, points in the low margin, in the high margin).
    """
    inside = [np.linspace(a, b, SUBDIVISIONS + 1)[:-1] for a, b in zip(grid[:-1], grid[1:])]
    inside = np.concatenate(inside + [grid[-1:]])
    step = float(np.min(np.diff(inside)))
    m = margin(grid)
    n_m = max(2, int(np.ceil(m / step)))
    low = grid[0] - m * np.arange(n_m, 0, -1) / n_m
    high = grid[-1] + m * np.arange(1, n_m + 1) / n_m
    return np.concatenate([low, inside, high]), inside, low, high


def _pchip_extended(grid: np.ndarray, values: np.ndarray, points: np.ndarray, axis: int = 0):
    """PCHIP of ``values`` along ``axis`` at ``points``, extended linearly beyond the grid."""
    p = PchipInterpolator(grid, values, axis=axis, extrapolate=True)
    dp = p.derivative()
    out = p(np.clip(points, grid[0], grid[-1]))
    lo = points < grid[0]
    hi = points > grid[-1]
    shape = [1] * out.ndim
    shape[axis] = -1
    if lo.any():
        d = (points - grid[0]).reshape(shape)
        lo_v = np.take(p(grid[0:1]), 0, axis=axis)
        lo_s = np.take(dp(grid[0:1]), 0, axis=axis)
        ext = np.expand_dims(lo_v, axis) + np.expand_dims(lo_s, axis) * d
        sel = [slice(None)] * out.ndim
        sel[axis] = lo
        out[tuple(sel)] = ext[tuple(sel)]
    if hi.any():
        d = (points - grid[-1]).reshape(shape)
        hi_v = np.take(p(grid[-1:]), 0, axis=axis)
        hi_s = np.take(dp(grid[-1:]), 0, axis=axis)
        ext = np.expand_dims(hi_v, axis) + np.expand_dims(hi_s, axis) * d
        sel = [slice(None)] * out.ndim
        sel[axis] = hi
        out[tuple(sel)] = ext[tuple(sel)]
    return out


def _cubic_basis(t: np.ndarray, x: np.ndarray, k: np.ndarray) -> np.ndarray:
    """The four cubic B-splines of knots ``t`` that are nonzero on knot interval ``k`` (so
    t[k] <= x <= t[k+1]), at ``x``: weights (4, n) of coefficients k-3..k (Cox-de Boor recursion,
    de Boor 1978, ch. IX)."""
    left = [None] + [x - t[k + 1 - j] for j in (1, 2, 3)]
    right = [None] + [t[k + j] - x for j in (1, 2, 3)]
    basis = [np.ones_like(x)]
    for j in (1, 2, 3):
        saved = np.zeros_like(x)
        for r in range(j):
            temp = basis[r] / (right[r + 1] + left[j - r])
            basis[r] = saved + right[r + 1] * temp
            saved = left[j - r] * temp
        basis.append(saved)
    return np.stack(basis)


class _Axis:
    """One knot vector of a cubic spline: interval look-up and the power form of its basis.

    On knot interval j (j = 0 .. n-1 between the breakpoints, local variable s in [0, 1]) the
    spline is sum_p P[j, p] s^p with P[j] = A[j] @ c[j:j+4]; ``A`` (n, 4, 4) is found by
    evaluating the four nonzero B-splines at s = 0, 1/3, 2/3, 1 (exact recursion) and solving
    the 4 x 4 Vandermonde system. The interval of a point is found in O(1) from a table of
    buckets no wider than half the narrowest interval (each holds at most one breakpoint)."""

    def __init__(self, t: np.ndarray):
        self.t = np.asarray(t, dtype=float)
        n_coef = self.t.size - 4
        self.breaks = self.t[3:n_coef + 1]
        self.lo, self.hi = float(self.breaks[0]), float(self.breaks[-1])
        widths = np.diff(self.breaks)
        self.n = widths.size
        self.inv_width = 1.0 / widths
        self.bucket = 0.5 * float(widths.min())
        n_buckets = int(np.ceil((self.hi - self.lo) / self.bucket)) + 1
        starts = self.lo + self.bucket * np.arange(n_buckets)
        self.table = np.clip(np.searchsorted(self.breaks, starts, side="right") - 1, 0, self.n - 1)
        nodes = np.array([0.0, 1.0 / 3.0, 2.0 / 3.0, 1.0])
        j = np.repeat(np.arange(self.n), 4)
        x = self.breaks[j] + np.tile(nodes, self.n) * widths[j]
        values = _cubic_basis(self.t, x, j + 3).reshape(4, self.n, 4)  # (basis r, j, node)
        vander_inv = np.linalg.inv(np.vander(nodes, 4, increasing=True))  # node x power
        self.power = np.einsum("pn,rjn->jpr", vander_inv, values)  # (j, power p, basis r)

    def locate(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(interval index, local variable s in [0, 1]) of points ``x`` inside [lo, hi]."""
        b = ((x - self.lo) * (1.0 / self.bucket)).astype(np.intp)
        np.clip(b, 0, self.table.size - 1, out=b)
        j = self.table[b]
        j += x >= self.breaks[np.minimum(j + 1, self.n)]
        np.minimum(j, self.n - 1, out=j)
        return j, (x - self.breaks[j]) * self.inv_width[j]


def _horner(p, s):
    """sum_k p[..., k] s^k for the last axis of length 4."""
    return ((p[..., 3] * s + p[..., 2]) * s + p[..., 1]) * s + p[..., 0]


def _check_grid(grid: np.ndarray, name: str) -> None:
    if grid.ndim != 1 or grid.size < 2:
        raise ValueError(f"{name}: a table axis needs at least 2 points")
    if not np.all(np.diff(grid) > 0):
        raise ValueError(f"{name}: table axis must be strictly increasing")


@dataclass(frozen=True)
class Basis2D:
    """Where some points lie on a 2-D fit's grid: ``u`` and ``v`` are (knot interval index,
    local variable s in [0, 1]) per axis (see :meth:`_Axis.locate`); ``rows``: ``v`` holds one
    entry per row of a 2-D ``shape`` (a grid) instead of one per point."""

    shape: tuple
    u: tuple
    v: tuple
    rows: bool = False


@dataclass(frozen=True)
class Interval:
    """Closed interval [low, high] of one input of a fit."""

    low: float
    high: float


class Fit1D:
    """C2 fit y(x) of a 1-D table (see module docstring for the method).

    Parameters
    ----------
    x, y : array_like
        Table grid (strictly increasing) and values.
    name : str
        Quantity name used in error messages, e.g. ``"CD0(Mach)"``.
    """

    def __init__(self, x, y, name: str):
        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        _check_grid(x, name)
        if y.shape != x.shape:
            raise ValueError(f"{name}: {y.size} values for {x.size} grid points")
        self.name = name
        self.data = Interval(float(x[0]), float(x[-1]))
        dense, _, _, _ = _dense_axis(x)
        self.fit = Interval(float(dense[0]), float(dense[-1]))
        samples = _pchip_extended(x, y, dense)
        self._spline = make_interp_spline(dense, samples, k=3)
        self.knots = np.asarray(self._spline.t, dtype=float)
        self.coefficients = np.asarray(self._spline.c, dtype=float)
        self._axis = _Axis(self.knots)
        windows = self.coefficients[np.arange(self._axis.n)[:, None] + np.arange(4)]
        power = np.einsum("jpr,jr->jp", self._axis.power, windows)  # (interval, power)
        self._power = np.ascontiguousarray(power.T)  # (power, interval): one gather per power
        # the same knots and coefficients for CasADi (climbopt.staging.bspline_function)
        self._casadi_spline = ((tuple(map(float, self.knots)),), self.coefficients)
        self._ca = None

    def _casadi_function(self):
        if self._ca is None:
            self._ca = bspline_function(_casadi_name(self.name), *self._casadi_spline)
        return self._ca

    def __call__(self, x, *, check: bool = True):
        """Evaluate at ``x`` (numpy array/float, CasADi MX, or an SX scalar: see
        :func:`climbopt.staging.call_table`).

        numpy: raises :class:`ModelDomainError` where ``x`` lies outside the fit's extended
        domain when ``check`` is true; with ``check=False`` inputs are clipped to that domain.
        """
        if is_casadi(x):
            import casadi as ca

            f = self._casadi_function()
            if x.numel() == 1:
                return call_table(f, x, self._casadi_spline)
            if isinstance(x, ca.SX):
                raise TypeError(f"{self.name}: SX arguments of a table must be scalars")
            return ca.reshape(f.map(x.numel())(ca.vec(x).T), x.shape)
        x = np.asarray(x, dtype=float)
        if check:
            _domain_check(self.name, "input", x, self.fit)
        j, s = self._axis.locate(np.clip(x, self.fit.low, self.fit.high).ravel())
        c = self._power
        out = ((c[3].take(j) * s + c[2].take(j)) * s + c[1].take(j)) * s + c[0].take(j)
        return out.reshape(x.shape) if x.ndim else out[0]


class Fit2D:
    """C2 tensor-product fit z(u, v) of a 2-D table with rows over ``u`` and columns over ``v``."""

    def __init__(self, u, v, z, name: str, u_name: str = "u", v_name: str = "v"):
        u = np.asarray(u, dtype=float)
        v = np.asarray(v, dtype=float)
        z = np.asarray(z, dtype=float)
        _check_grid(u, f"{name} {u_name}")
        _check_grid(v, f"{name} {v_name}")
        if z.shape != (u.size, v.size):
            raise ValueError(f"{name}: table shape {z.shape}, expected {(u.size, v.size)}")
        self.name, self.u_name, self.v_name = name, u_name, v_name
        self.data_u = Interval(float(u[0]), float(u[-1]))
        self.data_v = Interval(float(v[0]), float(v[-1]))
        du, _, _, _ = _dense_axis(u)
        dv, _, _, _ = _dense_axis(v)
        self.fit_u = Interval(float(du[0]), float(du[-1]))
        self.fit_v = Interval(float(dv[0]), float(dv[-1]))
        along_v = _pchip_extended(v, z, dv, axis=1)  # (nu, ndv)
        dense = _pchip_extended(u, along_v, du, axis=0)  # (ndu, ndv)
        self._spline = RectBivariateSpline(du, dv, dense, kx=3, ky=3, s=0)
        tu, tv, c = self._spline.tck
        self.knots_u = np.asarray(tu, dtype=float)
        self.knots_v = np.asarray(tv, dtype=float)
        self.coefficients = np.asarray(c, dtype=float).reshape(tu.size - 4, tv.size - 4)
        self._axis_u, self._axis_v = _Axis(self.knots_u), _Axis(self.knots_v)
        nu, nv = self._axis_u.n, self._axis_v.n
        win = self.coefficients[(np.arange(nu)[:, None] + np.arange(4))[:, None, :, None],
                                (np.arange(nv)[:, None] + np.arange(4))[None, :, None, :]]
        # bicubic power form of each cell (i, j): P[i, j, p, q] s^p r^q
        self._power = np.einsum("ipa,jqb,ijab->ijpq", self._axis_u.power, self._axis_v.power,
                                win, optimize=True)
        # the same, one row per coefficient s^p r^q (index 4 p + q) over the cells i * nv + j:
        # 16 one-dimensional gathers are several times faster than one (n, 4, 4) gather
        self._power_rows = np.ascontiguousarray(self._power.reshape(nu * nv, 16).T)
        # the same knots and coefficients for CasADi (climbopt.staging.bspline_function)
        knots = (tuple(map(float, self.knots_u)), tuple(map(float, self.knots_v)))
        self._casadi_spline = (knots, self.coefficients.ravel(order="F"))
        self._ca = None

    def same_grid(self, other: "Fit2D") -> bool:
        """True when ``other`` has the same knots and domain (one basis serves both)."""
        return (self.fit_u == other.fit_u and self.fit_v == other.fit_v
                and np.array_equal(self.knots_u, other.knots_u)
                and np.array_equal(self.knots_v, other.knots_v))

    def basis(self, u, v, *, check: bool = True) -> "Basis2D":
        """Where numpy points (u, v) (broadcast together) lie on the fit's grid, for :meth:`at`.

        Raises :class:`ModelDomainError` outside the fit's domain when ``check`` is true; with
        ``check=False`` the inputs are clipped to it. A ``v`` of shape (n, 1) against a ``u``
        of n rows (a grid) is located once per row."""
        u = np.asarray(u, dtype=float)
        v = np.asarray(v, dtype=float)
        shape = np.broadcast_shapes(u.shape, v.shape)
        if check:
            _domain_check(self.name, self.u_name, u, self.fit_u)
            _domain_check(self.name, self.v_name, v, self.fit_v)
        rows = len(shape) == 2 and v.shape == (shape[0], 1) and shape[1] > 1
        if not rows:
            v = np.broadcast_to(v, shape)
        uc = np.clip(np.broadcast_to(u, shape), self.fit_u.low, self.fit_u.high).ravel()
        vc = np.clip(v, self.fit_v.low, self.fit_v.high).ravel()
        return Basis2D(shape, self._axis_u.locate(uc), self._axis_v.locate(vc), rows)

    def at(self, basis: "Basis2D") -> np.ndarray:
        """The fit's values at the points of ``basis`` (from :meth:`basis` of a fit with the same
        grid, see :meth:`same_grid`): Horner's rule on the bicubic cell polynomial."""
        iu, su = basis.u
        iv, sv = basis.v
        if basis.rows:  # the polynomial in s of each (row, u-interval), then 4 values a point
            q = _horner(self._power[:, iv].transpose(1, 0, 2, 3), sv[:, None, None])
            nrow, n_u = q.shape[0], q.shape[1]
            cell = (np.arange(nrow)[:, None] * n_u).repeat(basis.shape[1], 1).ravel() + iu
            return _horner(q.reshape(nrow * n_u, 4)[cell], su).reshape(basis.shape)
        cell = iu * self._power.shape[1] + iv
        g = [row.take(cell) for row in self._power_rows]
        in_v = [((g[4 * p + 3] * sv + g[4 * p + 2]) * sv + g[4 * p + 1]) * sv + g[4 * p]
                for p in range(4)]
        return (((in_v[3] * su + in_v[2]) * su + in_v[1]) * su + in_v[0]).reshape(basis.shape)

    def _casadi_function(self):
        if self._ca is None:
            self._ca = bspline_function(_casadi_name(self.name), *self._casadi_spline)
        return self._ca

    def __call__(self, u, v, *, check: bool = True):
        """Evaluate at (u, v): numpy arrays broadcast together, CasADi MX scalars/rows, or SX
        scalars (see :func:`climbopt.staging.call_table`)."""
        if is_casadi(u) or is_casadi(v):
            import casadi as ca

            if isinstance(u, ca.SX) or isinstance(v, ca.SX):
                if ca.SX(u).numel() != 1 or ca.SX(v).numel() != 1:
                    raise TypeError(f"{self.name}: SX arguments of a table must be scalars")
                return call_table(self._casadi_function(), ca.vertcat(u, v),
                                  self._casadi_spline)
            u = ca.MX(u) if not isinstance(u, ca.MX) else u
            v = ca.MX(v) if not isinstance(v, ca.MX) else v
            f = self._casadi_function()
            if u.numel() == 1 and v.numel() == 1:
                return f(ca.vertcat(u, v))
            n = max(u.numel(), v.numel())
            uu = ca.repmat(ca.vec(u).T, 1, n) if u.numel() == 1 else ca.vec(u).T
            vv = ca.repmat(ca.vec(v).T, 1, n) if v.numel() == 1 else ca.vec(v).T
            out = f.map(n)(ca.vertcat(uu, vv))
            return ca.reshape(out, u.shape if u.numel() == n else v.shape)
        return self.at(self.basis(u, v, check=check))


def _casadi_name(name: str) -> str:
    """A valid CasADi function name made from a quantity name like ``thrust[max](Mach,altitude)``."""
    words = re.findall(r"[A-Za-z0-9]+", name)
    return "fit_" + "_".join(words)


def _domain_check(name: str, what: str, x: np.ndarray, interval: Interval) -> None:
    bad = ~((x >= interval.low) & (x <= interval.high))
    if np.any(bad):
        worst = x[bad].flat[0]
        raise ModelDomainError(
            f"{name}: {what} = {worst:.6g} lies outside the table data and its margin "
            f"[{interval.low:.6g}, {interval.high:.6g}]; climbopt does not extrapolate further"
        )
