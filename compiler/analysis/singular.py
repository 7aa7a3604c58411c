"""Limiters without a value somewhere: 0/0, infinity times zero, poles, sqrt of a negative.

A kernel evaluates a limiter in IEEE arithmetic, where x/0 is an infinity of
either sign (the sign of a zero is not under the spec's control), 0/0, 0 * inf
and inf - inf are NaN, and min/max of an infinity may still be finite. This
module evaluates a body the same way, exactly, with sets of possible results:
`ieee_values(body, point)` is every value the kernel can produce there (sympy
oo, -oo and nan stand for the IEEE specials). `limiter_problems` finds the
points where a limiter has no finite value (the zeros of its denominators, and
for a limiter of (r, c) the Courant numbers where a denominator in c vanishes)
and the front end turns each into a located error, so no such limiter reaches
a kernel. A removable gap (5 max(0, r) / (2 (1 + r)) at r = -1) is refused too:
the kernel would divide 0 by 0 there; `ratio(a, b)`, which is 0 where b = 0,
says what the value should be.
"""
from __future__ import annotations

import itertools
from dataclasses import dataclass

import sympy

from ..symbols import C, R, Ratio
from . import piecewise

MAX_OUTCOMES = 64
"""Set-valued evaluation gives up (no claim either way) past this many outcomes."""

COURANT_SAMPLES = tuple(sympy.Rational(k, 4) for k in (1, 2, 3, 4, 6, 8))
"""Courant numbers a limiter of (r, c) is checked at, besides the zeros of its
denominators in c. c = 0 is not among them: where u == 0 the kernels evaluate
the face with c = 1 (the flux is 0 whatever the limiter says)."""

NAN, INF, NINF = sympy.nan, sympy.oo, -sympy.oo


class _GiveUp(Exception):
    pass


@dataclass(frozen=True)
class Problem:
    r: sympy.Expr | None        # where (None: for every r at this c)
    c: sympy.Expr | None        # the Courant number, for a limiter of (r, c)
    kind: str                   # "nan" | "unbounded" | "sqrt"
    denominator: sympy.Expr | None   # the divisor that vanishes (to locate it), if known
    detail: str

    def message(self, name: str) -> str:
        where = []
        if self.r is not None:
            where.append(f"r = {sympy.sstr(self.r)}")
        if self.c is not None:
            where.append(f"c = {sympy.sstr(self.c)}")
        at = " and ".join(where) or "some r"
        if self.kind == "nan":
            return (f"limiter '{name}' has no value at {at} ({self.detail}), so a kernel would "
                    "compute NaN there; cancel the common zero, or write the quotient as "
                    "ratio(a, b), which is 0 where b = 0")
        if self.kind == "sqrt":
            return (f"limiter '{name}' takes the square root of a negative number "
                    f"({self.detail}), so a kernel would compute NaN")
        return (f"limiter '{name}' is unbounded near {at} ({self.detail}), so a kernel would "
                "compute infinities there")


def _finite(value) -> bool:
    return value not in (NAN, INF, NINF)


def _is_zero(value) -> bool:
    if value.free_symbols:
        return False  # a function of the free symbol: its zeros are checked as points
    zero = value.is_zero
    if zero is None:
        zero = abs(sympy.N(value, 60)) < sympy.Float(10) ** -50
    return bool(zero)


def _sign(value) -> int | None:
    if value == INF:
        return 1
    if value == NINF:
        return -1
    if value.free_symbols:
        return None
    return int(sympy.sign(sympy.N(value, 60))) if not _is_zero(value) else 0


def _combine(options, rule):
    out = set()
    for choice in itertools.product(*options):
        out |= rule(choice)
        if len(out) > MAX_OUTCOMES:
            raise _GiveUp
    return frozenset(out)


def _add(choice):
    if NAN in choice or (INF in choice and NINF in choice):
        return {NAN}
    if INF in choice:
        return {INF}
    if NINF in choice:
        return {NINF}
    return {sympy.Add(*choice)}


