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
    fractions = [(sympy.Poly(sympy.numer(v), C), sympy.Poly(sympy.denom(v), C)) for v in values]

    def holds_for(chosen):
        def holds(c_value) -> bool:
            if not c_value.is_Rational and _clearly_negative(chosen, c_value):
                return False  # an algebraic c where some coefficient is negative by a wide margin
            for numerator, denominator in chosen:  # exact evaluation of polynomials: fast
                bottom = denominator.eval(c_value)
                if bottom == 0 or numerator.eval(c_value) / bottom < 0:
                    return False
            return True
        return holds

    method = "exact (roots in c of every update coefficient)"
    # Coefficients with few terms first (a far neighbour's coefficient is often a single
    # power of c): once those leave no interval, the set is the points where every
    # coefficient holds, and the roots of the long polynomials are never needed.
    order = sorted(fractions, key=lambda f: (len(f[0].terms()) + len(f[1].terms()),
                                             f[0].degree() + f[1].degree()))
    critical, chosen = [], []
    for numerator, denominator in order:
        critical += intervals.positive_roots(numerator.as_expr(), C)
        critical += intervals.positive_roots(denominator.as_expr(), C)
        chosen.append((numerator, denominator))
        if len(numerator.terms()) + len(denominator.terms()) > 3 or len(chosen) == len(order):
            continue  # a long coefficient: its roots are costly, decide once at the end
        partial = intervals.decide(critical, holds_for(chosen), method=method)
        if all(p.is_point for p in partial.parts):
            everywhere = holds_for(fractions)
            return CourantSet(tuple(p for p in partial.parts if everywhere(p.lo)), method)
    return intervals.decide(critical, holds_for(fractions), method=method)


def _clearly_negative(fractions, c_value) -> bool:
    """Some numerator/denominator is below -1e-30 at c_value evaluated to 60 digits (far
    beyond the rounding of that evaluation), so the exact test need not run."""
    import mpmath

    with mpmath.workdps(60):
        c = mpmath.mpf(str(sympy.N(c_value, 60)))
        for numerator, denominator in fractions:
            top = mpmath.polyval([mpmath.mpf(sympy.Rational(v).p) / sympy.Rational(v).q
                                  for v in numerator.all_coeffs()], c)
            bottom = mpmath.polyval([mpmath.mpf(sympy.Rational(v).p) / sympy.Rational(v).q
                                     for v in denominator.all_coeffs()], c)
            if bottom != 0 and top / bottom < mpmath.mpf("-1e-30"):
                return True
    return False


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

    funcs = [sympy.lambdify(C, v.evalf(), modules="numpy") for v in values]  # floats, not big ints
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
