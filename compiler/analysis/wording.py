"""How verdicts and sets of Courant numbers read, in every output.

`check` (text), `compare`, `demo`, `verify`'s findings and reports, and the
comment at the top of every generated file word the analysis through these
functions, so one fact reads the same everywhere: an undecided verdict is
"undecided" (never "no" or "-"), every island is named, a limiter failure
names its property and the range of r where it fails.

Values read as in the document's "set" strings: the exact form when it is
short (24 characters or fewer), otherwise the number to 6 significant digits.
"""
from __future__ import annotations

import math

import sympy

from .claims import (Claims, Courants, Limiter, LimiterFailure, Order, Part, Split,
                     SplitDirection, Stability, Verdict)

EXACT_WIDTH = 24
PROPERTY_LABELS = {"sweby_tvd": "Sweby's TVD region",
                   "second_order_region": "second-order region",
                   "symmetric": "symmetry psi(r)/r = psi(1/r)"}
YES_NO = {True: "yes", False: "no", None: "undecided"}


# ---- numbers and sets ----------------------------------------------------------------

def value_text(number: float | None, exact: str | None = None) -> str:
    """One end of an interval: exact when short, else 6 significant digits; 'oo' unbounded."""
    if exact == "oo" or (number is not None and number == math.inf):
        return "oo"
    if exact is not None and len(exact) <= EXACT_WIDTH and not _float_literal(exact):
        return exact
    if number is None and exact is not None and _float_literal(exact):
        number = float(exact)
    if number is None:
        return "?"
    return f"{number:.6g}"


def _float_literal(text: str) -> bool:
    """A decimal written by a numeric method ("3.61112200000000"), not an exact form."""
    if not any(ch in text for ch in ".eE"):
        return False
    try:
        float(text)
    except ValueError:
        return False
    return True


def part_text(part: Part) -> str:
    if part.is_point:
        return f"c = {value_text(part.lo, part.lo_exact)}"
    hi = value_text(part.hi, part.hi_exact)
    return f"[{value_text(part.lo, part.lo_exact)}, {hi}{')' if hi == 'oo' else ']'}"


def set_text(courants: Courants) -> str:
    """'[0, 1] and c = 2'; 'no c > 0' when empty (the trivial c = 0 is left out)."""
    parts = [p for p in courants.parts if not (p.is_point and p.lo == 0)]
    if not parts:
        return "no c > 0"
    return " and ".join(part_text(p) for p in parts)


def sympy_value_text(value) -> str:
    if value == sympy.oo:
        return "oo"
    if value == -sympy.oo:
        return "-oo"
    if isinstance(value, sympy.Float):      # a sampled end
        return f"{float(value):.4g}"
    text = sympy.sstr(value)
    return text if len(text) <= EXACT_WIDTH else f"{float(sympy.N(value, 20)):.6g}"


def r_set_text(where: sympy.Set) -> str:
    """A set of ratios r in words: 'r in (0, 1/3)', 'r = 1', 'r in (-oo, 0) and r = 2'."""
    pieces = list(where.args) if isinstance(where, sympy.Union) else [where]
    words = []
    for piece in pieces:
        if isinstance(piece, sympy.FiniteSet):
            words += [f"r = {sympy_value_text(p)}" for p in sorted(piece, key=float)]
        elif isinstance(piece, sympy.Interval):
            left = "(" if piece.left_open or piece.start == -sympy.oo else "["
            right = ")" if piece.right_open or piece.end == sympy.oo else "]"
            words.append(f"r in {left}{sympy_value_text(piece.start)}, "
                         f"{sympy_value_text(piece.end)}{right}")
        else:
            words.append(f"r in {sympy.sstr(piece)}")
    return " and ".join(words) if words else "no r"


# ---- verdicts ------------------------------------------------------------------------

def yes_no(holds: bool | None) -> str:
    return YES_NO[holds]


def verdict_text(verdict: Verdict) -> str:
    """'yes for [0, 1]', 'only for c = 1 and c = 2', 'no', or 'undecided'."""
    if verdict.holds is None:
        return "undecided"
    if verdict.holds:
        return "yes" if verdict.where.everything else f"yes for {set_text(verdict.where)}"
    if not verdict.where.empty and set_text(verdict.where) != "no c > 0":
        return f"only for {set_text(verdict.where)}"
    return "no"


def stability_text(stability: Stability) -> str:
    """'conditional, stable for [0, 1] and c = 2'; 'unstable, stable only for c = 1'."""
    if stability.kind is None:
        return "undecided"
    if stability.kind == "unstable":
        if stability.stable.empty or set_text(stability.stable) == "no c > 0":
            return "unstable for every c > 0"
        return f"unstable, stable only for {set_text(stability.stable)}"
    return f"{stability.kind}, stable for {set_text(stability.stable)}"


