"""The sympy symbols and functions a scheme's expressions are built from.

Shared by the IR, every analysis pass and every emitter, so that all of them
talk about the same `q[k]`, `u` and `c`.
"""
from __future__ import annotations

import re

import sympy
from sympy.core.function import AppliedUndef, UndefinedFunction

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
    """The offset k of a q(k) symbol, or None for any other symbol (a param named q_0 too)."""
    if type(symbol) is not sympy.Symbol:
        return None
    match = _Q_NAME.match(symbol.name)
    if not match:
        return None
    k = int(match.group(2))
    return -k if match.group(1) else k


def offsets_in(expr: sympy.Expr) -> tuple[int, ...]:
    found = {offset_of(s) for s in expr.free_symbols}
    return tuple(sorted(k for k in found if k is not None))


class ParamSymbol(sympy.Symbol):
    """A user's param. Its own class, so that whatever it is called (r, q_0, t0, c0)
    it never equals the limiter argument, a cell value or a generated temporary, and
    printers find it by class (`_print_ParamSymbol`), never by name."""


def param_symbol(name: str) -> ParamSymbol:
    return ParamSymbol(name, real=True)


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


class LimiterApplication(AppliedUndef):
    """A named limiter applied inside a face expression.

    Each limiter gets its own subclass (`limiter_function`), named `limiter_NAME`
    so that no user name can coincide with a sympy class (printers dispatch on class
    names: a limiter called Abs must not print as abs). `limiter_name` is the name
    the user wrote; read it with `limiter_name_of`.
    """

    limiter_name = ""

    def _sympystr(self, printer):
        return f"{self.limiter_name}({', '.join(printer._print(a) for a in self.args)})"


def limiter_function(name: str) -> sympy.FunctionClass:
    """The undefined function that stands for a named limiter inside a flux."""
    return UndefinedFunction(f"limiter_{name}", bases=(LimiterApplication,),
                             __dict__={"limiter_name": name}, real=True)


def limiter_name_of(call: sympy.Expr) -> str:
    """The user's name of the limiter a LimiterApplication applies."""
    return call.limiter_name


def limiter_calls(expr: sympy.Expr, names) -> list[sympy.Expr]:
    """Every application of a named limiter inside expr, in a stable order."""
    names = set(names)
    calls = {a for a in expr.atoms(LimiterApplication) if a.limiter_name in names}
    return sorted(calls, key=sympy.default_sort_key)
