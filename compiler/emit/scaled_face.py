"""A whole face evaluated on scaled cell values, where that is exact and needed.

Weighted reconstructions square differences of cell values (smoothness indicators
of degree 2, their squares of degree 4), so values of 1e80 already overflow in
double precision and the weights end as inf/inf. Such a face is usually positively
homogeneous of degree 1 once each param is given the degree of the terms it is
added to (WENO's eps sits beside squared differences: degree 2):

    g(lambda q; lambda^d_p p) = lambda g(q; p)   for every lambda > 0.

Then, with k a power of two that brings max |q_k| near 1 (`ScaleDown`, as for the
limiters), g(q) = (1/k) g(k q; k^d_p p) exactly, and every part is evaluated on
values of order one. Multiplying by powers of two is exact, so wherever the face as
written neither overflows nor underflows the result has its very bits. A scaled
param that would leave [2^-E, 2^E] (E = 500 in double, 60 in single precision) is
held there: that happens only when the data are beyond 2^(E/d_p) times the param's
own scale, where its value no longer changes the face beyond rounding (WENO's
weights are then those of eps -> 0, or the ideal ones for data far below eps).

Degrees are inferred (sums and min/max need equal degrees, products add them,
powers multiply them, ratio subtracts them, abs keeps, sign gives 0, c and numbers
are of degree 0); a face that is not homogeneous of degree 1 this way, or whose
parts are all of degree 0 or 1 (nothing to overflow), is left as it is.
"""
from __future__ import annotations

import sympy

from ..symbols import C, ParamSymbol, Ratio, offset_of, q
from .limited import LimiterFormCall, LimitedSlope, ScaleDown, ScaleUp


class ParamBound(sympy.Symbol):
    """2^E (upper) or 2^-E with E = floor(EXPONENT_BUDGET[precision] * share): printed per
    precision, so a part of degree D built from values up to 2^E stays finite."""

    def __new__(cls, share: sympy.Rational, upper: bool):
        name = f"param_{'high' if upper else 'low'}_{share.p}_{share.q}"
        obj = super().__new__(cls, name, positive=True)
        obj.share, obj.upper = share, upper
        return obj

    def exponent(self, precision: str) -> int:
        return int(EXPONENT_BUDGET[precision] * self.share) * (1 if self.upper else -1)


EXPONENT_BUDGET = {"double": 1000, "float": 120}
"""Binary exponents a scaled part may span: |x| in [2^-1000, 2^1000] keeps doubles normal."""


class _NotHomogeneous(Exception):
    pass


class _Degrees:
    """Degree of each subexpression, with one unknown per param and equations between them."""

    def __init__(self):
        self.unknowns: dict[sympy.Symbol, sympy.Symbol] = {}
        self.equations: list[sympy.Expr] = []
        self.of: dict[sympy.Expr, sympy.Expr] = {}

    def degree(self, e: sympy.Expr) -> sympy.Expr:
        if e in self.of:
            return self.of[e]
        found = self._degree(e)
        self.of[e] = found
        return found

    def _same(self, degrees) -> sympy.Expr:
        first = degrees[0]
        self.equations.extend(d - first for d in degrees[1:])
        return first

    def _degree(self, e: sympy.Expr) -> sympy.Expr:
        if isinstance(e, ParamSymbol):
            return self.unknowns.setdefault(e, sympy.Dummy(f"d_{e.name}"))
        if isinstance(e, sympy.Symbol):
            if offset_of(e) is not None:
                return sympy.Integer(1)
            if e == C:
                return sympy.Integer(0)
            raise _NotHomogeneous(e)
        if e.is_number:
            return sympy.Integer(0)
        if isinstance(e, sympy.Add):
            # a number added to terms of another degree breaks homogeneity
            return self._same([self.degree(t) for t in e.args])
        if isinstance(e, sympy.Mul):
            return sympy.Add(*[self.degree(f) for f in e.args if not f.is_number])
        if isinstance(e, sympy.Pow):
            base, exponent = e.args
            if not exponent.is_Rational:
                raise _NotHomogeneous(e)
            return exponent * self.degree(base)
        if isinstance(e, (sympy.Max, sympy.Min)):
            return self._same([self.degree(t) for t in e.args])
        if isinstance(e, sympy.Abs):
            return self.degree(e.args[0])
        if isinstance(e, sympy.sign):
            self.degree(e.args[0])
            return sympy.Integer(0)
        if isinstance(e, Ratio):
            return self.degree(e.args[0]) - self.degree(e.args[1])
        if isinstance(e, LimiterFormCall):
            inside = self._same([self.degree(a) for a in e.args])
            return inside if isinstance(e, LimitedSlope) else sympy.Integer(0)
        raise _NotHomogeneous(e)  # a plain limiter call, an unknown function


