"""Facts about a Runge-Kutta method, each computed from its table.

- R(z): the step applied to q' = lambda q, z = dt lambda (from the Shu-Osher rows).
- the classical order: every order condition b . Phi(t) = 1/gamma(t) over the rooted
  trees t of each order (Butcher's elementary weights of the Butcher form).
- the linear order: how far R(z) agrees with exp(z).
- the SSP coefficient: Kraaijevanger's radius of absolute monotonicity of the
  Butcher form K = [A 0; b^T 0], the largest r with (I + rK)^-1 e >= 0 and
  K (I + rK)^-1 >= 0 entrywise on all of [0, r] (the set of such r is an
  interval). Every entry is a polynomial in r because K is nilpotent, so the
  radius is found exactly: the first root of an entry where it turns negative.
  It does not depend on how the method is written (Shu-Osher ratios do), and it
  is 0 for methods that are not strong-stability preserving.
"""
from __future__ import annotations

from functools import lru_cache

import sympy

from .table import TimeMethod

Z = sympy.Symbol("z")
"""The argument of a stability polynomial: dt times an eigenvalue."""


@lru_cache(maxsize=None)
def stability_polynomial(method: TimeMethod) -> sympy.Expr:
    values = [sympy.Integer(1)]
    for a_row, b_row in zip(method.alpha, method.beta):
        values.append(sympy.expand(sum((a * y + b * Z * y for a, b, y in zip(a_row, b_row, values)),
                                       sympy.Integer(0))))
    return values[-1]


@lru_cache(maxsize=None)
def linear_order(method: TimeMethod) -> int:
    poly = sympy.Poly(stability_polynomial(method), Z)
    p = 0
    while p + 1 <= poly.degree() and \
            poly.coeff_monomial(Z ** (p + 1)) == sympy.Rational(1, sympy.factorial(p + 1)):
        p += 1
    return p


# ---- rooted trees and the classical order ----------------------------------------------

@lru_cache(maxsize=None)
def rooted_trees(nodes: int) -> tuple[tuple, ...]:
    """Every rooted tree with `nodes` vertices; a tree is the sorted tuple of its subtrees."""
    if nodes == 1:
        return ((),)
    return tuple(sorted({tuple(sorted(forest)) for forest in _forests(nodes - 1)}))


@lru_cache(maxsize=None)
def _forests(nodes: int) -> tuple[tuple, ...]:
    """Every multiset of trees with `nodes` vertices in total (as sorted tuples)."""
    if nodes == 0:
        return ((),)
    found = set()
    for first in range(1, nodes + 1):
        for tree in rooted_trees(first):
            for rest in _forests(nodes - first):
                found.add(tuple(sorted((tree,) + rest)))
    return tuple(sorted(found))


def tree_size(tree: tuple) -> int:
    return 1 + sum(tree_size(t) for t in tree)


def tree_density(tree: tuple) -> int:
    """gamma(t) = |t| times the densities of the subtrees."""
    value = tree_size(tree)
    for t in tree:
        value *= tree_density(t)
    return value


def _elementary_weights(a: sympy.Matrix, tree: tuple) -> sympy.Matrix:
    """Phi(t) per stage: the product over subtrees u of (A Phi(u)), 1 for the leaf."""
    value = sympy.ones(a.rows, 1)
    for t in tree:
        value = value.multiply_elementwise(a * _elementary_weights(a, t))
    return value


def order_conditions_hold(method: TimeMethod, order: int) -> bool:
    """b . Phi(t) == 1/gamma(t) for every rooted tree of `order` vertices."""
    a = sympy.Matrix(method.butcher_a)
    b = sympy.Matrix([method.butcher_b])
    return all((b * _elementary_weights(a, t))[0] == sympy.Rational(1, tree_density(t))
               for t in rooted_trees(order))


@lru_cache(maxsize=None)
def order(method: TimeMethod) -> int:
    """The classical order (an explicit s-stage method has order at most s)."""
    p = 0
    while p < method.stages and order_conditions_hold(method, p + 1):
        p += 1
    return p


# ---- strong stability ------------------------------------------------------------------

def _nonnegative_radius(poly: sympy.Poly) -> sympy.Expr:
    """sup{t >= 0: poly(r) >= 0 for every r in [0, t]} (oo when it never turns negative)."""
    if poly.is_zero:
        return sympy.oo
    lowest = next(c for c in reversed(poly.all_coeffs()) if c != 0)
    if lowest < 0:
        return sympy.Integer(0)
    for root, multiplicity in poly.real_roots(multiple=False):
        if root > 0 and multiplicity % 2 == 1:   # the first sign change on (0, oo)
            return root
    return sympy.oo


@lru_cache(maxsize=None)
def ssp_coefficient(method: TimeMethod) -> sympy.Expr:
    r = sympy.Symbol("r", nonnegative=True)
    rows = method.butcher_rows
    size = len(rows)
    k = sympy.Matrix([list(row) + [0] for row in rows])
    # (I + rK)^-1 = sum_j (-rK)^j, a finite sum: K is strictly lower triangular.
    inverse, term = sympy.eye(size), sympy.eye(size)
    for _ in range(size):
        term = -r * k * term
        inverse += term
    entries = list(k * inverse) + list(inverse * sympy.ones(size, 1))
    radius = sympy.oo
    for entry in entries:
        bound = _nonnegative_radius(sympy.Poly(sympy.expand(entry), r))
        if bound < radius:
            radius = bound
        if radius == 0:
            break
    if radius == sympy.oo:
        raise ValueError(f"{method.name}: the radius of absolute monotonicity is unbounded "
                         "(no consistent explicit method has that)")
    return radius
