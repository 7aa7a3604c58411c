"""Scheme IR -> a Fortran 2003 module of bind(C) interfaces to the C kernel.

The module `NAME_mod` declares every exported C function with iso_c_binding
kinds (sizes by value as c_size_t, reals as c_double or c_float) and the
header's constants as parameters, so a Fortran model calls the generated C
directly and links against NAME.o.
"""
from __future__ import annotations

import sympy
from sympy.printing.fortran import FCodePrinter

from ..check import FORTRAN_NAME_LIMIT
from ..constants import nearest, shortest_text
from ..ir import Scheme
from .printing import check_precision
from .environment import render
from .plan import C_FUNCTIONS, banner_lines, exported_symbols, plan_kernel

KINDS = {"double": "c_double", "float": "c_float"}
COMMENT_WIDTH = 100
"""Characters of escaped text per comment line (free form allows 132 per line)."""


class ConstantPrinter(FCodePrinter):
    """Real constants as Fortran literals of one kind, rounded once to the kernel's
    precision (0.3333333333333333_c_double); user text only through `escape_text`."""

    printmethod = "_fluxloom_fortran"

    def __init__(self, kind: str, precision: str = "double"):
        super().__init__({"standard": 2003, "source_format": "free", "strict": True})
        self.kind = kind
        self.precision = precision

    def _print(self, expr, **kwargs):
        if isinstance(expr, sympy.Expr) and expr.is_number:
            return f"{shortest_text(nearest(expr, self.precision), self.precision)}_{self.kind}"
        return super()._print(expr, **kwargs)

    @staticmethod
    def escape_text(text: str) -> str:
        """Any string as printable ASCII that is inert in a Fortran comment: printable
        ASCII stays (a backslash doubles), every other character becomes \\xHH,
        \\uHHHH or \\UHHHHHHHH, so no line ends early and no byte is out of place."""
        out = []
        for ch in text:
            code = ord(ch)
            if ch == "\\":
                out.append("\\\\")
            elif " " <= ch <= "~":
                out.append(ch)
            elif code < 0x100:
                out.append(f"\\x{code:02x}")
            elif code < 0x10000:
                out.append(f"\\u{code:04x}")
            else:
                out.append(f"\\U{code:08x}")
        return "".join(out)


def comment_lines(lines) -> tuple[str, ...]:
    """Lines of user text escaped for Fortran comments, long ones cut to fit a line."""
    out = []
    for line in lines:
        text = ConstantPrinter.escape_text(line)
        out.extend(text[i:i + COMMENT_WIDTH] for i in range(0, max(len(text), 1), COMMENT_WIDTH))
    return tuple(out)


def fortran_identifier(name: str) -> str:
    """name, checked against what Fortran can spell (the front end refuses worse)."""
    if not name[:1].isalpha() or len(name) > FORTRAN_NAME_LIMIT:
        raise AssertionError(f"'{name}' is no Fortran name; compiler/check.py lets none through")
    return name


def fortran_source(scheme: Scheme, precision: str = "double",
                   verdicts=()) -> dict[str, str]:
    """{'NAME_mod.f90': module text}."""
    check_precision(precision)
    plan = plan_kernel(scheme)
    kind = KINDS[precision]
    printer = ConstantPrinter(kind, precision)
    name = plan.name
    for suffix in ("_workspace_size", "_fill_periodic", "_stage", "_step", "_mod"):
        fortran_identifier(name + suffix)
    params = [{"name": fortran_identifier(f"{name}_param_{p}"), "value": printer.doprint(v)}
              for p, v in plan.params]
    text = render("fortran_module.f90.j2", name=name, plan=plan, kind=kind, params=params,
                  symbols=exported_symbols(name, precision, C_FUNCTIONS),
                  banner=comment_lines(banner_lines(scheme, precision, verdicts)))
    return {f"{name}_mod.f90": text}


files = fortran_source
"""The target registry's entry point: {'NAME_mod.f90'}."""


PRINTER = ConstantPrinter
"""The target's printer (the registry reads it: compiler/emit/targets.py)."""
