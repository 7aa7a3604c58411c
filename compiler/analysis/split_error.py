"""The splitting error of a sweep sequence, derived from its table.

With A_x, A_y, A_z the 1-D transport operators (q_t = A_x q + A_y q + A_z q), one
period of a splitting applies exp(f h A_axis) for each of its sweeps, h the
step; the exact solution over the same time is exp(period h (A_x + A_y + A_z)).
Both are expanded in powers of h with non-commuting symbols (sympy); the first
power m where they differ gives the local error h^m E, so the error after a fixed
time is of order m - 1, and E is written in commutators [P, Q] = PQ - QP (a
combination of brackets exists for every such term; it is found by matching
monomials). When the operators commute (constant coefficients) every bracket
vanishes and the splitting adds no error.
"""
from __future__ import annotations

import functools
import itertools
from dataclasses import dataclass

import sympy

from ..splittings import AXIS_NAMES, splitting

MAX_POWER = 3   # the tables' errors start at h^2 (Lie) or h^3 (symmetric sequences)


@dataclass(frozen=True)
class Bracket:
    coefficient: sympy.Rational
    text: str                   # "[A_x, [A_x, A_y]]"


@dataclass(frozen=True)
class SplitError:
    method: str
    dims: int
    period: int                         # steps the local error is taken over
    power: int | None                   # m in h^m E (None: no error up to MAX_POWER)
    brackets: tuple[Bracket, ...]       # E as a combination of commutators

    @property
    def order(self) -> int | None:
        """Order of the splitting alone after a fixed time (None: beyond what was derived)."""
        return None if self.power is None else self.power - 1

    def text(self) -> str:
        """'dt^2 (-1/2 [A_x, A_y])': E with its power of the step."""
        if self.power is None:
            return f"no splitting error up to dt^{MAX_POWER}"
        terms = []
        for b in self.brackets:
            sign = "-" if b.coefficient < 0 else "+"
            size = abs(b.coefficient)
            factor = "" if size == 1 else f"{sympy.sstr(size)} "
            terms.append((sign, f"{factor}{b.text}"))
        body = " ".join(f"{s} {t}" for s, t in terms)
        body = body[2:] if body.startswith("+ ") else "-" + body[2:]
        return f"dt^{self.power} ({body})"


def operator_names(dims: int) -> tuple[str, ...]:
    return tuple(f"A_{AXIS_NAMES[a]}" for a in range(dims))


# ---- truncated series in non-commuting symbols -----------------------------------------
# A series is a list: entry k is the homogeneous part of degree k.

def _exp(operator, fraction, top: int) -> list:
    return [sympy.Rational(fraction) ** k / sympy.factorial(k) * operator ** k
            for k in range(top + 1)]


def _times(left: list, right: list, top: int) -> list:
    out = [sympy.Integer(0)] * (top + 1)
    for i, a in enumerate(left):
        for j, b in enumerate(right[:top + 1 - i]):
            out[i + j] += a * b
    return [sympy.expand(part) for part in out]


def _monomials(expr) -> dict:
    return dict(sympy.expand(expr).as_coefficients_dict())


def _bracket(p, q):
    return p * q - q * p


def _candidates(ops, power: int):
    """Commutators of degree `power`, the conventional [X, [X, Y]] forms first."""
    names = {op: op.name for op in ops}
    if power == 2:
        for p, q in itertools.combinations(ops, 2):
            yield _bracket(p, q), f"[{names[p]}, {names[q]}]"
        return
    if power == 3:
        triples = list(itertools.product(ops, repeat=3))
        triples.sort(key=lambda t: (not (t[0] == t[1] != t[2]), ops.index(t[0]),
                                    ops.index(t[1]), ops.index(t[2])))
        for p, q, r in triples:
            if q == r:
                continue
            yield _bracket(p, _bracket(q, r)), f"[{names[p]}, [{names[q]}, {names[r]}]]"
        return
    raise ValueError(f"no commutator basis written for degree {power}")


def _as_brackets(error, ops, power: int) -> tuple[Bracket, ...]:
    """Write a homogeneous Lie element as a combination of independent commutators."""
    chosen: list[tuple[dict, str]] = []
    keys: list = []
    for expr, text in _candidates(ops, power):
        terms = _monomials(expr)
        trial = chosen + [(terms, text)]
        keys_trial = list(dict.fromkeys(keys + list(terms)))
        matrix = sympy.Matrix([[t.get(k, 0) for t, _ in trial] for k in keys_trial])
        if matrix.rank() == len(trial):
            chosen, keys = trial, keys_trial
    target = _monomials(error)
    keys = list(dict.fromkeys(keys + list(target)))
    matrix = sympy.Matrix([[t.get(k, 0) for t, _ in chosen] for k in keys])
    vector = sympy.Matrix([target.get(k, 0) for k in keys])
    solution, params = matrix.gauss_jordan_solve(vector)
    if params.shape[0]:
        raise ArithmeticError("the commutator basis is not independent")  # a fluxloom bug
    return tuple(Bracket(sympy.Rational(c), text)
                 for c, (_, text) in zip(solution, chosen) if c != 0)


@functools.lru_cache(maxsize=None)
def split_error(method: str, dims: int) -> SplitError:
    """The leading local error of one period of `method` in `dims` dimensions."""
    table = splitting(method)
    ops = [sympy.Symbol(name, commutative=False) for name in operator_names(dims)]
    product = [sympy.Integer(1)] + [sympy.Integer(0)] * MAX_POWER
    for step in table.sequence(dims):
        for sweep in step:
            # a later sweep acts on the result of the earlier ones: it multiplies on the left
            product = _times(_exp(ops[sweep.axis], sweep.fraction, MAX_POWER), product, MAX_POWER)
    exact = _exp(sum(ops, sympy.Integer(0)), table.period, MAX_POWER)
    for power in range(2, MAX_POWER + 1):
        error = sympy.expand(product[power] - exact[power])
        if error != 0:
            return SplitError(method, dims, table.period, power, _as_brackets(error, ops, power))
    return SplitError(method, dims, table.period, None, ())
