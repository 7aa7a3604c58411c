"""The AST of a .loom spec: frozen dataclasses, each node keeping its source span."""
from __future__ import annotations

from dataclasses import dataclass

from .diagnostics import Span


# ---- expressions -----------------------------------------------------------

@dataclass(frozen=True)
class Number:
    text: str
    span: Span


@dataclass(frozen=True)
class Name:
    id: str
    span: Span


@dataclass(frozen=True)
class Index:
    """`base[offset]`; only `q[k]` is meaningful."""

    base: Name
    offset: "Expr"
    span: Span


@dataclass(frozen=True)
class Call:
    func: Name
    args: tuple["Expr", ...]
    span: Span


@dataclass(frozen=True)
class Unary:
    op: str  # "-" or "+"
    operand: "Expr"
    span: Span


@dataclass(frozen=True)
class Binary:
    op: str  # + - * / ^
    left: "Expr"
    right: "Expr"
    span: Span


Expr = Number | Name | Index | Call | Unary | Binary


# ---- statements ------------------------------------------------------------

@dataclass(frozen=True)
class About:
    text: str
    span: Span


@dataclass(frozen=True)
class Time:
    method: Name
    span: Span


@dataclass(frozen=True)
class Param:
    name: Name
    value: Expr
    span: Span


@dataclass(frozen=True)
class Let:
    name: Name
    value: Expr
    span: Span


@dataclass(frozen=True)
class LimiterDef:
    name: Name
    args: tuple[Name, ...]
    body: Expr
    span: Span


@dataclass(frozen=True)
class Flux:
    """`flux = EXPR` (kind "flux") or `low_flux = EXPR` (kind "low_flux")."""

    kind: str
    value: Expr
    span: Span


@dataclass(frozen=True)
class Correct:
    method: Name
    span: Span


@dataclass(frozen=True)
class Clip:
    low: Expr
    high: Expr
    span: Span


Statement = About | Time | Param | Let | LimiterDef | Flux | Correct | Clip


@dataclass(frozen=True)
class Spec:
    name: Name
    statements: tuple[Statement, ...]
    span: Span
    file: str
    source: str
