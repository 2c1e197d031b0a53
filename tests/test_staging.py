"""Point functions assembled as SX algebra around lifted table look-ups (climbopt.staging).

Checks against exact arithmetic: the tables below hold straight lines, which both steps of the
fit reproduce exactly (a monotone piecewise-cubic Hermite interpolant of collinear data is that
line, Fritsch & Carlson, SIAM J. Numer. Anal. 17(2), 1980; a cubic interpolating spline of
samples of a cubic polynomial or lower is that polynomial, de Boor, A Practical Guide to
Splines, 1978, ch. XIII; both from memory), so every value and derivative has a closed form.
"""

import casadi as ca
import numpy as np
import pytest

from climbopt.fits import Fit1D
from climbopt.staging import jacobian, lifted_tables, staged, staged_function

GRID = [0.0, 1.0, 2.0, 4.0]


def _line(slope, offset, grid=GRID, name="t"):
    x = np.asarray(grid)
    return Fit1D(x, slope * x + offset, name)


def _calls(F) -> list[str]:
    return [str(F.instruction_MX(k)).split("(")[0]
            for k in range(F.n_instructions()) if F.instruction_id(k) == ca.OP_CALL]


def test_lifted_tables_are_staged_merged_and_exact():
    fa, fb = _line(3.0, 1.0, name="a(x)"), _line(-0.5, 2.0, name="b(x)")
    fc = _line(0.25, -1.0, grid=[0.0, 5.0, 10.0, 20.0], name="c(y)")
    s = ca.SX.sym("s")
    with lifted_tables() as calls:
        a, b = fa(s), fb(s)          # same knots, same argument: one node of two values
        c = fc(2.0 * a)              # depends on a: a second stage
    out = a * b + c
    F = staged_function("f", [s], [out], calls)
    assert len(calls) == 3
    nodes = _calls(F)
    # arguments of stage 0, the merged a/b node, arguments of stage 1, c, the algebra
    assert len(nodes) == 5
    assert sum(n.startswith("tables_") for n in nodes) == 1
    J = F.jacobian()  # the staged function's own derivative (what IPOPT uses)
    for x in (0.5, 1.7, 3.3):
        av, bv = 3.0 * x + 1.0, -0.5 * x + 2.0
        exact = av * bv + 0.25 * (2.0 * av) - 1.0
        d_exact = 3.0 * bv - 0.5 * av + 0.25 * 2.0 * 3.0
        assert float(F(x)) == pytest.approx(exact, rel=1e-12, abs=1e-12)
        assert float(J(x, 0.0)) == pytest.approx(d_exact, rel=1e-9)


def test_sx_table_call_outside_a_recording_is_a_call_node():
    fa = _line(3.0, 1.0)
    s = ca.SX.sym("s")
    F = ca.Function("f", [s], [fa(s) * 2.0])
    assert float(F(1.5)) == pytest.approx(2.0 * 5.5, rel=1e-12)
    with pytest.raises(TypeError, match="SX arguments of a table must be scalars"):
        fa(ca.SX.sym("v", 2))


def test_jacobian_inside_a_recording_follows_the_tables():
    """d/ds of a(s) * c(2 a(s)) through two nested look-ups, in closed form."""
    fa = _line(3.0, 1.0, name="a(x)")
    fc = _line(0.25, -1.0, grid=[0.0, 5.0, 10.0, 20.0], name="c(y)")

    def body(s):
        a = fa(s)
        y = a * fc(2.0 * a)
        return [y, jacobian(y, s)]

    F = staged("f", ("s",), body)
    for x in (0.5, 1.7, 3.3):
        av = 3.0 * x + 1.0
        cv = 0.25 * 2.0 * av - 1.0
        assert float(F(x)[0]) == pytest.approx(av * cv, rel=1e-12)
        assert float(F(x)[1]) == pytest.approx(3.0 * cv + av * 0.25 * 2.0 * 3.0, rel=1e-9)
