"""Monotonicity of linear schemes: every coefficient of the update non-negative.

A linear scheme q_j(new) = sum_m b_m(c) q_{j+m} is monotone exactly where every
b_m(c) >= 0 (Godunov 1959); the set of such c is decided from the positive
roots of the b_m, one exact test between each pair.
"""
from __future__ import annotations

from dataclasses import dataclass

import sympy

from ..symbols import C
from . import intervals
from .intervals import CourantSet, Span
from .symbol import LinearScheme


@dataclass(frozen=True)
class Monotone:
    label: str
    coefficients: tuple[tuple[int, sympy.Expr], ...]   # (m, b_m(c)) of q_{j+m} in one step
    monotone: CourantSet

    @property
    def holds(self) -> bool:
        """Monotone on an interval of Courant numbers of positive length."""
        return not self.monotone.empty


def analyse_monotone(scheme: LinearScheme) -> Monotone:
    coefficients = tuple(sorted(scheme.update.items()))
    return Monotone(scheme.label, coefficients, monotone_set(coefficients))


def monotone_set(coefficients) -> CourantSet:
    values = [sympy.together(v) for _, v in coefficients]
    exact = all(_rational_in_c(v) for v in values)
    if not exact:
        return _numeric_monotone(values)
    critical = []
    for v in values:
        critical += intervals.positive_roots(sympy.numer(v), C)
        critical += intervals.positive_roots(sympy.denom(v), C)

    # Each coefficient as numerator and denominator polynomials: exact and fast to
    # evaluate at the rational Courant numbers decide() asks about.
    fractions = [tuple(sympy.Poly(part, C) for part in sympy.fraction(v)) for v in values]

    def nonnegative(value, fraction, c_value) -> bool:
        if c_value.is_Rational:
            top, bottom = (part.eval(c_value) for part in fraction)
            return bottom != 0 and top * bottom >= 0
        at = value.subs(C, c_value)
        return at.is_finite is True and bool(at >= 0)

    def holds(c_value) -> bool:
        return all(nonnegative(v, f, c_value) for v, f in zip(values, fractions))

    return intervals.decide(critical, holds, method="exact (roots in c of every update coefficient)")


def _rational_in_c(value: sympy.Expr) -> bool:
    if not value.free_symbols <= {C}:
        return False
    try:
        return all(sympy.Poly(part, C).domain.is_QQ or sympy.Poly(part, C).domain.is_ZZ
                   for part in sympy.fraction(value))
    except sympy.PolynomialError:
        return False


NUMERIC_STEP = 1e-4


def _numeric_monotone(values) -> CourantSet:
    import numpy

    funcs = [sympy.lambdify(C, v, modules="numpy") for v in values]
    cs = numpy.arange(1, 80001) * NUMERIC_STEP
    ok = numpy.ones_like(cs, dtype=bool)
    for f in funcs:
        ok &= numpy.broadcast_to(f(cs), cs.shape) >= -1e-12
    parts, start = [], None
    for c_value, good in zip(cs, ok):
        if good and start is None:
            start = c_value
        if not good and start is not None:
            parts.append(Span(sympy.Float(start - NUMERIC_STEP if start == cs[0] else start, 6),
                              sympy.Float(c_value - NUMERIC_STEP, 6)))
            start = None
    if start is not None:
        parts.append(Span(sympy.Float(start, 6), sympy.oo, True, False))
    return CourantSet(tuple(parts), f"numeric: c in steps of {NUMERIC_STEP:g} up to 8",
                      NUMERIC_STEP)
