"""The sympy symbols and functions a scheme's expressions are built from.

Shared by the IR, every analysis pass and every emitter, so that all of them
talk about the same `q[k]`, `u` and `c`.
"""
from __future__ import annotations

import re

import sympy

U = sympy.Symbol("u", real=True)
"""Face velocity (signed). The flux is U times the face expression g."""

C = sympy.Symbol("c", nonnegative=True)
"""Courant number magnitude, abs(u) * dt / dx (single-step schemes only)."""

R = sympy.Symbol("r", real=True)
"""The argument of every limiter function."""

_Q_NAME = re.compile(r"^q_(m?)(\d+)$")


def q(k: int) -> sympy.Symbol:
    """Cell average at offset k in the upwind frame: q(0) upwind, q(1) downwind."""
    return sympy.Symbol(f"q_m{-k}" if k < 0 else f"q_{k}", real=True)


def offset_of(symbol: sympy.Symbol) -> int | None:
    """The offset k of a q(k) symbol, or None for any other symbol."""
    match = _Q_NAME.match(symbol.name)
    if not match:
        return None
    k = int(match.group(2))
    return -k if match.group(1) else k


def offsets_in(expr: sympy.Expr) -> tuple[int, ...]:
    found = {offset_of(s) for s in expr.free_symbols}
    return tuple(sorted(k for k in found if k is not None))


def param_symbol(name: str) -> sympy.Symbol:
    return sympy.Symbol(name, real=True)


class Ratio(sympy.Function):
    """ratio(a, b) = a / b where b != 0, else 0: the usual smoothness ratio."""

    nargs = 2
    is_real = True

    @classmethod
    def eval(cls, a, b):
        if b.is_zero:
            return sympy.Integer(0)
        if a.is_number and b.is_number and b.is_nonzero:
            return a / b
        return None


def limiter_function(name: str) -> sympy.FunctionClass:
    """The undefined function that stands for a named limiter inside a flux."""
    return sympy.Function(name, real=True)


def limiter_calls(expr: sympy.Expr, names) -> list[sympy.Expr]:
    """Every application of a named limiter inside expr, in a stable order."""
    names = set(names)
    calls = {a for a in expr.atoms(sympy.Function) if type(a).__name__ in names}
    return sorted(calls, key=sympy.default_sort_key)
