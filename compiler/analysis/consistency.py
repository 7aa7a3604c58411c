"""Consistency, order and the modified equation, from the series of ln G.

With q_j = exp(i j theta) and x = i theta, ln G(e^x) = dt sum_m a_m x^m / dx^m
for the modified equation q_t = sum_m a_m d^m q / dx^m. With dt = c dx / u the
coefficient L_m of x^m gives a_m = L_m u dx^(m-1) / c. a_1 = -u is
consistency; the first nonzero a_m with m >= 2 gives order m - 1 at fixed c.
For method-of-lines schemes the same series of the semi-discrete symbol
lambda gives the spatial modified equation, a_m = Lambda_m u dx^(m-1).
"""
from __future__ import annotations

from dataclasses import dataclass

import sympy

from ..symbols import C
from .symbol import LinearScheme
from .timemethods import linear_order, method

SERIES_ORDER = 8                   # terms of the series kept: enough for two terms past third order
U = sympy.Symbol("u", positive=True)
DX = sympy.Symbol("dx", positive=True)
DT = sympy.Symbol("dt", positive=True)


@dataclass(frozen=True)
class Term:
    derivative: int            # m in d^m q / dx^m
    coefficient: sympy.Expr    # a_m in u, dx and c

    @property
    def derivative_name(self) -> str:
        return "q_" + "x" * self.derivative

    @property
    def coefficient_text(self) -> str:
        return sympy.sstr(readable(self.coefficient))


READABLE_DEGREE = 12


def readable(expr: sympy.Expr) -> sympy.Expr:
    """The same value with factors (c - a), a > 0, written as (a - c) where the signs
    allow: u*dx*(1 - c)/2 rather than -dx*u*(c - 1)/2. Coefficients of high degree in c
    are left as they are: factoring them costs seconds and reads no better."""
    try:
        top, bottom = sympy.fraction(sympy.together(expr))
        if max(sympy.degree(top, C), sympy.degree(bottom, C)) > READABLE_DEGREE:
            return expr
    except sympy.PolynomialError:
        return expr
    coeff, factors = sympy.factor(expr).as_coeff_mul()
    factors = list(factors)
    flippable = [i for i, f in enumerate(factors)
                 if isinstance(f.as_base_exp()[0], sympy.Add) and f.as_base_exp()[1].is_odd
                 and C in f.free_symbols and f.as_base_exp()[0].as_coeff_Add()[0] < 0]
    want_odd = coeff < 0
    if (len(flippable) % 2 == 1) != want_odd:
        flippable = flippable[:-1]
    if not flippable:
        return expr
    for i in flippable:
        base, power = factors[i].as_base_exp()
        factors[i] = sympy.Pow(-base, power, evaluate=False) if power != 1 else -base
    sign = -1 if len(flippable) % 2 else 1
    return sympy.Mul(sign * coeff, *factors, evaluate=False)


@dataclass(frozen=True)
class Consistency:
    label: str
    consistent: bool
    order_space: int | None
    order_time: int | None
    order_overall: int | None
    terms: tuple[Term, ...]              # first two nonzero terms with m >= 2 (fully discrete)
    spatial_terms: tuple[Term, ...]      # method-of-lines: of the semi-discrete operator
    note: str
    error_terms: tuple[Term, ...] = ()   # every nonzero term kept by the series, in order

    def order_at(self, courant) -> int | None:
        """Order at one Courant number: a leading term can vanish there (Fromm at c = 1/2)."""
        c_value = sympy.Rational(str(courant))
        for term in self.error_terms:
            if term.coefficient.subs({C: c_value, U: 1, DX: 1}) != 0:
                return term.derivative - 1
        return self.order_overall


class _Coefficients:
    """Arithmetic for series coefficients: the field QQ(c) when the coefficients are
    rational functions of c with rational coefficients (fast and exact), else sympy."""

    def __init__(self, values):
        self.field = sympy.QQ.frac_field(C)
        try:
            self.convert = [self.field.from_sympy(sympy.sympify(v)) for v in values]
            self.fast = True
        except (sympy.CoercionFailed, sympy.PolynomialError, ValueError):
            self.convert = [sympy.sympify(v) for v in values]
            self.fast = False

    def zero(self):
        return self.field.zero if self.fast else sympy.Integer(0)

    def one(self):
        return self.field.one if self.fast else sympy.Integer(1)

    def number(self, value):
        return self.field.from_sympy(sympy.Rational(value)) if self.fast else sympy.Rational(value)

    def simplify(self, value):
        return value if self.fast else sympy.expand(value)

    def to_sympy(self, value):
        return self.field.to_sympy(value) if self.fast else sympy.expand(value)


