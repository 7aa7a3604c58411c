"""What every target's printer shares (mixed into each sympy code printer subclass).

- `check_precision`: the one check of a precision name.
- `reading(renames)`: print each symbol of renames as its replacement (a scaled
  face's copies of cells and params).
- `fold(name, args)`: min and max of several arguments as nested pairs, in one
  order for every target, so all of them select and round alike.
- `repeated_product(base, count)`: x**2..x**4 as products. sympy's
  create_expand_pow_optimization does the same rewrite, but its unevaluated
  product of a compound base prints back as pow(...), so the factors are joined here.
"""
from __future__ import annotations

from contextlib import contextmanager

import sympy
from sympy.printing.precedence import PRECEDENCE

from ..diagnostics import LoomError

PRECISIONS = ("double", "float")
SMALL_POWERS = range(2, 5)
"""Integer powers written as repeated products (exact as in the source and vectorisable)."""


def break_after_commas(text: str, width: int = 88, indent: int = 8) -> list[str]:
    """A statement broken after the commas of its argument lists into lines of at most
    width columns where it can be, continuation lines indented by `indent`. Every comma
    in the statements this is used for (C, numpy) lies inside brackets, so each target
    reads the lines as one statement."""
    pieces = text.split(", ")
    lines, current = [], pieces[0]
    for piece in pieces[1:]:
        if len(current) + 2 + len(piece) > width:
            lines.append(current + ",")
            current = " " * indent + piece
        else:
            current += ", " + piece
    return lines + [current]


def check_precision(precision: str) -> None:
    if precision not in PRECISIONS:
        raise LoomError(f"unknown precision '{precision}' (use 'double' or 'float')",
                        file="--precision")


class PlanPrinting:
    """Mixin for a sympy CodePrinter subclass printing the kernel plan."""

    renames: dict = {}

    @contextmanager
    def reading(self, renames: dict):
        self.renames = renames
        try:
            yield
        finally:
            self.renames = {}

    def fold(self, name: str, args, key=sympy.default_sort_key) -> str:
        """name(a, name(b, c)) over args sorted by key."""
        args = sorted(args, key=key)
        text = self._print(args[-1])
        for arg in reversed(args[:-1]):
            text = f"{name}({self._print(arg)}, {text})"
        return text

    def repeated_product(self, base, count: int) -> str:
        """base*base*... (count factors), each factor bracketed as a Mul operand needs."""
        return "*".join([self.parenthesize(base, PRECEDENCE["Mul"])] * count)

    @staticmethod
    def small_power(expr) -> int | None:
        """|n| for x**n with n = +-2 .. +-4, else None."""
        exp = expr.exp
        if exp.is_Integer and abs(int(exp)) in SMALL_POWERS:
            return abs(int(exp))
        return None