def _mul(choice):
    if NAN in choice:
        return {NAN}
    infinite = [v for v in choice if not _finite(v)]
    if not infinite:
        return {sympy.Mul(*choice)}
    signs = [_sign(v) for v in choice]
    if 0 in signs or None in signs:
        return {NAN}  # infinity times zero (or times something that may vanish)
    return {INF if sympy.prod(signs) > 0 else NINF}


def _power(base, exponent):
    if base == NAN:
        return {NAN}
    if exponent.is_Integer:
        n = int(exponent)
        if not _finite(base):
            if n < 0:
                return {sympy.Integer(0)}
            return {INF if base == INF or n % 2 == 0 else NINF}
        if n < 0 and _is_zero(base):
            return {INF} if n % 2 == 0 else {INF, NINF}  # 1/(+0) or 1/(-0)
        return {base ** n}
    # a root: NaN below zero
    if base == NINF:
        return {NAN}
    if base == INF:
        return {INF}
    sign = _sign(base)
    if sign is not None and sign < 0:
        return {NAN}
    return {base ** exponent}


def _extreme(choice, is_max: bool):
    if NAN in choice:
        return {NAN}
    if (INF if is_max else NINF) in choice:
        return {INF if is_max else NINF}
    rest = [v for v in choice if _finite(v)]
    if not rest:
        return {NINF if is_max else INF}
    if len(rest) == 1:
        return {rest[0]}
    if all(not v.free_symbols for v in rest):
        return {max(rest, key=lambda v: sympy.N(v, 30)) if is_max
                else min(rest, key=lambda v: sympy.N(v, 30))}
    return {(sympy.Max if is_max else sympy.Min)(*rest, evaluate=False)}


def _ratio(choice):
    top, bottom = choice
    if NAN in choice:
        return {NAN}
    if _finite(bottom) and _is_zero(bottom):
        return {sympy.Integer(0)}
    if not _finite(bottom):
        return {NAN} if not _finite(top) else {sympy.Integer(0)}
    if not _finite(top):
        sign = _sign(bottom)
        if sign is None:
            return {NAN}
        return {top if sign > 0 else (NINF if top == INF else INF)}
    return {Ratio(top, bottom)}


def ieee_values(expr: sympy.Expr, point: dict) -> frozenset | None:
    """Every value IEEE arithmetic can give for expr at point ({symbol: value}); symbols
    not in point stay symbolic. None when the outcomes could not be enumerated."""
    try:
        return _values(expr, point)
    except _GiveUp:
        return None


def _values(expr, point):
    if expr in point:
        return frozenset({point[expr]})
    if expr.is_Number or expr.is_Symbol or expr.is_NumberSymbol:
        return frozenset({expr})
    args = [_values(a, point) for a in expr.args]
    if isinstance(expr, sympy.Add):
        return _combine(args, _add)
    if isinstance(expr, sympy.Mul):
        return _combine(args, _mul)
    if isinstance(expr, sympy.Pow):
        exponent = expr.exp
        if exponent.free_symbols:
            raise _GiveUp
        return _combine([args[0]], lambda choice: _power(choice[0], exponent))
    if isinstance(expr, (sympy.Max, sympy.Min)):
        is_max = isinstance(expr, sympy.Max)
        return _combine(args, lambda choice: _extreme(choice, is_max))
    if isinstance(expr, sympy.Abs):
        return _combine(args, lambda ch: {ch[0] if ch[0] == NAN else
                                          (INF if not _finite(ch[0]) else sympy.Abs(ch[0]))})
    if isinstance(expr, sympy.sign):
        return _combine(args, lambda ch: {ch[0] if ch[0] == NAN else
                                          (sympy.Integer(_sign(ch[0])) if not _finite(ch[0])
                                           else sympy.sign(ch[0]))})
    if isinstance(expr, Ratio):
        return _combine(args, _ratio)
    raise _GiveUp


# ---- where a body may have no value ---------------------------------------------

