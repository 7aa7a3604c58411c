"""Facts about each limiter psi(r) or psi(r, c): value and slopes at r = 1, the TVD
region and its second-order part, symmetry psi(r)/r = psi(1/r), and the Courant
numbers where psi lies in the region of the flux-limited Lax-Wendroff form.

The Courant-free region (Sweby 1984): psi = 0 for r <= 0, 0 <= psi <= min(2r, 2);
its second-order part: r <= psi <= min(2r, 1) on (0, 1], 1 <= psi <= min(r, 2) on
[1, oo), psi(1) = 1. For the face q[0] + (1 - c)/2 psi (q[1] - q[0]) the region
widens as c falls: psi/r <= 2/c and psi <= 2/(1 - c) for 0 < c <= 1, psi >= 0 and
psi = 0 for r <= 0; its second-order part keeps min(r, 1) <= psi <= max(r, 1).
Those Courant sets are decided exactly (compiler/analysis/parametric.py) for
every limiter, of r alone or of (r, c); for a limiter of r, membership of the
Courant-free region is checked piece by piece, and each failure names the
property and the exact range of r (or of c) where it fails. Where a body is not
piecewise rational, everything is sampled on the grid piecewise.SAMPLE_GRID
describes, and the result says so (its values are then not exact).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy
import sympy

from ..symbols import C, R, Ratio
from . import intervals, parametric, piecewise
from .intervals import CourantSet, Span
from .parametric import Condition
from .singular import ieee_values

SAMPLE_SLACK = 1e-12
REGION_TOP = sympy.Integer(1)
"""The Courant-dependent region is that of single-step schemes, 0 < c <= 1."""

COURANT_PROPERTY_WORDS = {
    "tvd_courant": "the Courant-dependent TVD region",
    "second_order_courant": "its second-order part",
    "symmetric_courant": "symmetry psi(r, c)/r = psi(1/r, c)",
}


@dataclass(frozen=True)
class Failure:
    """One property a limiter fails, the set of r where it fails, and how."""

    property: str           # sweby_tvd | second_order_region | symmetric
    where: sympy.Set        # the r where it fails (exact, or the sampled points' hull)
    detail: str


@dataclass(frozen=True)
class CourantFailure:
    """Where a limiter leaves the Courant-dependent region: the Courant numbers (0, 1]."""

    property: str                # tvd_courant | second_order_courant
    where: tuple[Span, ...]
    detail: str

    def text(self) -> str:
        ranges = " and ".join(range_text(s, "c") for s in self.where)
        return f"{COURANT_PROPERTY_WORDS[self.property]} fails for {ranges}: {self.detail}"


def range_text(span: Span, variable: str) -> str:
    if span.is_point:
        return f"{variable} = {intervals.display_text(span.lo)}"
    left = "[" if span.lo_closed and span.lo != -sympy.oo else "("
    right = "]" if span.hi_closed and span.hi != sympy.oo else ")"
    lo = "-oo" if span.lo == -sympy.oo else intervals.display_text(span.lo)
    return f"{variable} in {left}{lo}, {intervals.display_text(span.hi)}{right}"


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
    sup_psi: sympy.Expr | None          # sup over r of psi (None: depends on c)
    sup_psi_over_r: sympy.Expr | None   # sup over r != 0 of psi / r
    method: str
    why: tuple[str, ...] = ()           # every failure, labelled, one line each
    failures: tuple[Failure, ...] = ()  # each failing property with the r where it fails
    courant: bool = False               # a limiter of (r, c)
    tvd_courant: CourantSet | None = None           # c in (0, 1] where psi is in the region
    second_order_courant: CourantSet | None = None  # ... and in its second-order part
    courant_failures: tuple[CourantFailure, ...] = ()

    @property
    def lipschitz_at_1(self) -> bool:
        return self.slope_left is not None and self.slope_right is not None and \
            self.slope_left.is_finite and self.slope_right.is_finite


PROPERTY_LABELS = {"sweby_tvd": "Sweby's TVD region",
                   "second_order_region": "second-order region",
                   "symmetric": "symmetry psi(r)/r = psi(1/r)"}


def why_lines(failures, courant_failures) -> tuple[str, ...]:
    """Every failure as one labelled line: the property, where it fails, what goes wrong."""
    from .wording import r_set_text

    lines = [f"{PROPERTY_LABELS[f.property]} fails for {r_set_text(f.where)}: {f.detail}"
             for f in failures]
    return tuple(lines + [f.text() for f in courant_failures])


# ---- exact sets of r where an inequality fails ----------------------------------------

def _negative_set(expr: sympy.Expr, span: sympy.Interval) -> sympy.Set:
    """The r in span where the rational function expr < 0, exactly."""
    if span.measure == 0:
        return sympy.Union(*[sympy.FiniteSet(p) for p in span.boundary
                             if p.is_finite and _negative_at(expr, p)])
    num, den = sympy.fraction(sympy.cancel(expr))
    lo, hi = span.inf, span.sup
    cuts = sorted(set(piecewise.interior_roots(num, lo, hi) + piecewise.interior_roots(den, lo, hi)),
                  key=float)
    points = [lo] + cuts + [hi]
    found = [sympy.Interval.open(a, b) for a, b in zip(points, points[1:])
             if expr.subs(R, piecewise.rational_between(a, b)) < 0]
    for end in (lo, hi):
        if end.is_finite and span.contains(end) and _negative_at(expr, end):
            found.append(sympy.FiniteSet(end))
    return sympy.Union(*found) if found else sympy.S.EmptySet


def _negative_at(expr: sympy.Expr, point) -> bool:
    """expr < 0 at r = point; a pole of this piece there is no value of it (False)."""
    value = sympy.simplify(expr.subs(R, point))
    return bool(value.is_finite and value.is_extended_real and value < 0)


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


def _sup(parts, over_r: bool) -> sympy.Expr:
    """sup of psi over all r, or of psi/r over r != 0 (both signs of r)."""
    best = None
    for expr, where in parts:
        spans = [where.intersect(sympy.Interval.open(-sympy.oo, 0)),
                 where.intersect(sympy.Interval.open(0, sympy.oo))] if over_r else [where]
        for span in spans:
            if span.is_empty or not isinstance(span, sympy.Interval) or span.measure == 0:
                continue
            _, top = piecewise.extrema_on(sympy.cancel(expr / R) if over_r else expr, span)
            best = top if best is None or piecewise._key(top) > piecewise._key(best) else best
    return best if best is not None else sympy.Integer(0)


# ---- the Courant-dependent region as conditions on extremes ---------------------------

NEG, POS, BELOW_ONE, ABOVE_ONE = ((-sympy.oo, 0), (0, sympy.oo), (0, 1), (1, sympy.oo))


def _psi(expr, sign):
    return expr


def _minus_psi(expr, sign):
    return -expr


def _psi_over_r(expr, sign):
    return expr / R


def _r_minus_psi(expr, sign):
    return R - expr


def _psi_minus_one(expr, sign):
    return expr - 1


def _one_minus_psi(expr, sign):
    return 1 - expr


def _psi_minus_r(expr, sign):
    return expr - R


def _itself(value):
    return value


def _negated(value):
    return -value


def region_conditions() -> list[Condition]:
    """psi = 0 for r <= 0, psi >= 0, psi/r <= 2/c and psi <= 2/(1 - c) (0 < c <= 1)."""
    one, zero = sympy.Integer(1), sympy.Integer(0)
    over = parametric.over
    return [
        Condition(((one, over(True, _psi, NEG, at_zero=_itself)),), zero, "psi <= 0 for r <= 0"),
        Condition(((one, over(True, _minus_psi, NEG, POS, at_zero=_negated)),), zero, "psi >= 0"),
        Condition(((C, over(True, _psi_over_r, POS)),), sympy.Integer(2), "psi/r <= 2/c"),
        Condition(((1 - C, over(True, _psi, POS)),), sympy.Integer(2), "psi <= 2/(1 - c)"),
    ]


def second_order_conditions() -> list[Condition]:
    """The region, and min(r, 1) <= psi <= max(r, 1) for r > 0."""
    one, zero = sympy.Integer(1), sympy.Integer(0)
    over = parametric.over
    return region_conditions() + [
        Condition(((one, over(True, _r_minus_psi, BELOW_ONE)),), zero, "psi >= r on (0, 1]"),
        Condition(((one, over(True, _psi_minus_one, BELOW_ONE)),), zero, "psi <= 1 on (0, 1]"),
        Condition(((one, over(True, _one_minus_psi, ABOVE_ONE)),), zero, "psi >= 1 on [1, oo)"),
        Condition(((one, over(True, _psi_minus_r, ABOVE_ONE)),), zero, "psi <= r on [1, oo)"),
    ]


def courant_sets(body: sympy.Expr) -> tuple[CourantSet, CourantSet]:
    """(TVD region, second-order region) as sets of 0 < c <= 1. Raises NotExact."""
    how = "exact: extremes over r as functions of c, piece by piece"
    if C not in body.free_symbols:
        sets = [parametric.separable_courant_set(sympy.Integer(1), body, [conds], how,
                                                 c_top=REGION_TOP)
                for conds in (region_conditions(), second_order_conditions())]
    else:
        sets = [parametric.courant_set(body, [conds], how, c_top=REGION_TOP)
                for conds in (region_conditions(), second_order_conditions())]
    return tuple(parametric.restrict(s, REGION_TOP) for s in sets)


def covers(cset: CourantSet, top=REGION_TOP) -> bool:
    """Every c in (0, top] belongs to the set."""
    return any(p.lo == 0 and (p.hi == sympy.oo or intervals.number(p.hi) >= intervals.number(top))
               for p in cset.parts if not p.is_point)


def complement(cset: CourantSet, top=REGION_TOP) -> tuple[Span, ...]:
    """The parts of (0, top] outside the set."""
    out = []
    cursor, cursor_closed = sympy.Integer(0), False  # c = 0 itself is not asked about
    for p in cset.parts:
        if p.is_point and p.lo == 0:
            continue
        if intervals.number(p.lo) > intervals.number(cursor):
            out.append(Span(cursor, p.lo, cursor_closed, not p.lo_closed))
        elif p.lo == cursor and not p.lo_closed and cursor_closed:
            out.append(Span(cursor, cursor))
        cursor, cursor_closed = p.hi, not p.hi_closed
    if cursor != sympy.oo and intervals.number(cursor) < intervals.number(top):
        out.append(Span(cursor, top, cursor_closed, True))
    elif cursor == top and cursor_closed:
        out.append(Span(top, top))
    return tuple(out)


def _courant_failures(tvd_set, second_set) -> list[CourantFailure]:
    out = []
    for prop, cset, words in (("tvd_courant", tvd_set, "psi leaves the region"),
                              ("second_order_courant", second_set,
                               "psi leaves the second-order part")):
        gaps = complement(cset)
        if gaps:
            out.append(CourantFailure(prop, gaps, words))
    return out


# ---- the analysis -------------------------------------------------------------------

def analyse_limiter(name: str, body: sympy.Expr, courant: bool = False) -> LimiterFacts:
    if courant or C in body.free_symbols:
        return _analyse_courant_limiter(name, body)
    from .symbol import limiter_slopes

    value, left, right = limiter_slopes(body)
    parts = piecewise.pieces(body)
    if parts is None:
        return _sampled(name, body, value, left, right)
    failures = _failures(parts, _SWEBY, "sweby_tvd")
    second = _failures(parts, _SECOND_ORDER, "second_order_region")
    if value != 1:
        if second:
            second = [Failure("second_order_region", second[0].where | sympy.FiniteSet(1),
                              second[0].detail + f"; psi(1) = {sympy.sstr(value)}, not 1")]
        else:
            second = [Failure("second_order_region", sympy.FiniteSet(1),
                              f"psi(1) = {sympy.sstr(value)}, not 1")]
    symmetric = _symmetric_failures(parts)
    try:
        tvd_set, second_set = courant_sets(body)
        courant_failures = _courant_failures(tvd_set, second_set)
    except parametric.NotExact:
        tvd_set = second_set = None
        courant_failures = []
    found = failures + second + symmetric
    return LimiterFacts(
        name, sympy.sstr(body), value, left, right, not failures, not second, not symmetric,
        _sup(parts, False), _sup(parts, True),
        f"exact: piecewise rational on {len(parts)} pieces, checked piece by piece",
        why_lines(found, courant_failures), tuple(found), False, tvd_set, second_set,
        tuple(courant_failures))


def _analyse_courant_limiter(name: str, body: sympy.Expr) -> LimiterFacts:
    """A limiter of (r, c): the region and its second-order part as sets of c in (0, 1]."""
    from .symbol import limiter_slopes

    value, left, right = limiter_slopes(body)
    try:
        tvd_set, second_set = courant_sets(body)
        symmetric, symmetry_failures = _courant_symmetry(body)
    except parametric.NotExact:
        return _sampled_courant(name, body, value, left, right)
    courant_failures = _courant_failures(tvd_set, second_set) + symmetry_failures
    return LimiterFacts(
        name, sympy.sstr(body), value, left, right, covers(tvd_set), covers(second_set),
        symmetric, None, None,
        "exact: pieces in r whose ends are rational functions of c, checked as sets of "
        "0 < c <= 1", why_lines((), courant_failures), (), True, tvd_set, second_set,
        tuple(courant_failures))


def _courant_symmetry(body) -> tuple[bool, list[CourantFailure]]:
    """psi(r, c)/r == psi(1/r, c) for r > 0 and every 0 < c < 1, band by band."""
    pic = parametric.picture(body, top=REGION_TOP)
    failing = []
    for band in pic.bands:
        ends = set()
        for piece in band.pieces:
            for end in (piece.lo, piece.hi):
                if end.is_finite and parametric._at(end, band.sample) > 0:
                    ends |= {end, 1 / end}
        ends = sorted(ends, key=lambda e: sympy.N(parametric._at(e, band.sample), 30))
        values = [sympy.Integer(0)] + [parametric._at(e, band.sample) for e in ends] + [sympy.oo]
        for a, b in zip(values, values[1:]):
            mid = piecewise.rational_between(a, b)
            here = _piece_at(band, mid)
            there = _piece_at(band, 1 / mid)
            if sympy.cancel(here / R - there.xreplace({R: 1 / R})) != 0:
                if failing and failing[-1].hi == band.lo:  # neighbouring bands: one range
                    failing[-1] = Span(failing[-1].lo, band.hi, False, False)
                else:
                    failing.append(Span(band.lo, band.hi, False, False))
                break
    if not failing:
        return True, []
    return False, [CourantFailure("symmetric_courant", tuple(failing),
                                  "psi(r, c)/r != psi(1/r, c) for some r")]


def _piece_at(band, r_value):
    for piece in band.pieces:
        lo, hi = parametric._at(piece.lo, band.sample), parametric._at(piece.hi, band.sample)
        if (lo == -sympy.oo or lo <= r_value) and (hi == sympy.oo or r_value < hi):
            return piece.expr
    raise parametric.NotExact


def courant_value_at_one(body):
    """(psi(1, c), left slope, right slope) when the same expressions hold for every
    0 < c < 1, else (None, None, None)."""
    try:
        pic = parametric.picture(body, top=REGION_TOP)
    except parametric.NotExact:
        return None, None, None
    found = set()
    for band in pic.bands:
        left = next((p.expr for p in band.pieces if p.hi == 1), None)
        right = next((p.expr for p in band.pieces if p.lo == 1), None)
        outcomes = ieee_values(body, {R: sympy.Integer(1)})
        if left is None or right is None or outcomes is None or len(outcomes) != 1:
            return None, None, None
        value = sympy.cancel(piecewise._resolve(next(iter(outcomes)), {C: band.sample}, set()))
        found.add((value, sympy.cancel(sympy.diff(left, R).subs(R, 1)),
                   sympy.cancel(sympy.diff(right, R).subs(R, 1))))
    if len(found) != 1:
        return None, None, None
    return next(iter(found))


def courant_curvature_at_one(body):
    """One-sided second derivatives at r = 1 of a limiter of (r, c), when the same for
    every 0 < c < 1, else (None, None)."""
    try:
        pic = parametric.picture(body, top=REGION_TOP)
    except parametric.NotExact:
        return None, None
    found = set()
    for band in pic.bands:
        left = next((p.expr for p in band.pieces if p.hi == 1), None)
        right = next((p.expr for p in band.pieces if p.lo == 1), None)
        if left is None or right is None:
            return None, None
        found.add(tuple(sympy.cancel(sympy.diff(piece, R, 2).subs(R, 1)) for piece in (left, right)))
    return next(iter(found)) if len(found) == 1 else (None, None)


# ---- sampling, where the body is not piecewise rational ---------------------------------

def _sampled(name, body, value, left, right) -> LimiterFacts:
    # constants as floats: an exact integer past 64 bits would reach numpy as an object
    psi = sympy.lambdify(R, _numeric_ratio(body).evalf(), modules="numpy")
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
        nonzero = r != 0
        sup_ratio = float(numpy.max(v[nonzero] / r[nonzero]))
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
                        f"tolerance {SAMPLE_SLACK:g}; values are not exact",
                        why_lines(failures, ()), tuple(failures))


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


COURANT_SAMPLES = 200


def _numeric_ratio(body: sympy.Expr) -> sympy.Expr:
    """ratio(a, b) written as a Piecewise numpy can evaluate (a / b where b != 0, else 0)."""
    return body.replace(Ratio, lambda a, b: sympy.Piecewise((a / b, sympy.Ne(b, 0)), (0, True)))


def _sampled_courant(name, body, value, left, right) -> LimiterFacts:
    """A limiter of (r, c) outside the exact class: the region tested on a grid of
    (r, c), c in steps of 1/COURANT_SAMPLES; the sets are numeric, with that tolerance."""
    psi = sympy.lambdify((R, C), _numeric_ratio(body).evalf(), modules="numpy")
    r = piecewise.sample_points()
    pos = r > 0
    cs = numpy.arange(1, COURANT_SAMPLES + 1) / COURANT_SAMPLES
    tvd_ok, second_ok = [], []
    with numpy.errstate(all="ignore"):
        for c_value in cs:
            v = numpy.broadcast_to(psi(r, c_value), r.shape).astype(float)
            ok = (numpy.all(numpy.abs(v[~pos]) <= SAMPLE_SLACK) and numpy.all(v[pos] >= -SAMPLE_SLACK)
                  and numpy.all(c_value * v[pos] / r[pos] <= 2 + SAMPLE_SLACK)
                  and numpy.all((1 - c_value) * v[pos] <= 2 + SAMPLE_SLACK))
            low, high = numpy.minimum(r[pos], 1), numpy.maximum(r[pos], 1)
            tvd_ok.append(bool(ok))
            second_ok.append(bool(ok and numpy.all(v[pos] >= low - SAMPLE_SLACK)
                                  and numpy.all(v[pos] <= high + SAMPLE_SLACK)))
    step = 1.0 / COURANT_SAMPLES
    sets = [_numeric_set(cs, oks, step) for oks in (tvd_ok, second_ok)]
    courant_failures = _courant_failures(*sets)
    return LimiterFacts(name, sympy.sstr(body), value, left, right, covers(sets[0]),
                        covers(sets[1]), None, None, None,
                        f"sampled: {piecewise.SAMPLE_GRID}, c in steps of {step:g} on (0, 1] "
                        "(the body is not piecewise rational); values are not exact",
                        why_lines((), courant_failures), (), True, *sets,
                        tuple(courant_failures))


def _numeric_set(cs, oks, step) -> CourantSet:
    parts, start = [], None
    for c_value, ok in zip(cs, oks):
        if ok and start is None:
            start = 0 if c_value == cs[0] else c_value
        if not ok and start is not None:
            parts.append(Span(_numeric(start), sympy.Float(c_value - step, 6)))
            start = None
    if start is not None:
        parts.append(Span(_numeric(start), sympy.Integer(1)))
    return CourantSet(tuple(parts), f"sampled: c in steps of {step:g}", step)


def _numeric(value):
    return sympy.Integer(0) if value == 0 else sympy.Float(value, 6)
