"""Sets of Courant numbers c >= 0, as unions of intervals and isolated points.

Every analysis that asks "for which c does this hold" reduces to finitely many
critical values (roots of polynomials in c) between which the answer cannot
change; one exact test per gap and per critical value then decides the set.
"""
from __future__ import annotations

from dataclasses import dataclass

import sympy


@dataclass(frozen=True)
class Span:
    """[lo, hi] with each end open or closed; hi may be sympy.oo; lo == hi is a point."""

    lo: sympy.Expr
    hi: sympy.Expr
    lo_closed: bool = True
    hi_closed: bool = True

    @property
    def is_point(self) -> bool:
        return self.lo == self.hi

    def text(self) -> str:
        if self.is_point:
            return f"c = {display_text(self.lo)}"
        left = "[" if self.lo_closed else "("
        right = "]" if self.hi_closed and self.hi != sympy.oo else ")"
        return f"{left}{display_text(self.lo)}, {display_text(self.hi)}{right}"

    def contains(self, value: float) -> bool:
        lo, hi = number(self.lo), number(self.hi)
        lo_ok = value >= lo if self.lo_closed else value > lo
        hi_ok = value <= hi if self.hi_closed else value < hi
        return lo_ok and hi_ok


@dataclass(frozen=True)
class CourantSet:
    parts: tuple[Span, ...]
    method: str                 # how the set was decided, said in reports
    tolerance: float | None = None  # None when exact

    @property
    def main(self) -> Span | None:
        """The interval nearest c = 0 (a part of positive length)."""
        return next((p for p in self.parts if not p.is_point), None)

    @property
    def islands(self) -> tuple[Span, ...]:
        main = self.main
        return tuple(p for p in self.parts if p is not main and not (p.is_point and p.lo == 0))

    @property
    def empty(self) -> bool:
        """No interval of positive length (isolated points may remain: see any_positive)."""
        return self.main is None

    @property
    def any_positive(self) -> bool:
        """Some c > 0 belongs to the set: an interval or an isolated point."""
        return any(not (p.is_point and p.lo == 0) for p in self.parts)

    @property
    def leading(self) -> Span | None:
        """The main interval; where there is none, the first isolated point c > 0."""
        return self.main or next((p for p in self.parts if not (p.is_point and p.lo == 0)), None)

    @property
    def others(self) -> tuple[Span, ...]:
        """Every part c > 0 but the leading one: the islands as reports list them."""
        lead = self.leading
        return tuple(p for p in self.parts if p is not lead and not (p.is_point and p.lo == 0))

    def contains(self, value: float) -> bool:
        return any(p.contains(value) for p in self.parts)

    def text(self) -> str:
        """The set in words; the trivial point c = 0 is left out."""
        parts = [p for p in self.parts if not (p.is_point and p.lo == 0)]
        if not parts:
            return "no Courant number c > 0"
        return " and ".join(p.text() for p in parts)


def number(value) -> float | None:
    if value is None:
        return None
    if value == sympy.oo:
        return float("inf")
    return float(sympy.N(value, 20))


def exact_text(value) -> str:
    """An exact value as text: 'oo', '2/3', 'sqrt(3)', or a CRootOf(...) for higher roots."""
    if value == sympy.oo:
        return "oo"
    return sympy.sstr(value)


def display_text(value) -> str:
    """Exact text when short, else the value to 6 significant digits (exact form in JSON)."""
    if isinstance(value, sympy.Float):
        return f"{number(value):.6g}"  # a numeric value: its digits, not a float's repr
    text = exact_text(value)
    if len(text) <= 24:
        return text
    return f"{number(value):.6g}"


def positive_roots(poly_expr: sympy.Expr, var: sympy.Symbol) -> list[sympy.Expr]:
    """Exact positive real roots of a polynomial with rational coefficients."""
    poly_expr = sympy.expand(poly_expr)
    if poly_expr == 0 or var not in poly_expr.free_symbols:
        return []
    out = []
    for factor, _ in sympy.factor_list(poly_expr, var)[1]:
        poly = sympy.Poly(factor, var)
        if poly.degree() < 1:
            continue
        for root in sympy.real_roots(poly):
            if root > 0:
                out.append(root)
    return out


