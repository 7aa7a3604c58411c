"""Limiter bodies as pieces: (rational function of r, interval) pairs.

Limiters are mostly built from max, min and abs of rational functions, so on
each piece of the real line they are one rational function. Working piece by
piece keeps every limiter fact exact; where a body is not piecewise rational
the callers fall back to sampling on a stated grid.
"""
from __future__ import annotations

from functools import lru_cache

import numpy
import sympy

from ..symbols import C, R, Ratio

SAMPLE_GRID = "r in [-4, 0] step 1/200, (0, 20] step 1/2000, and 10^k for k up to 6"


def sample_points() -> numpy.ndarray:
    """The dense grid used where a body is not piecewise rational."""
    return numpy.unique(numpy.concatenate([
        numpy.linspace(-4.0, 0.0, 801), numpy.linspace(5e-4, 20.0, 40000),
        numpy.logspace(1.3, 6.0, 400)]))


@lru_cache(maxsize=256)
def pieces(body: sympy.Expr) -> tuple[tuple[sympy.Expr, sympy.Interval], ...] | None:
    """The body as (rational expression, interval) pairs covering the reals, or None."""
    return _pieces_by_breakpoints(body)


class _NotRational(Exception):
    pass


class _Pole(Exception):
    """A sample point fell on a zero of a denominator; its polynomial is a new switch."""


def _at(expr: sympy.Expr, point) -> sympy.Expr:
    """expr at a point: a number for r, or a {symbol: value} map (r and c)."""
    return expr.xreplace(point) if isinstance(point, dict) else expr.subs(R, point)


_RATIONAL_FUNCTIONS = sympy.QQ.frac_field(R, C)


@lru_cache(maxsize=8192)
def fraction_of(expr: sympy.Expr) -> tuple[sympy.Expr, sympy.Expr]:
    """(numerator, denominator) of a rational function of r and c (cached: the same
    differences recur across pieces and bands)."""
    try:
        element = _RATIONAL_FUNCTIONS.from_sympy(expr)
    except (sympy.CoercionFailed, sympy.PolynomialError, TypeError, ValueError):
        return sympy.fraction(sympy.together(expr))
    return element.numer.as_expr(), element.denom.as_expr()


def _switch(expr: sympy.Expr, switches: set) -> None:
    """Both numerator and denominator: a quotient changes sign at zeros of either."""
    numerator, denominator = fraction_of(expr)
    switches.add(numerator)
    switches.add(denominator)


def _resolve(expr: sympy.Expr, at, switches: set) -> sympy.Expr:
    """The rational expression that equals expr near the point `at` (a value of r, or a
    map {R: r0, C: c0}), choosing every max/min/abs branch by its exact value there;
    the polynomials whose roots may switch a branch are collected in switches."""
    if expr == R or expr.is_Number or expr.is_Symbol:
        return expr
    if isinstance(expr, (sympy.Min, sympy.Max)):
        args = [_resolve(a, at, switches) for a in expr.args]
        for i, a in enumerate(args):
            for b in args[i + 1:]:
                _switch(a - b, switches)
        values = [_at(a, at) for a in args]
        pick = max if isinstance(expr, sympy.Max) else min
        return args[values.index(pick(values))]
    if isinstance(expr, (sympy.Abs, sympy.sign)):
        inner = _resolve(expr.args[0], at, switches)
        _switch(inner, switches)
        value = _at(inner, at)
        if isinstance(expr, sympy.Abs):
            return inner if value >= 0 else -inner
        return sympy.sign(value)
    if isinstance(expr, Ratio):
        top, bottom = (_resolve(a, at, switches) for a in expr.args)
        _switch(bottom, switches)
        return sympy.Integer(0) if _at(bottom, at) == 0 else top / bottom
    if isinstance(expr, sympy.Pow):
        if not expr.exp.is_Integer:
            raise _NotRational
        base = _resolve(expr.base, at, switches)
        if expr.exp < 0:
            _switch(base, switches)  # a pole is a breakpoint
            if _at(base, at) == 0:
                raise _Pole
        return base ** expr.exp
    if isinstance(expr, (sympy.Add, sympy.Mul)):
        return expr.func(*[_resolve(a, at, switches) for a in expr.args])
    raise _NotRational


def _pieces_by_breakpoints(body: sympy.Expr):
    """Refine a partition of the reals until every part has one active branch."""
    if body.free_symbols - {R}:
        return None
    cuts: list = []
    try:
        for _ in range(20):  # each round adds the switches seen; a handful suffice
            points = [-sympy.oo] + cuts + [sympy.oo]
            switches: set = set()
            parts = []
            try:
                for a, b in zip(points, points[1:]):
                    here = rational_between(a, b)
                    parts.append((sympy.cancel(_resolve(body, here, switches)), a, b))
            except _Pole:
                parts = None  # resample with the pole among the cuts
            new = set(cuts)
            for poly in switches:
                if poly.free_symbols:
                    new.update(_real_roots(poly))
            if len(new) == len(cuts) and parts is not None:
                return _as_intervals(parts)
            cuts = sorted(new, key=lambda v: float(v))
    except (_NotRational, sympy.PolynomialError, TypeError):
        return None
    return None


