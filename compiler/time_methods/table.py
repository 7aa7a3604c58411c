"""One explicit Runge-Kutta method as one table.

A method is stored in Shu-Osher form: with Y_0 = q (the step's start) and
dL_j = dt L(Y_j) the operator applied to stage j,

    Y_k = sum_{j<k} alpha[k][j] Y_j + beta[k][j] dL_j,    k = 1 .. s,

and Y_s is the new state; the operator is evaluated at Y_0 .. Y_{s-1}, so s is
the number of stages. A Butcher tableau (A, b) is the special case
alpha[k] = (1, 0, ...), beta[k] = row k of A (and b for k = s). Everything else
about a method (Butcher form, R(z), orders, SSP coefficient, the stage updates
a kernel performs, the reference stepper) is derived from these two arrays.
"""
from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction

import sympy

Rows = tuple[tuple[sympy.Rational, ...], ...]


def _exact(value) -> sympy.Rational:
    """A coefficient as an exact rational; floats are refused (they are not exact)."""
    if isinstance(value, float):
        raise TypeError(f"time-method coefficient {value!r} must be exact (int, str, Fraction "
                        "or sympy Rational), not a float")
    if isinstance(value, Fraction):
        return sympy.Rational(value.numerator, value.denominator)
    number = sympy.Rational(value) if isinstance(value, (int, str)) else sympy.sympify(value)
    if not number.is_Rational:
        raise TypeError(f"time-method coefficient {value!r} is not rational")
    return number


def _rows(rows, width_of) -> Rows:
    """Rows padded with zeros to width_of(k) (row k has k entries: j = 0 .. k-1)."""
    out = []
    for k, row in enumerate(rows, start=1):
        row = [_exact(v) for v in row]
        if len(row) > width_of(k):
            raise ValueError(f"row {k} has {len(row)} entries, at most {width_of(k)} allowed")
        out.append(tuple(row + [sympy.Integer(0)] * (width_of(k) - len(row))))
    return tuple(out)


@dataclass(frozen=True)
class TimeMethod:
    """An explicit Runge-Kutta method in Shu-Osher form (see the module docstring)."""

    name: str
    description: str
    alpha: Rows   # alpha[k-1][j]: weight of Y_j in Y_k
    beta: Rows    # beta[k-1][j]: weight of dt L(Y_j) in Y_k

    def __post_init__(self):
        if len(self.alpha) != len(self.beta) or not self.alpha:
            raise ValueError(f"{self.name}: alpha and beta need the same, nonzero, number of rows")
        for k, (a_row, b_row) in enumerate(zip(self.alpha, self.beta), start=1):
            if len(a_row) != k or len(b_row) != k:
                raise ValueError(f"{self.name}: row {k} must have {k} entries")
            if sum(a_row) != 1:
                raise ValueError(f"{self.name}: the alpha weights of Y_{k} sum to "
                                 f"{sum(a_row)}, not 1 (a constant state must stay constant)")

    @property
    def stages(self) -> int:
        """Evaluations of the operator per step."""
        return len(self.alpha)

    # ---- the Butcher form ------------------------------------------------------------
    @property
    def butcher_rows(self) -> Rows:
        """Y_k = q + sum_j K[k][j] dL_j for k = 0 .. s (row 0 is zero, row s is b)."""
        zero = sympy.Integer(0)
        rows = [tuple([zero] * self.stages)]
        for a_row, b_row in zip(self.alpha, self.beta):
            row = [zero] * self.stages
            for j, (a, b) in enumerate(zip(a_row, b_row)):
                row[j] += b
                for m in range(self.stages):
                    row[m] += a * rows[j][m]
            rows.append(tuple(row))
        return tuple(rows)

    @property
    def butcher_a(self) -> Rows:
        return self.butcher_rows[:-1]

    @property
    def butcher_b(self) -> tuple[sympy.Rational, ...]:
        return self.butcher_rows[-1]

    @property
    def butcher_c(self) -> tuple[sympy.Rational, ...]:
        return tuple(sum(row, sympy.Integer(0)) for row in self.butcher_a)

    # ---- facts derived from the table (compiler/time_methods/properties.py) ----------
    @property
    def stability_polynomial(self) -> sympy.Expr:
        from .properties import stability_polynomial
        return stability_polynomial(self)

    @property
    def order(self) -> int:
        """The classical order (every order condition of the Butcher form)."""
        from .properties import order
        return order(self)

    @property
    def linear_order(self) -> int:
        """The order on linear problems: R(z) against exp(z)."""
        from .properties import linear_order
        return linear_order(self)

    @property
    def ssp_coefficient(self) -> sympy.Expr:
        """Kraaijevanger's radius of absolute monotonicity; 0 where the method is not SSP."""
        from .properties import ssp_coefficient
        return ssp_coefficient(self)


def shu_osher(name: str, description: str, alpha, beta) -> TimeMethod:
    """A method from its Shu-Osher arrays; row k (k = 1 .. s) may omit trailing zeros."""
    return TimeMethod(name, description, _rows(alpha, lambda k: k), _rows(beta, lambda k: k))


def butcher(name: str, description: str, a, b) -> TimeMethod:
    """A method from an explicit Butcher tableau: a lists rows 2 .. s of A (row 1 is zero),
    each may omit trailing zeros; b the weights."""
    rows = list(a) + [b]
    beta = _rows(rows, lambda k: k)
    alpha = tuple((sympy.Integer(1),) + (sympy.Integer(0),) * (k - 1)
                  for k in range(1, len(beta) + 1))
    return TimeMethod(name, description, alpha, beta)