def order_text(order: Order, courant: float | None = None) -> str:
    """'2 (space 2, time 2)', with the order at the Courant number where it is higher."""
    if order.overall is None:
        return "undecided"
    text = f"{order.overall} (space {_maybe(order.space)}, time {_maybe(order.time)})"
    if order.at_courant is not None and order.at_courant > order.overall and courant is not None:
        text += f"; {order.at_courant} at c = {courant:g}"
    return text


def _maybe(value) -> str:
    return "undecided" if value is None else str(value)


def failure_text(failure: LimiterFailure) -> str:
    """'Sweby's TVD region fails for r in (0, 1/3): psi = 3*r exceeds 2*r (region [0, 2r])'."""
    label = PROPERTY_LABELS.get(failure.property, failure.property)
    return f"{label} fails for {failure.r}: {failure.detail}"


def limiter_text(limiter: Limiter) -> str:
    return (f"Sweby TVD region {yes_no(limiter.sweby_tvd)}; second-order region "
            f"{yes_no(limiter.second_order_region)}; symmetric {yes_no(limiter.symmetric)}")


def verdict_lines(claims: Claims) -> tuple[str, ...]:
    """The verdicts in short lines: the generated files' comment and the demo read these."""
    lines = [f"order: {order_text(claims.order, claims.courant)}",
             f"stability: {stability_text(claims.stability)}",
             f"conservative: {yes_no(claims.conservative)}",
             f"monotone: {verdict_text(claims.monotone)}",
             f"TVD: {verdict_text(claims.tvd)}"]
    if claims.bounds is not None:
        lines.append(f"bounded: {bounded_text(claims)}")
    for limiter in claims.limiters:
        lines.append(f"limiter {limiter.name}: {limiter_text(limiter)}")
        lines += [f"  {failure_text(f)}" for f in limiter.failures]
    return tuple(lines)


def bounded_text(claims: Claims) -> str:
    """'yes within [0, 1] (clip)', 'yes for [0, 1] (fct)', or the undecided/no verdict."""
    b = claims.bounds
    if b is None:
        return "no guarantee of its own (no clip or fct; see monotone and TVD)"
    if b.kind == "clip":
        return (f"yes within [{value_text(b.low, b.low_exact)}, {value_text(b.high, b.high_exact)}] "
                "(clip)")
    return f"{verdict_text(claims.bounded)} ({b.kind})"


# ---- split schemes -------------------------------------------------------------------

def direction_set_text(direction: SplitDirection) -> str:
    """'c_x in [0, 2]', 'c_x in [0, 1] or c_x = 2', 'no c_x > 0' (islands named)."""
    name = f"c_{direction.name}"
    parts = [p for p in direction.stable.parts if not (p.is_point and p.lo == 0)]
    if not parts:
        return f"no {name} > 0"
    words = []
    for p in parts:
        if p.is_point:
            words.append(f"{name} = {value_text(p.lo, p.lo_exact)}")
        else:
            words.append(f"{name} in {part_text(p)}")
    return " or ".join(words)


def split_stability_text(split: Split) -> str:
    """'conditional, stable for c_x in [0, 2] and c_y in [0, 1]'; 'undecided'."""
    if split.kind is None:
        return "undecided"
    texts = [direction_set_text(d) for d in split.directions]
    # islands read "c_x in [0, 1] or c_x = 2": directions are then kept apart by ';'
    where = ("; " if any(" or " in t for t in texts) else " and ").join(texts)
    if split.kind == "unstable":
        return f"unstable (each direction's Courant number must lie in its set: {where})"
    return f"{split.kind}, stable for {where}"


def split_order_text(split: Split) -> str:
    """'2 with constant coefficients; 1 with variable coefficients'."""
    return (f"{_maybe(split.order_overall)} with constant coefficients (the sweeps commute); "
            f"{_maybe(split.order_variable)} with variable coefficients")


def split_lines(split: Split) -> tuple[str, ...]:
    """The split scheme in short lines (check's text)."""
    steps = "; ".join(", ".join(f"{_axis(a)}{_share(f)}" for a, f in step) for step in split.sweeps)
    period = " (one step, then the next)" if split.period == 2 else ""
    return (f"split {split.dims}-D, {split.method}: {steps}{period}",
            f"stability: {split_stability_text(split)}",
            f"order: {split_order_text(split)}",
            f"splitting error: {split.error_statement}",
            f"  {split.operators}")


def _axis(axis: int) -> str:
    return "xyz"[axis]


def _share(fraction: float) -> str:
    return "" if fraction == 1 else f" ({fraction:g} dt)"
