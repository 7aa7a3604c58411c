"""Scheme IR -> a Fortran 2003 module of bind(C) interfaces to the C kernel.

The module `NAME_mod` declares every exported C function with iso_c_binding
kinds (sizes by value as c_size_t, reals as c_double or c_float) and the
header's constants as parameters, so a Fortran model calls the generated C
directly and links against NAME.o.
"""
from __future__ import annotations

import sympy
from sympy.printing.fortran import FCodePrinter

from ..diagnostics import LoomError
from ..ir import Scheme
from .c import check_precision
from .environment import render
from .plan import banner_lines, plan_kernel

KINDS = {"double": "c_double", "float": "c_float"}
FORTRAN_NAME_LIMIT = 63  # Fortran 2003 identifiers


class ConstantPrinter(FCodePrinter):
    """Real constants as Fortran literals of one kind (1.0_c_double/3.0_c_double)."""

    printmethod = "_fluxloom_fortran"

    def __init__(self, kind: str):
        super().__init__({"standard": 2003, "source_format": "free", "strict": True})
        self.kind = kind

    def _print_Integer(self, expr):
        return f"{int(expr)}.0_{self.kind}"

    def _print_Rational(self, expr):
        return f"({expr.p}.0_{self.kind}/{expr.q}.0_{self.kind})"

    def _print_Float(self, expr):
        return f"{sympy.Float(expr, 17)}_{self.kind}"

    def _print_NumberSymbol(self, expr):
        return self._print_Float(sympy.Float(expr.evalf(17), 17))


def fortran_identifier(name: str) -> str:
    """name, or a clear error when Fortran cannot spell it."""
    if not name[:1].isalpha():
        raise LoomError(f"'{name}' cannot name a Fortran entity (it must start with a letter); "
                        "rename the scheme to build the Fortran interface", file="<fortran>")
    if len(name) > FORTRAN_NAME_LIMIT:
        raise LoomError(f"'{name}' is longer than the {FORTRAN_NAME_LIMIT} characters a Fortran "
                        "name may have; choose a shorter scheme or param name", file="<fortran>")
    return name


def fortran_source(scheme: Scheme, precision: str = "double",
                   verdicts: bool = True) -> dict[str, str]:
    """{'NAME_mod.f90': module text}."""
    check_precision(precision)
    plan = plan_kernel(scheme)
    kind = KINDS[precision]
    printer = ConstantPrinter(kind)
    name = plan.name
    for suffix in ("_workspace_size", "_fill_periodic", "_stage", "_step", "_mod"):
        fortran_identifier(name + suffix)
    params = [{"name": fortran_identifier(f"{name}_param_{p}"), "value": printer.doprint(v)}
              for p, v in plan.params]
    text = render("fortran_module.f90.j2", name=name, plan=plan, kind=kind, params=params,
                  banner=banner_lines(scheme, precision, verdicts))
    return {f"{name}_mod.f90": text}
