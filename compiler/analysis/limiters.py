"""Facts about each limiter psi(r): value and slopes at r = 1, Sweby's region,
its second-order part, and symmetry psi(r)/r = psi(1/r).

Exact piece by piece where the body is piecewise rational (compiler/analysis/
piecewise.py); otherwise sampled on the grid piecewise.SAMPLE_GRID describes,
and the result says which method decided it.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy
import sympy

from ..symbols import R
from . import piecewise
from .symbol import limiter_slopes

SAMPLE_SLACK = 1e-12


@dataclass(frozen=True)
class LimiterFacts:
    name: str
    body: str
    psi_at_1: sympy.Expr | None
    slope_left: sympy.Expr | None
    slope_right: sympy.Expr | None
    sweby_tvd: bool | None
    second_order_region: bool | None
    symmetric: bool | None
    sup_psi: sympy.Expr | None          # sup over r of psi
    sup_psi_over_r: sympy.Expr | None   # sup over r > 0 of psi / r
    method: str
    why: tuple[str, ...]                # the first reason each negative verdict failed
    failures: tuple["Failure", ...] = ()  # each failing property with the r where it fails

    @property
    def lipschitz_at_1(self) -> bool:
        return self.slope_left is not None and self.slope_right is not None and \
            self.slope_left.is_finite and self.slope_right.is_finite


@dataclass(frozen=True)
class Failure:
    """One property a limiter fails, the set of r where it fails, and how."""

    property: str           # sweby_tvd | second_order_region | symmetric
    where: sympy.Set        # the r where it fails (exact, or the sampled points' hull)
    detail: str


def _negative_set(expr: sympy.Expr, span: sympy.Interval) -> sympy.Set:
    """The r in span where the rational function expr < 0, exactly."""
    if span.measure == 0:
        return sympy.Union(*[sympy.FiniteSet(p) for p in span.boundary
                             if p.is_finite and sympy.simplify(expr.subs(R, p)) < 0])
    num, den = sympy.fraction(sympy.cancel(expr))
    lo, hi = span.inf, span.sup
    cuts = sorted(set(piecewise.interior_roots(num, lo, hi) + piecewise.interior_roots(den, lo, hi)),
                  key=float)
    points = [lo] + cuts + [hi]
    found = [sympy.Interval.open(a, b) for a, b in zip(points, points[1:])
             if expr.subs(R, piecewise.rational_between(a, b)) < 0]
    for end in (lo, hi):
        if end.is_finite and span.contains(end) and sympy.simplify(expr.subs(R, end)) < 0:
            found.append(sympy.FiniteSet(end))
    return sympy.Union(*found) if found else sympy.S.EmptySet


def _failures(parts, region_pieces, prop: str) -> list[Failure]:
    """Where psi leaves the region, exactly: one failure with the union of the bad r,
    and per bound it crosses, the r where it does."""
    by_bound: dict[str, list[sympy.Set]] = {}
    for expr, where in parts:
        for lo_expr, hi_expr, window, _ in region_pieces:
            span = where.intersect(window)
            if span.is_empty or not isinstance(span, sympy.Interval):
                continue
            for bound, below in ((lo_expr, True), (hi_expr, False)):
                if bound is None:
                    continue
                bad = _negative_set(expr - bound if below else bound - expr, span)
                if not bad.is_empty:
                    key = f"psi {'below' if below else 'above'} {sympy.sstr(bound)}"
                    by_bound.setdefault(key, []).append(bad)
    if not by_bound:
        return []
    from .wording import r_set_text
    sets = {key: sympy.Union(*found) for key, found in by_bound.items()}
    detail = "; ".join(f"{key} for {r_set_text(where)}" for key, where in sets.items())
    return [Failure(prop, sympy.Union(*sets.values()), detail)]


def _positive_part(interval: sympy.Interval) -> sympy.Interval:
    return interval.intersect(sympy.Interval.open(0, sympy.oo))


def _check(parts, region_pieces) -> str | None:
    """None when every piece satisfies lower <= psi <= upper on the region parts, else a reason."""
    for expr, where in parts:
        for lo_expr, hi_expr, window, text in region_pieces:
            span = where.intersect(window)
            if span.is_empty or not isinstance(span, sympy.Interval):
                continue
            if lo_expr is not None and not piecewise.nonnegative_on(expr - lo_expr, span):
                return f"psi = {sympy.sstr(expr)} drops below {text} on {sympy.sstr(span)}"
            if hi_expr is not None and not piecewise.nonnegative_on(hi_expr - expr, span):
                return f"psi = {sympy.sstr(expr)} exceeds {text} on {sympy.sstr(span)}"
    return None


_NONPOS = sympy.Interval(-sympy.oo, 0)
_SWEBY = [
    (sympy.Integer(0), sympy.Integer(0), _NONPOS, "0 (r <= 0)"),
    (sympy.Integer(0), 2 * R, sympy.Interval.Lopen(0, 1), "[0, 2r]"),
    (sympy.Integer(0), sympy.Integer(2), sympy.Interval(1, sympy.oo), "[0, 2]"),
]
_SECOND_ORDER = [
    (sympy.Integer(0), sympy.Integer(0), _NONPOS, "0 (r <= 0)"),
    (R, 2 * R, sympy.Interval.Lopen(0, sympy.Rational(1, 2)), "[r, 2r]"),
    (R, sympy.Integer(1), sympy.Interval(sympy.Rational(1, 2), 1), "[r, 1]"),
    (sympy.Integer(1), R, sympy.Interval(1, 2), "[1, r]"),
    (sympy.Integer(1), sympy.Integer(2), sympy.Interval(2, sympy.oo), "[1, 2]"),
]


def _symmetric_failures(parts) -> list[Failure]:
    """The r > 0 where psi(r)/r != psi(1/r), as open intervals between the pieces' ends."""
    cuts = set()
    for _, where in parts:
        for end in (where.inf, where.sup):
            if end.is_finite and end > 0:
                cuts |= {end, 1 / end}
    points = [sympy.Integer(0)] + sorted(cuts, key=float) + [sympy.oo]
    bad = []
    for a, b in zip(points, points[1:]):
        mid = piecewise.rational_between(a, b)
        here = piecewise.piece_at(parts, mid)
        there = piecewise.piece_at(parts, 1 / mid)
        if here is not None and there is not None and \
                sympy.cancel(here / R - there.subs(R, 1 / R)) != 0:
            bad.append(sympy.Interval.open(a, b))
    if not bad:
        return []
    return [Failure("symmetric", sympy.Union(*bad), "psi(r)/r != psi(1/r)")]


