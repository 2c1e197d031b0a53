"""Smooth table fits: no overshoot, C2, numpy and CasADi agree, no silent extrapolation."""

import casadi as ca
import numpy as np
import pytest

from climbopt.fits import Fit1D, Fit2D, ModelDomainError

# CD0(M) of the 1969 interceptor (Bryson, Desai & Hoffman, J. Aircraft 6(6), 1969, as tabulated
# in Betts 2010): a sharp transonic rise that makes plain cubic splines overshoot.
MACH = [0.0, 0.4, 0.8, 0.9, 1.0, 1.2, 1.4, 1.6, 1.8]
CD0 = [0.013, 0.013, 0.013, 0.014, 0.031, 0.041, 0.039, 0.036, 0.035]


def test_fit1d_no_overshoot_between_table_points():
    """Between two table points the fit stays within their values (up to 1% of the step)."""
    fit = Fit1D(MACH, CD0, "CD0(Mach)")
    for a, b, ya, yb in zip(MACH[:-1], MACH[1:], CD0[:-1], CD0[1:]):
        x = np.linspace(a, b, 201)
        y = fit(x)
        lo, hi = min(ya, yb), max(ya, yb)
        tol = 0.01 * max(hi - lo, 1e-3)
        assert y.min() >= lo - tol, (a, b, y.min(), lo)
        assert y.max() <= hi + tol, (a, b, y.max(), hi)
    # A plain not-a-knot cubic spline through the same 9 points dips below the flat subsonic
    # CD0 on [0.8, 0.9] ahead of the drag rise: the problem the fit avoids (measured here).
    from scipy.interpolate import make_interp_spline

    plain = make_interp_spline(MACH, CD0, k=3)(np.linspace(0.8, 0.9, 201))
    assert plain.min() < 0.013 - 1e-3


def test_fit1d_reproduces_table_points():
    fit = Fit1D(MACH, CD0, "CD0(Mach)")
    np.testing.assert_allclose(fit(np.array(MACH)), CD0, rtol=0, atol=1e-12)


def test_fit1d_is_c2():
    """Second derivative continuous: left and right finite differences agree at knots."""
    fit = Fit1D(MACH, CD0, "CD0(Mach)")
    d2 = fit._spline.derivative(2)
    for x0 in MACH[1:-1]:
        assert abs(d2(x0 - 1e-9) - d2(x0 + 1e-9)) < 1e-4 * (1 + abs(d2(x0)))


def test_fit_numpy_and_casadi_agree_1e9():
    """The numpy and CasADi MX evaluations agree to 1e-9 relative at random points."""
    rng = np.random.default_rng(1)
    fit1 = Fit1D(MACH, CD0, "CD0(Mach)")
    x = rng.uniform(fit1.fit.low, fit1.fit.high, 50)
    xs = ca.MX.sym("x")
    f = ca.Function("f", [xs], [fit1(xs)])
    np.testing.assert_allclose([float(f(v)) for v in x], fit1(x), rtol=1e-9)

    alt = np.array([0, 5, 10, 20, 40, 70]) * 304.8e0 * 1000
    thrust = np.outer([1.0, 1.1, 1.3, 1.2], np.exp(-alt / 9000.0)) * 1e5
    fit2 = Fit2D([0.0, 0.6, 1.2, 1.8], alt, thrust, "T(Mach,h)")
    m = rng.uniform(0, 1.8, 40)
    h = rng.uniform(0, alt[-1], 40)
    ms, hs = ca.MX.sym("m"), ca.MX.sym("h")
    g = ca.Function("g", [ms, hs], [fit2(ms, hs)])
    np.testing.assert_allclose([float(g(a, b)) for a, b in zip(m, h)], fit2(m, h), rtol=1e-9)
    # vector MX arguments map over columns
    mv = ca.MX.sym("mv", 1, 5)
    gv = ca.Function("gv", [mv], [fit2(mv, 1000.0)])
    np.testing.assert_allclose(np.array(gv(m[:5])).ravel(), fit2(m[:5], 1000.0), rtol=1e-9)


def test_fit_casadi_margin_is_not_zero():
    """Just outside the table the CasADi fit gives the smooth extension, not B-spline zero."""
    fit = Fit1D(MACH, CD0, "CD0(Mach)")
    xs = ca.MX.sym("x")
    f = ca.Function("f", [xs], [fit(xs)])
    assert float(f(1.85)) == pytest.approx(fit(1.85), rel=1e-12)
    assert float(f(1.85)) > 0.03


