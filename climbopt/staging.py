"""Point functions as fast SX algebra around the table look-ups, for the optimisers.

The aircraft's tables (:mod:`climbopt.fits`) and the smooth atmosphere are CasADi B-splines,
which exist only as MX nodes, so a point function written with MX symbols runs every
arithmetic operation through CasADi's MX virtual machine, and so do its first and second
derivatives (in IPOPT's exact Hessian that cost about 60 µs per collocation point on the demo
transport). Written with SX symbols instead, every operation is cheap, but each table is then
a call node that SX evaluates through a nested function call, which is slower still.

:func:`lifted_tables` takes a third way. While it is active, a table called with SX arguments
(:func:`call_table`) does not call anything: it records the call and returns a fresh SX symbol
for the value. :func:`staged_function` then builds one MX function out of the recording: SX
functions for the algebra between the tables (in stages: the atmosphere first, then the tables
of Mach that depend on its speed of sound), and one MX B-spline node per table look-up. The
values are the same expressions evaluated in the same order, so results agree to rounding; on
the demo transport the IPOPT time of the four collocation solves fell by about half
(benchmarks/bench_speed.py).
"""

from __future__ import annotations

import threading
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any

__all__ = ["bspline_function", "call_table", "jacobian", "lifted_tables", "staged",
           "staged_function"]

#: CasADi options of the table functions: SX graphs can call them (as call nodes, or lifted
#: out by :func:`lifted_tables`); MX calls are call nodes either way.
_NEVER_INLINE = {"never_inline": True}


@dataclass
class TableCall:
    """One recorded table look-up: the table's CasADi Function, its SX argument and the SX
    symbol that stands for its value."""

    function: Any
    argument: Any
    value: Any
    spline: Any = None  # (knots per input, coefficients) of a cubic B-spline (see call_table)


_LOCAL = threading.local()


def _recording():
    """The innermost active recording of this thread (a list of :class:`TableCall`), or None."""
    stack = getattr(_LOCAL, "stack", None)
    return stack[-1] if stack else None


@contextmanager
def lifted_tables():
    """Record SX table calls (see the module docstring); yields the list they are appended to.
    Per thread, so sweep workers may build point functions side by side."""
    stack = _LOCAL.__dict__.setdefault("stack", [])
    calls: list[TableCall] = []
    stack.append(calls)
    try:
        yield calls
    finally:
        stack.pop()


def bspline_function(name: str, knots, coefficients):
    """MX Function x -> the values of cubic B-splines on ``knots`` (one knot list per input):
    ``coefficients`` holds one column per value (a flat vector for one value), its rows in
    CasADi's order (the first input's index runs fastest). Callable from SX
    (``never_inline``)."""
    import casadi as ca
    import numpy as np

    coefficients = np.asarray(coefficients, dtype=float)
    n_values = 1 if coefficients.ndim == 1 else coefficients.shape[1]
    x = ca.MX.sym("x", len(knots))
    expr = ca.bspline(x, ca.DM(coefficients.ravel()), [list(k) for k in knots],
                      [3] * len(knots), n_values, {})
    return ca.Function(name, [x], [expr], _NEVER_INLINE)


def call_table(function, argument, spline=None):
    """``function(argument)`` for a table's CasADi Function (built with ``never_inline``) on
    SX or MX; inside :func:`lifted_tables`, an SX argument gives a new SX symbol instead and the
    call is recorded. ``spline`` = (knots per input, coefficients) says that ``function`` is
    ``bspline_function(name, *spline)`` of one value, so that look-ups of tables on the same
    knots at the same point can share one node."""
    import casadi as ca

    calls = _recording()
    if calls is not None and isinstance(argument, ca.SX):
        value = ca.SX.sym(f"{function.name()}_{len(calls)}", function.size1_out(0))
        calls.append(TableCall(function, argument, value, spline))
        return value
    return function(argument)