def param_degrees(face: sympy.Expr):
    """({param: degree}, whether some part is of degree other than 0 and 1, the largest
    degree of a part) when the face is homogeneous of degree 1; None otherwise."""
    degrees = _Degrees()
    try:
        total = degrees.degree(face)
    except _NotHomogeneous:
        return None
    equations = degrees.equations + [total - 1]
    unknowns = list(degrees.unknowns.values())
    solution = sympy.solve(equations, unknowns, dict=True) if equations else [{}]
    if not solution:
        return None
    values = {u: sympy.sympify(solution[0].get(u, 0)).subs({v: 0 for v in unknowns})
              for u in unknowns}
    if any(not v.is_Rational for v in values.values()):
        return None
    spread = [abs(d.subs(values)) for d in degrees.of.values()]
    wide = any(d not in (0, 1) for d in spread)
    return {p: values[u] for p, u in degrees.unknowns.items()}, wide, max(spread, default=1)


def scaled_face(face: sympy.Expr, offsets, param_values):
    """(steps, up, {symbol: its scaled copy}): the face is up times the face as written
    read with the scaled copies the steps compute (up multiplies last: the face's own
    parts may be large and only their quotient of order one); None where the face
    is not homogeneous, has nothing that could overflow, or a param of fractional degree
    (its scale would not be a power of two)."""
    found = param_degrees(face)
    if found is None or not found[1]:
        return None
    degrees, _, widest = found
    if any(not d.is_Integer for d in degrees.values()):
        return None
    cells = [q(k) for k in offsets]
    largest = sympy.Symbol("largest", nonnegative=True)
    down, up = sympy.Symbol("down", positive=True), sympy.Symbol("up", positive=True)
    steps = [(largest, sympy.Max(*[sympy.Abs(q) for q in cells])),
             (down, ScaleDown(largest)), (up, ScaleUp(largest))]
    values = {}
    for cell in cells:
        scaled = sympy.Symbol(f"scaled_{cell.name}", real=True)
        steps.append((scaled, cell * down))
        values[cell] = scaled
    for param, degree in sorted(degrees.items(), key=lambda item: item[0].name):
        value = param_values.get(param, 0)
        if degree == 0 or value == 0:
            continue
        # held in [2^-E, 2^E] with E = budget * |degree| / widest: its powers in the face
        # then stay finite and nonzero; the power of down is taken from a down held
        # likewise, so no intermediate overflows either
        share = sympy.Rational(abs(degree), widest)
        low, high = ParamBound(share, False), ParamBound(share, True)
        step = sympy.Rational(1, abs(degree))
        held_down = sympy.Max(sympy.Min(down, ParamBound(share * step, True)),
                              ParamBound(share * step, False))
        bounds = (low, high) if value > 0 else (-high, -low)
        scaled = sympy.Symbol(f"scaled_param_{param.name}", real=True)
        steps.append((scaled, sympy.Max(sympy.Min(param * held_down ** degree, bounds[1]),
                                        bounds[0])))
        values[param] = scaled
    return tuple(steps), up, values
