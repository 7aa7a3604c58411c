"""The analysis's view of the time methods: R(z) and its imaginary-axis limit.

Every fact comes from the registry (compiler/time_methods/): the tables and,
derived from them, R(z), the orders and the SSP coefficient. This module adds
what only the analysis needs: |R(iy)|^2 and the largest stable interval of the
imaginary axis.
"""
from __future__ import annotations

from functools import lru_cache

import sympy

from ..time_methods import METHODS, Z, TimeMethod, method

__all__ = ["METHODS", "TimeMethod", "Z", "abs_squared_on_imaginary_axis",
           "imaginary_axis_limit", "linear_order", "method", "stability_polynomial"]


def stability_polynomial(name: str) -> sympy.Expr:
    """R(z) of a registered method, from its table."""
    return method(name).stability_polynomial


def linear_order(name: str) -> int:
    """The order to which R(z) matches exp(z): the method's order on linear problems."""
    return method(name).linear_order


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