def _symmetric_exact(parts) -> str | None:
    """None when psi(r)/r == psi(1/r) on r > 0, else where it fails."""
    cuts = set()
    for _, where in parts:
        for end in (where.inf, where.sup):
            if end.is_finite and end > 0:
                cuts |= {end, 1 / end}
    points = [sympy.Integer(0)] + sorted(cuts, key=float) + [sympy.oo]
    for a, b in zip(points, points[1:]):
        mid = piecewise.rational_between(a, b)
        here = piecewise.piece_at(parts, mid)
        there = piecewise.piece_at(parts, 1 / mid)
        if here is None or there is None:
            return "a piece is missing"
        if sympy.cancel(here / R - there.subs(R, 1 / R)) != 0:
            return f"psi(r)/r != psi(1/r) for r in ({sympy.sstr(a)}, {sympy.sstr(b)})"
    return None


def _sup(parts, over_r: bool) -> sympy.Expr:
    best = None
    for expr, where in parts:
        span = _positive_part(where) if over_r else where
        if span.is_empty or not isinstance(span, sympy.Interval):
            continue
        _, top = piecewise.extrema_on(expr / R if over_r else expr, span)
        best = top if best is None or piecewise._key(top) > piecewise._key(best) else best
    return best if best is not None else sympy.Integer(0)