def jacobian(expr, x):
    """Jacobian of SX ``expr`` with respect to SX ``x`` inside :func:`lifted_tables`, through
    the table look-ups recorded so far: the chain rule adds, for each look-up ``expr``
    depends on, d expr / d value times the table's slope at its argument (a look-up of the
    table's derivative, recorded like any other) times d argument / d x (found the same way,
    so tables of tables are followed). Outside a recording this is ``casadi.jacobian``."""
    import casadi as ca

    calls = _recording()
    total = ca.jacobian(expr, x)
    for call in list(calls or ()):  # a snapshot: the slopes add look-ups of their own
        if not ca.depends_on(expr, call.value):
            continue
        d_argument = jacobian(call.argument, x)
        if d_argument.nnz() == 0:
            continue
        n_out, n_in = call.value.numel(), call.argument.numel()
        slope = ca.reshape(call_table(_slope_function(call.function), call.argument),
                           n_out, n_in)
        total = total + ca.mtimes(ca.mtimes(ca.jacobian(expr, call.value), slope), d_argument)
    return total


def _slope_function(function):
    """MX Function x -> vec(d function / d x) (column-major) of a table's Function of one
    argument."""
    import casadi as ca

    x = ca.MX.sym("x", function.size1_in(0))
    return ca.Function(f"{function.name()}_slope", [x],
                       [ca.vec(ca.jacobian(function(x), x))], _NEVER_INLINE)


def _merged(calls: list[TableCall]) -> list[tuple[Any, Any, list[TableCall]]]:
    """(MX function, SX argument, the calls it answers) for calls of one stage: B-splines on
    the same knots at the same argument become one B-spline node of several values (CasADi's
    coefficient layout: the value index runs fastest)."""
    import casadi as ca
    import numpy as np

    groups: list[list[TableCall]] = []
    for call in calls:
        for group in groups:
            first = group[0]
            if (call.spline is not None and first.spline is not None
                    and call.spline[0] == first.spline[0]
                    and ca.is_equal(call.argument, first.argument, 20)):
                group.append(call)
                break
        else:
            groups.append([call])
    out = []
    for group in groups:
        if len(group) == 1:
            out.append((group[0].function, group[0].argument, group))
            continue
        name = "tables_" + "_".join(c.function.name().removeprefix("fit_") for c in group)
        merged = bspline_function(name[:120], group[0].spline[0],
                                  np.column_stack([c.spline[1] for c in group]))
        out.append((merged, group[0].argument, group))
    return out


def staged_function(name: str, inputs: list, outputs: list, calls: list[TableCall]):
    """MX Function ``name``(inputs) -> outputs, where ``inputs`` are SX symbols and ``outputs``
    SX expressions in them and in the values of the recorded ``calls``.

    Each call gets a stage: one more than the latest stage of the calls its argument depends
    on. Stage by stage, one SX function computes the arguments of that stage's calls from the
    inputs and the values known so far, and each call is one MX node; a last SX function
    computes the outputs from everything."""
    import casadi as ca

    stage: list[int] = []
    for k, call in enumerate(calls):
        stage.append(max((stage[j] + 1 for j in range(k)
                          if ca.depends_on(call.argument, calls[j].value)), default=0))
    mx_inputs = [ca.MX.sym(f"i{i}", x.sparsity()) for i, x in enumerate(inputs)]
    known_sx, known_mx = list(inputs), list(mx_inputs)
    for s in range(max(stage, default=-1) + 1):
        nodes = _merged([c for c, cs in zip(calls, stage) if cs == s])
        arguments = ca.Function(f"{name}_arguments{s}", known_sx,
                                [argument for _, argument, _ in nodes]).call(known_mx)
        known_sx.append(ca.vertcat(*[c.value for _, _, group in nodes for c in group]))
        known_mx.append(ca.vertcat(*[f(a) for (f, _, _), a in zip(nodes, arguments)]))
    results = ca.Function(f"{name}_algebra", known_sx, outputs).call(known_mx)
    return ca.Function(name, mx_inputs, results)


def staged(name: str, input_names, body):
    """MX Function ``name`` of scalar inputs named ``input_names``: ``body(*SX symbols)``
    returns the output expressions (a list), written with the model's methods as for numpy;
    its table look-ups are lifted (:func:`lifted_tables`) and the result assembled by
    :func:`staged_function`. Inside ``body`` a table's value is a free symbol: derivatives
    there are taken with :func:`jacobian` (``casadi.jacobian`` would miss the tables'
    slopes)."""
    import casadi as ca

    inputs = [ca.SX.sym(n) for n in input_names]
    with lifted_tables() as calls:
        outputs = list(body(*inputs))
    return staged_function(name, inputs, outputs, calls)