def _real_roots(poly: sympy.Expr) -> list:
    p = sympy.Poly(poly, R)
    if not (p.domain.is_QQ or p.domain.is_ZZ):
        raise _NotRational
    return [root for root in sympy.real_roots(p)]


def _as_intervals(parts):
    """Merge neighbours with the same expression; intervals closed on the left."""
    merged = []
    for expr, a, b in parts:
        if merged and merged[-1][0] == expr:
            merged[-1] = (expr, merged[-1][1], b)
        else:
            merged.append((expr, a, b))
    out = []
    for expr, a, b in merged:
        if not is_rational_in_r(expr):
            return None
        interval = sympy.Interval(a, b, left_open=(a == -sympy.oo), right_open=True)
        out.append((expr, interval))
    return tuple(out)


def is_rational_in_r(expr: sympy.Expr) -> bool:
    """A quotient of polynomials in r with rational coefficients."""
    if not expr.free_symbols <= {R}:
        return False
    try:
        return all(sympy.Poly(part, R).domain.is_QQ or sympy.Poly(part, R).domain.is_ZZ
                   for part in sympy.fraction(sympy.cancel(expr)))
    except sympy.PolynomialError:
        return False


def piece_at(body_pieces, point: sympy.Expr, side: int = 0) -> sympy.Expr | None:
    """The piece valid just left (side=-1), at (0) or just right (+1) of point."""
    nudge = sympy.Rational(1, 10 ** 9) * side
    probe = point + nudge
    for expr, where in body_pieces:
        if where.contains(probe) == sympy.true:
            return expr
    return None


def interior_roots(poly_expr: sympy.Expr, lo, hi) -> list[sympy.Expr]:
    """Real roots of a polynomial in r strictly between lo and hi, exact."""
    if poly_expr.is_number:
        return []
    poly = sympy.Poly(poly_expr, R)
    found = []
    for root in sympy.real_roots(poly):
        if (lo == -sympy.oo or root > lo) and (hi == sympy.oo or root < hi):
            found.append(root)
    return sorted(set(found), key=lambda v: float(v))


def rational_between(a, b) -> sympy.Rational:
    """A rational strictly between two reals (either may be infinite)."""
    if a == -sympy.oo and b == sympy.oo:
        return sympy.Integer(0)
    if a == -sympy.oo:
        return sympy.floor(b) - 1
    if b == sympy.oo:
        return sympy.ceiling(a) + 1
    mid = (sympy.N(a, 40) + sympy.N(b, 40)) / 2
    return sympy.Rational(str(mid))


def sign_pattern(expr: sympy.Expr, interval: sympy.Interval) -> list[int]:
    """Signs of a rational function at test points between its zeros and poles in the interval."""
    num, den = sympy.fraction(sympy.cancel(expr))
    lo, hi = interval.inf, interval.sup
    cuts = sorted(set(interior_roots(num, lo, hi) + interior_roots(den, lo, hi)),
                  key=lambda v: float(v))
    points = [lo] + cuts + [hi]
    signs = []
    for a, b in zip(points, points[1:]):
        value = expr.subs(R, rational_between(a, b))
        signs.append(int(sympy.sign(value)))
    return signs


def nonnegative_on(expr: sympy.Expr, interval: sympy.Interval) -> bool:
    """expr >= 0 throughout the interval (exact for rational expr; zeros allowed)."""
    if interval.measure == 0:
        return all(sympy.simplify(expr.subs(R, p)) >= 0 for p in interval.boundary
                   if p.is_finite)
    return all(s >= 0 for s in sign_pattern(expr, interval))


def extrema_on(expr: sympy.Expr, interval: sympy.Interval) -> tuple[sympy.Expr, sympy.Expr]:
    """(inf, sup) of a rational function over an interval, limits at open ends."""
    lo, hi = interval.inf, interval.sup
    candidates = []
    for end, direction in ((lo, "+"), (hi, "-")):
        candidates.append(sympy.limit(expr, R, end, direction))
    num, _ = sympy.fraction(sympy.cancel(sympy.diff(expr, R)))
    for root in interior_roots(num, lo, hi):
        value = expr.subs(R, root)
        candidates.append(value if value.is_Rational else sympy.simplify(value))
    _, den = sympy.fraction(sympy.cancel(expr))
    if interior_roots(den, lo, hi):
        return -sympy.oo, sympy.oo
    return min(candidates, key=_key), max(candidates, key=_key)


def _key(value):
    if value == sympy.oo:
        return float("inf")
    if value == -sympy.oo:
        return float("-inf")
    return float(value)
