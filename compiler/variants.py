"""Names of kernel variants: `build --name NAME`, and distinct, stable names for
variants made with `--set` (lw_sweby with beta = 3/2 is lw_sweby_beta_3_2), so
several variants of one scheme link into one program side by side.
"""
from __future__ import annotations

import dataclasses

import sympy

from . import syntax as ast
from .check import check_kernel_name
from .diagnostics import LoomError, Span
from .ir import Scheme


def value_tag(value: sympy.Expr) -> str:
    """An exact param value as identifier text: 3/2 -> 3_2, -1 -> m1, -1/3 -> m1_3."""
    value = sympy.Rational(value)
    sign = "m" if value < 0 else ""
    p, q = abs(value.p), value.q
    return f"{sign}{p}" if q == 1 else f"{sign}{p}_{q}"


def variant_name(scheme: Scheme, overrides: dict) -> str:
    """The scheme's name followed by each overridden param and its value, in the given
    order: the same overrides give the same name, different values different names."""
    parts = [scheme.name] + [f"{name}_{value_tag(value)}" for name, value in overrides.items()]
    return "_".join(parts)


def renamed(scheme: Scheme, name: str, option: str = "--name") -> Scheme:
    """The scheme under another kernel name, checked as the front end checks a scheme name."""
    try:
        check_kernel_name(ast.Name(name, Span(1, 1)))
    except LoomError as err:
        raise LoomError(err.message + ("" if option == "--name" else
                                       "; give the variant a shorter name with --name"),
                        file=option) from None
    return dataclasses.replace(scheme, name=name)