def analyse_limiter(name: str, body: sympy.Expr) -> LimiterFacts:
    value, left, right = limiter_slopes(body)
    parts = piecewise.pieces(body)
    if parts is not None:
        why = []
        sweby_fail = _check(parts, _SWEBY)
        second_fail = _check(parts, _SECOND_ORDER)
        if second_fail is None and value != 1:
            second_fail = f"psi(1) = {value}, not 1"
        symmetric_fail = _symmetric_exact(parts)
        for fail in (sweby_fail, second_fail, symmetric_fail):
            if fail:
                why.append(fail)
        failures = []
        if sweby_fail:
            failures += _failures(parts, _SWEBY, "sweby_tvd")
        if second_fail:
            failures += _failures(parts, _SECOND_ORDER, "second_order_region") or [
                Failure("second_order_region", sympy.FiniteSet(1), second_fail)]
        if symmetric_fail:
            failures += _symmetric_failures(parts)
        return LimiterFacts(
            name, sympy.sstr(body), value, left, right, sweby_fail is None,
            second_fail is None, symmetric_fail is None, _sup(parts, False), _sup(parts, True),
            f"exact: piecewise rational on {len(parts)} pieces, checked piece by piece", tuple(why),
            tuple(failures))
    return _sampled(name, body, value, left, right)


def _sampled(name, body, value, left, right) -> LimiterFacts:
    psi = sympy.lambdify(R, body, modules="numpy")
    r = piecewise.sample_points()
    with numpy.errstate(all="ignore"):
        v = numpy.broadcast_to(psi(r), r.shape).astype(float)
        pos, neg = r > 0, r <= 0
        sweby = bool(numpy.all(numpy.abs(v[neg]) <= SAMPLE_SLACK) and numpy.all(v[pos] >= -SAMPLE_SLACK)
                     and numpy.all(v[pos] <= numpy.minimum(2 * r[pos], 2) + SAMPLE_SLACK))
        low = numpy.where(r[pos] <= 1, r[pos], 1.0)
        high = numpy.where(r[pos] <= 1, numpy.minimum(2 * r[pos], 1), numpy.minimum(r[pos], 2))
        second = sweby and bool(numpy.all(v[pos] >= low - SAMPLE_SLACK)
                                and numpy.all(v[pos] <= high + SAMPLE_SLACK)) and value == 1
        rp = r[pos]
        mirrored = numpy.broadcast_to(psi(1 / rp), rp.shape)
        symmetric = bool(numpy.allclose(v[pos] / rp, mirrored, rtol=1e-10, atol=1e-12))
        sup_psi = float(numpy.max(v))
        sup_ratio = float(numpy.max(v[pos] / rp))
        outside_sweby = numpy.where(neg, numpy.abs(v) > SAMPLE_SLACK,
                                    (v < -SAMPLE_SLACK) | (v > numpy.minimum(2 * r, 2) + SAMPLE_SLACK))
        low_all = numpy.where(r <= 1, r, 1.0)
        high_all = numpy.where(r <= 1, numpy.minimum(2 * r, 1), numpy.minimum(r, 2))
        outside_second = outside_sweby | (~neg & ((v < low_all - SAMPLE_SLACK)
                                                  | (v > high_all + SAMPLE_SLACK)))
        asymmetric = numpy.zeros_like(r, dtype=bool)
        asymmetric[pos] = ~numpy.isclose(v[pos] / rp, mirrored, rtol=1e-10, atol=1e-12)
    failures = []
    for prop, bad, ok in (("sweby_tvd", outside_sweby, sweby),
                          ("second_order_region", outside_second, second),
                          ("symmetric", asymmetric, symmetric)):
        if not ok and bad.any():
            failures.append(Failure(prop, _sampled_runs(r, bad),
                                    "psi(r)/r != psi(1/r) at the sample points there"
                                    if prop == "symmetric" else
                                    "psi leaves the region at the sample points there"))
    return LimiterFacts(name, sympy.sstr(body), value, left, right, sweby, second, symmetric,
                        sympy.Float(sup_psi, 8), sympy.Float(sup_ratio, 8),
                        f"sampled: {piecewise.SAMPLE_GRID} (the body is not piecewise rational); "
                        f"tolerance {SAMPLE_SLACK:g}", (), tuple(failures))


def _sampled_runs(r: numpy.ndarray, bad: numpy.ndarray) -> sympy.Set:
    """Closed hulls of the runs of consecutive failing sample points."""
    runs, start = [], None
    for i, flag in enumerate(bad):
        if flag and start is None:
            start = i
        if start is not None and (not flag or i == len(bad) - 1):
            end = i if flag else i - 1
            runs.append(sympy.Interval(sympy.Float(r[start], 6), sympy.Float(r[end], 6)))
            start = None
    return sympy.Union(*runs)