def _series(laurent: dict, order: int):
    """Coefficients of x^n, n = 0..order, of sum_m b_m exp(m x), and their arithmetic."""
    offsets = list(laurent)
    arith = _Coefficients([laurent[m] for m in offsets])
    out = []
    for n in range(order + 1):
        total = arith.zero()
        for m, v in zip(offsets, arith.convert):
            total = total + v * arith.number(sympy.Integer(m) ** n)
        out.append(arith.simplify(total * arith.number(sympy.Rational(1, sympy.factorial(n)))))
    return out, arith


def _log_series(coeffs, arith) -> list[sympy.Expr]:
    """Coefficients of ln(sum_n G_n x^n), given G_0 = 1, truncated at the same order."""
    order = len(coeffs) - 1
    h = [arith.zero()] + list(coeffs[1:])
    out = [arith.zero()] * (order + 1)
    power = [arith.one()] + [arith.zero()] * order
    for j in range(1, order + 1):
        new = []
        for n in range(order + 1):
            total = arith.zero()
            for i in range(n + 1):
                total = total + power[i] * h[n - i]
            new.append(arith.simplify(total))
        power = new
        weight = arith.number(sympy.Rational(1 if j % 2 else -1, j))
        for n in range(order + 1):
            out[n] = arith.simplify(out[n] + weight * power[n])
    return [arith.to_sympy(v) for v in out]


def _terms(log_coeffs, per_step: bool, wanted: int = 2, factor: bool = True) -> list[Term]:
    """The first `wanted` nonzero a_m with m >= 2 (factored for reading)."""
    out = []
    for m in range(2, len(log_coeffs)):
        value = log_coeffs[m]
        if value == 0 or sympy.expand(value) == 0:
            continue
        a_m = value / C if per_step else value
        a_m = sympy.factor(a_m) if factor else sympy.cancel(a_m)
        out.append(Term(m, a_m * U * DX ** (m - 1)))
        if len(out) == wanted:
            break
    return out


def _split_orders(terms: list[Term]) -> tuple[int | None, int | None, str]:
    """Orders in space and in time from the powers of c in each a_m.

    a term c^j u dx^(m-1) is u^(1+j) dt^j dx^(m-1-j): j = 0 is a space error,
    j = m - 1 a time error, anything between is mixed and counts for both.
    """
    space = time = None
    note = ""
    for term in terms:
        p = term.derivative - 1
        expr = sympy.expand(term.coefficient / (U * DX ** p))
        try:
            poly = sympy.Poly(expr, C)
            powers = [mon[0] for mon in poly.monoms()]
        except sympy.PolynomialError:
            powers = None
        if powers is None or any(j < 0 for j in powers):
            note = "a coefficient is not polynomial in c, so only the order at fixed c is meaningful"
            space = p if space is None else space
            time = p if time is None else time
            continue
        if space is None and any(j < p for j in powers):
            space = p
        if time is None and any(j > 0 for j in powers):
            time = p
    return space, time, note


def analyse_consistency(scheme: LinearScheme) -> Consistency:
    if not scheme.update:
        return Consistency(scheme.label, False, None, None, None, (), (), "the update is empty")
    euler = scheme.time == "euler"
    lam_series, lam_arith = _series(scheme.semi_discrete, SERIES_ORDER)
    lam = [lam_arith.to_sympy(v) for v in lam_series]
    consistent = sympy.simplify(lam[0]) == 0 and sympy.simplify(lam[1] + 1) == 0
    if not consistent:
        return Consistency(scheme.label, False, None, None, None, (), (),
                           f"the semi-discrete symbol gives a_1 = {sympy.sstr(-lam[1])}*(-u), not -u"
                           if sympy.simplify(lam[0]) == 0 else "constants are not preserved")
    full = _log_series(*_series(scheme.update, SERIES_ORDER))
    terms = _terms(full, per_step=True)
    overall = terms[0].derivative - 1 if terms else None
    spatial_terms = _terms(lam, per_step=False)
    error_terms = tuple(_terms(full, per_step=True, wanted=SERIES_ORDER, factor=False))
    if euler:
        space, time, note = _split_orders(list(error_terms))
        spatial = ()
    else:
        space = spatial_terms[0].derivative - 1 if spatial_terms else None
        time = linear_order(scheme.time)
        note = (f"space: semi-discrete operator; time: {method(scheme.time).description}, "
                f"order {time}")
        spatial = tuple(spatial_terms[:2])
    if overall is None:
        note = (note + "; " if note else "") + \
            f"no error term up to d^{SERIES_ORDER} q/dx^{SERIES_ORDER}: order at least {SERIES_ORDER - 1}"
    return Consistency(scheme.label, True, space, time, overall, tuple(terms[:2]), spatial, note,
                       error_terms)
