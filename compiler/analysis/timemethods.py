"""Runge-Kutta time methods: stage tables, stability polynomials, SSP facts.

The Shu-Osher tables are what the emitters stage; the Butcher tables and the
stability polynomials R(z) are what the analysis reads. Both are kept here so
that what is analysed is what is generated.
"""
from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import sympy

Z = sympy.Symbol("z")
"""The argument of a stability polynomial: dt times an eigenvalue."""

half, third, quarter, sixth = (sympy.Rational(1, n) for n in (2, 3, 4, 6))


@dataclass(frozen=True)
class ShuOsherStage:
    """q_stage = sum_k alpha[k] q_k + beta * dt L(q_{stage-1}), q_0 the step's start.

    alpha[k] weighs stage value k (k = 0 is the start of the step); the operator
    is applied to the previous stage only, which is all these methods need.
    """

    alpha: tuple[sympy.Rational, ...]
    beta: sympy.Rational


@dataclass(frozen=True)
class TimeMethod:
    name: str
    order: int
    stages: int
    butcher_a: tuple[tuple[sympy.Rational, ...], ...]
    butcher_b: tuple[sympy.Rational, ...]
    shu_osher: tuple[ShuOsherStage, ...] | None  # None where the method is not SSP
    ssp_coefficient: sympy.Rational | None         # None: not strong-stability preserving
    description: str

    @property
    def butcher_c(self) -> tuple[sympy.Rational, ...]:
        return tuple(sum(row, sympy.Integer(0)) for row in self.butcher_a)

    @property
    def stability_polynomial(self) -> sympy.Expr:
        return stability_polynomial(self.name)


_ONE, _ZERO = sympy.Integer(1), sympy.Integer(0)

METHODS: dict[str, TimeMethod] = {
    "euler": TimeMethod(
        "euler", 1, 1, ((_ZERO,),), (_ONE,),
        (ShuOsherStage((_ONE,), _ONE),), _ONE,
        "forward Euler"),
    "ssp_rk2": TimeMethod(
        "ssp_rk2", 2, 2, ((_ZERO, _ZERO), (_ONE, _ZERO)), (half, half),
        (ShuOsherStage((_ONE,), _ONE), ShuOsherStage((half, half), half)), _ONE,
        "two-stage SSP Runge-Kutta (Heun)"),
    "ssp_rk3": TimeMethod(
        "ssp_rk3", 3, 3,
        ((_ZERO, _ZERO, _ZERO), (_ONE, _ZERO, _ZERO), (quarter, quarter, _ZERO)),
        (sixth, sixth, 2 * third),
        (ShuOsherStage((_ONE,), _ONE),
         ShuOsherStage((3 * quarter, quarter), quarter),
         ShuOsherStage((third, _ZERO, 2 * third), 2 * third)), _ONE,
        "three-stage third-order SSP Runge-Kutta (Shu-Osher form)"),
    "rk4": TimeMethod(
        "rk4", 4, 4,
        ((_ZERO,) * 4, (half, _ZERO, _ZERO, _ZERO), (_ZERO, half, _ZERO, _ZERO),
         (_ZERO, _ZERO, _ONE, _ZERO)),
        (sixth, third, third, sixth), None, None,
        "classical fourth-order Runge-Kutta (not SSP)"),
}


def method(name: str) -> TimeMethod:
    return METHODS[name]


@lru_cache(maxsize=None)
def stability_polynomial(name: str) -> sympy.Expr:
    """R(z) = 1 + z b^T (I - z A)^{-1} 1, a polynomial for explicit methods."""
    m = METHODS[name]
    a = sympy.Matrix(m.butcher_a)
    b = sympy.Matrix([m.butcher_b])
    ones = sympy.ones(m.stages, 1)
    # (I - zA)^{-1} = sum_k (zA)^k, finite because A is strictly lower triangular.
    acc, term = sympy.zeros(m.stages, 1), ones
    for _ in range(m.stages):
        acc += term
        term = Z * a * term
    return sympy.expand(1 + Z * (b * acc)[0])


def linear_order(name: str) -> int:
    """The order to which R(z) matches exp(z): the method's order on linear problems."""
    r = sympy.Poly(stability_polynomial(name), Z)
    p = 0
    while p + 1 <= r.degree() and r.coeff_monomial(Z ** (p + 1)) == sympy.Rational(1, sympy.factorial(p + 1)):
        p += 1
    return p


def abs_squared_on_imaginary_axis(name: str) -> tuple[sympy.Expr, sympy.Symbol]:
    """(|R(iy)|^2 as a polynomial in y, y)."""
    y = sympy.Symbol("y", real=True)
    value = sympy.expand_complex(sympy.Abs(stability_polynomial(name).subs(Z, sympy.I * y)) ** 2)
    return sympy.expand(value), y


@lru_cache(maxsize=None)
def imaginary_axis_limit(name: str) -> sympy.Expr:
    """The largest Y with |R(iy)| <= 1 for all |y| <= Y (0 when only y = 0 is stable)."""
    from .intervals import rational_between

    value, y = abs_squared_on_imaginary_axis(name)
    excess = sympy.Poly(value - 1, y)
    roots = sorted({root for root in sympy.real_roots(excess) if root > 0}, key=float)
    limit = sympy.Integer(0)
    for lo, hi in zip([sympy.Integer(0)] + roots, roots + [sympy.oo]):
        if excess.eval(rational_between(lo, hi)) > 0:
            break
        limit = hi
    return limit