def test_fit_far_outside_raises_invalid():
    fit = Fit1D(MACH, CD0, "CD0(Mach)")
    with pytest.raises(ModelDomainError, match=r"CD0\(Mach\).*2\.5.*outside the table"):
        fit(np.array([0.5, 2.5]))
    # with check=False the caller asked for clipping explicitly
    assert fit(2.5, check=False) == pytest.approx(fit(fit.fit.high))


def test_fit_invalid_tables():
    with pytest.raises(ValueError, match="strictly increasing"):
        Fit1D([0.0, 0.5, 0.5], [1, 2, 3], "x")
    with pytest.raises(ValueError, match="values for"):
        Fit1D([0.0, 0.5, 1.0], [1, 2], "x")
    with pytest.raises(ValueError, match="table shape"):
        Fit2D([0, 1], [0, 1, 2], np.zeros((3, 2)), "z")


def _thrust_fit():
    alt = np.array([0, 5, 10, 20, 40, 70]) * 304.8
    thrust = np.outer([1.0, 1.1, 1.3, 1.2], np.exp(-alt / 9000.0)) * 1e5
    fuel = np.outer([0.9, 1.0, 1.2, 1.3], np.exp(-alt / 11000.0)) * 2.0
    mach = [0.0, 0.6, 1.2, 1.8]
    return (Fit2D(mach, alt, thrust, "T(Mach,h)", "Mach", "h"),
            Fit2D(mach, alt, fuel, "F(Mach,h)", "Mach", "h"))


def test_numpy_evaluation_agrees_with_scipy_and_casadi_1e9():
    """climbopt's own numpy evaluation (power form per interval) agrees with scipy's B-spline
    evaluation of the same knots and with CasADi's MX B-spline to 1e-9 relative, at random
    points, at the knots and at both ends of the fitted domain."""
    rng = np.random.default_rng(11)
    fit1 = Fit1D(MACH, CD0, "CD0(Mach)")
    x = np.concatenate([rng.uniform(fit1.fit.low, fit1.fit.high, 300), fit1.knots[3:-3],
                        [fit1.fit.low, fit1.fit.high]])
    ours = fit1(x)
    np.testing.assert_allclose(ours, fit1._spline(x), rtol=1e-9)
    f = ca.Function("f", [xs := ca.MX.sym("x")], [fit1(xs)])
    np.testing.assert_allclose(np.asarray(f.map(x.size)(x)).ravel(), ours, rtol=1e-9)

    fit2, _ = _thrust_fit()
    u = np.concatenate([rng.uniform(fit2.fit_u.low, fit2.fit_u.high, 300), fit2.knots_u[3:-3],
                        [fit2.fit_u.low, fit2.fit_u.high]])
    v = np.concatenate([rng.uniform(fit2.fit_v.low, fit2.fit_v.high, 300), fit2.knots_v[3:-3],
                        [fit2.fit_v.high, fit2.fit_v.low]])
    v = np.resize(v, u.size)
    ours = fit2(u, v)
    np.testing.assert_allclose(ours, fit2._spline.ev(u, v), rtol=1e-9)
    g = ca.Function("g", [us := ca.MX.sym("u", 1, u.size), vs := ca.MX.sym("v", 1, u.size)],
                    [fit2(us, vs)])
    np.testing.assert_allclose(np.asarray(g(u, v)).ravel(), ours, rtol=1e-9)


def test_shared_basis_and_grid_rows_equal_plain_evaluation():
    """Two fits on one grid evaluated from one basis, and a grid whose altitude is a column
    (located once per row), give exactly what separate point-by-point evaluation gives."""
    thrust, fuel = _thrust_fit()
    assert thrust.same_grid(fuel)
    rng = np.random.default_rng(5)
    m = rng.uniform(0.0, 1.8, (7, 9))
    h = rng.uniform(0.0, 70 * 304.8, (7, 1))
    basis = thrust.basis(m, h)
    assert basis.rows and basis.shape == (7, 9)
    hh = np.broadcast_to(h, m.shape)
    np.testing.assert_allclose(thrust.at(basis), thrust(m.ravel(), hh.ravel()).reshape(7, 9),
                               rtol=1e-13)
    np.testing.assert_allclose(fuel.at(basis), fuel(m.ravel(), hh.ravel()).reshape(7, 9),
                               rtol=1e-13)
    np.testing.assert_allclose(fuel(m, h), fuel._spline.ev(m.ravel(), hh.ravel()).reshape(7, 9),
                               rtol=1e-9)
    with pytest.raises(ModelDomainError, match=r"T\(Mach,h\).*Mach = 2\.5"):
        thrust.basis(np.array([2.5]), np.array([100.0]))