def rational_between(a, b) -> sympy.Rational:
    if b == sympy.oo:
        return sympy.floor(sympy.N(a, 30)) + 1 if a != 0 else sympy.Integer(1)
    mid = (sympy.N(a, 40) + sympy.N(b, 40)) / 2
    return sympy.nsimplify(mid, rational=True, tolerance=sympy.N(b - a, 40) / 8 if b != a else None)


def decide(candidates, holds, holds_at_point=None, method="exact", tolerance=None) -> CourantSet:
    """The set of c >= 0 where holds(c) is True, given every value where it may change.

    holds is called with rational c inside each gap; holds_at_point (default
    holds) with each candidate itself, which may be irrational. A candidate next
    to a gap that holds belongs to the set when the property is closed in c
    (every property here is a set of non-strict inequalities), so it is only
    tested directly when both neighbours fail.
    """
    holds_at_point = holds_at_point or holds
    points = sorted({sympy.Integer(0), *candidates}, key=lambda v: number(v))
    deduped = []
    for p in points:
        if not deduped or abs(number(p) - number(deduped[-1])) > 1e-14:
            deduped.append(p)
    points = deduped
    gaps = []
    for lo, hi in zip(points, points[1:] + [sympy.oo]):
        gaps.append((lo, hi, holds(rational_between(lo, hi))))
    pieces: list[Span] = []
    for i, point in enumerate(points):
        left_ok = gaps[i - 1][2] if i > 0 else False
        right_ok = gaps[i][2]
        if left_ok or right_ok or holds_at_point(point):
            _extend(pieces, Span(point, point))
        if right_ok:
            _extend(pieces, Span(point, gaps[i][1], False, False))
    return CourantSet(tuple(pieces), method, tolerance)


def _extend(pieces: list, span: Span) -> None:
    """Append, merging with the previous part when the two touch."""
    if pieces:
        last = pieces[-1]
        if last.hi == span.lo and (last.hi_closed or span.lo_closed):
            pieces[-1] = Span(last.lo, span.hi, last.lo_closed, span.hi_closed)
            return
    pieces.append(span)


def _meet(a: Span, b: Span) -> Span | None:
    """The intersection of two spans, or None when empty."""
    lo_a, lo_b = number(a.lo), number(b.lo)
    if lo_a > lo_b or (lo_a == lo_b and not a.lo_closed):
        lo, lo_closed = a.lo, a.lo_closed
    else:
        lo, lo_closed = b.lo, b.lo_closed
    hi_a, hi_b = number(a.hi), number(b.hi)
    if hi_a < hi_b or (hi_a == hi_b and not a.hi_closed):
        hi, hi_closed = a.hi, a.hi_closed
    else:
        hi, hi_closed = b.hi, b.hi_closed
    if number(lo) > number(hi) or (number(lo) == number(hi) and not (lo_closed and hi_closed)):
        return None
    return Span(lo, hi, lo_closed, hi_closed) if number(lo) < number(hi) else Span(lo, lo)


def intersection(sets) -> CourantSet | None:
    """The Courant numbers in every one of the sets (None for no sets)."""
    sets = list(sets)
    if not sets:
        return None
    parts = list(sets[0].parts)
    for other in sets[1:]:
        parts = [m for a in parts for b in other.parts if (m := _meet(a, b)) is not None]
    parts.sort(key=lambda p: (number(p.lo), number(p.hi)))
    merged: list[Span] = []
    for span in parts:
        _extend(merged, span)
    tolerances = [s.tolerance for s in sets if s.tolerance is not None]
    return CourantSet(tuple(merged), "; ".join(dict.fromkeys(s.method for s in sets)),
                      max(tolerances) if tolerances else None)


def restrict_to(cset: CourantSet, top) -> CourantSet:
    """The part of a set with c <= top."""
    return CourantSet(tuple(m for p in cset.parts
                            if (m := _meet(p, Span(sympy.Integer(0), top))) is not None),
                      cset.method, cset.tolerance)