def _denominators(expr: sympy.Expr) -> list[sympy.Expr]:
    """Bases of negative powers anywhere in expr (each may vanish somewhere)."""
    return [node.base for node in sympy.preorder_traversal(expr)
            if isinstance(node, sympy.Pow) and node.exp.is_negative]


def _roots(expr: sympy.Expr) -> list[sympy.Expr]:
    """Exact real zeros in r of a piecewise-rational expression (None-safe: [] if unknown)."""
    parts = piecewise.pieces(expr)
    if parts is None:
        return []
    found = []
    for piece, where in parts:
        numerator = sympy.numer(sympy.together(piece))
        if not numerator.free_symbols:
            continue
        for root in sympy.real_roots(sympy.Poly(numerator, R)):
            if where.contains(root) == sympy.true:
                found.append(root)
    return found


def _problems_in_r(body: sympy.Expr, c_value=None) -> list[Problem]:
    """Problems of a body in r alone (a limiter of r, or one of (r, c) at one c)."""
    problems = []
    for base in _denominators(body):
        for root in _roots(base):
            values = ieee_values(body, {R: root})
            if values is None:
                continue
            if NAN in values:
                problems.append(Problem(root, c_value, "nan",
                                        base, f"0/0 or infinity times zero: "
                                              f"{sympy.sstr(base)} vanishes there"))
                continue
            if INF in values or NINF in values:
                problems.append(Problem(root, c_value, "unbounded", base,
                                        f"{sympy.sstr(base)} vanishes there"))
                continue
            parts = piecewise.pieces(body)
            if parts is None:
                continue
            for side in (-1, 1):
                piece = piecewise.piece_at(parts, root, side)
                if piece is None:
                    continue
                limit = sympy.limit(piece, R, root, "+" if side > 0 else "-")
                if limit.is_infinite:
                    problems.append(Problem(root, c_value, "unbounded", base,
                                            f"{sympy.sstr(base)} vanishes there"))
                    break
    for node in sympy.preorder_traversal(body):
        if isinstance(node, sympy.Pow) and not node.exp.is_Integer:
            parts = piecewise.pieces(node.base)
            if parts is None:
                continue
            for piece, where in parts:
                low, _ = piecewise.extrema_on(piece, where)
                if piecewise._key(low) < 0:
                    problems.append(Problem(None, c_value, "sqrt", None,
                                            f"{sympy.sstr(node.base)} < 0 for some r"))
                    break
    return _unique(problems)


def _unique(problems):
    seen, out = set(), []
    for p in problems:
        key = (p.r, p.c, p.kind)
        if key not in seen:
            seen.add(key)
            out.append(p)
    return out


def _courant_zeros(body: sympy.Expr) -> list[sympy.Expr]:
    """Positive Courant numbers where a denominator's factor in c alone vanishes."""
    found = []
    for base in _denominators(body):
        numerator = sympy.numer(sympy.together(base))
        if numerator.has(sympy.Abs, sympy.Min, sympy.Max, sympy.sign, Ratio):
            continue
        try:
            factors = sympy.factor_list(numerator, C, R)[1] if numerator.free_symbols else []
        except sympy.PolynomialError:
            continue
        for factor, _ in factors:
            if factor.free_symbols == {C}:
                found += [v for v in sympy.real_roots(sympy.Poly(factor, C)) if v > 0]
    return found


def limiter_problems(body: sympy.Expr, courant: bool = False) -> list[Problem]:
    """Every point where the limiter has no finite value (params already bound)."""
    if not courant:
        return _problems_in_r(body)
    problems = []
    for c_value in sorted(set(_courant_zeros(body)) | set(COURANT_SAMPLES), key=float):
        outcomes = ieee_values(body, {C: c_value})
        if outcomes is None:
            continue
        if any(not _finite(v) for v in outcomes):
            problems.append(Problem(None, c_value, "nan" if NAN in outcomes else "unbounded",
                                    None, "a division by zero there gives NaN or an infinity "
                                          "for some r"))
            continue
        for one in outcomes:
            problems += _problems_in_r(one, c_value)
    return _unique(problems)
