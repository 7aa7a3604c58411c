"""The upwind-biased form g = q[0] + k(c) phi(r) (q[1] - q[0]) of a nonlinear face.

With r = (q[0] - q[-1]) / (q[1] - q[0]), a face on offsets -1, 0, 1 is of this
form when it shifts with constants, scales with positive factors and is odd in
the data. Named limiters give it exactly (q[1] - q[0] cancels symbolically).
A face written with max/min/abs inline does not cancel symbolically, so there
phi is read off at q = (-r, 0, 1) and the three properties are checked exactly
at a set of random rational states; the result says so.
"""
from __future__ import annotations

import random
from dataclasses import dataclass

import sympy

from ..symbols import C, R, Ratio, offset_of, q

PROPERTY_SAMPLES = 24


@dataclass(frozen=True)
class UpwindForm:
    k: sympy.Expr        # a function of c only (1 when B does not separate)
    phi: sympy.Expr      # a function of r only, or of r and c when B does not separate
    how: str             # how the form was established, for reports

    @property
    def coefficient(self) -> sympy.Expr:
        """B(r, c) = k(c) phi(r) in g = q[0] + B (q[1] - q[0])."""
        return self.k * self.phi

    @property
    def separable(self) -> bool:
        return C not in self.phi.free_symbols


def _ratios_as_quotients(expr):
    return expr.replace(Ratio, lambda a, b: sympy.cancel(a / b))


def upwind_form(scheme) -> UpwindForm | None:
    if not set(scheme.offsets) <= {-1, 0, 1}:
        return None
    g = scheme.expand_limiters(scheme.bound(scheme.face))
    q0, d = sympy.symbols("Q_upwind D_jump", real=True)
    exact = _ratios_as_quotients(g.xreplace({q(0): q0, q(1): q0 + d, q(-1): q0 - R * d}))
    b = sympy.cancel((exact - q0) / d)
    how = "exact: q[1] - q[0] cancels symbolically"
    if b.has(q0) or b.has(d):
        b = _ratios_as_quotients(g.xreplace({q(-1): -R, q(0): sympy.Integer(0), q(1): sympy.Integer(1)}))
        if not _is_upwind_biased(g):
            return None
        how = (f"phi read off at q = (-r, 0, 1); shift, positive scaling and oddness checked "
               f"exactly at {PROPERTY_SAMPLES} random rational states")
    if not b.free_symbols <= {R, C}:
        return None
    split = _separate(b)
    if split is None:  # B(r, c) does not separate: a limiter of (r, c)
        return UpwindForm(sympy.Integer(1), b, how)
    return UpwindForm(split[0], split[1], how)


def _separate(b: sympy.Expr):
    if C not in b.free_symbols:
        return sympy.Integer(1), b
    try:
        parts = sympy.separatevars(sympy.factor(b), [R, C], dict=True, force=True)
    except (sympy.PolynomialError, TypeError):
        return None
    if not parts:
        return None
    return sympy.factor(parts["coeff"] * parts.get(C, 1)), parts.get(R, sympy.Integer(1))


def _is_upwind_biased(g: sympy.Expr) -> bool:
    """g(q + a) = g(q) + a, g(s q) = s g(q) for s > 0 and g(-q) = -g(q), at random states."""
    rng = random.Random(20240613)  # fixed: the same verdict every run
    symbols = sorted((s for s in g.free_symbols if offset_of(s) is not None), key=offset_of)

    def rational():
        return sympy.Rational(rng.randint(-40, 40), rng.randint(1, 9))

    def at(values, c_value):
        return g.xreplace({**dict(zip(symbols, values)), C: c_value})

    for _ in range(PROPERTY_SAMPLES):
        values = [rational() for _ in symbols]
        shift, scale = rational(), sympy.Rational(rng.randint(1, 30), rng.randint(1, 7))
        c_value = sympy.Rational(rng.randint(1, 99), 100)
        try:
            base = at(values, c_value)
            if at([v + shift for v in values], c_value) != base + shift:
                return False
            if at([v * scale for v in values], c_value) != base * scale:
                return False
            if at([-v for v in values], c_value) != -base:
                return False
        except (ValueError, TypeError):
            return False  # no real value at some state (min/max of sqrt of a negative)
    return True
