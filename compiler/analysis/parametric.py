"""Bodies of r whose pieces move with the Courant number c, and conditions on
their extremes decided exactly as sets of c.

A limiter psi(r, c) or a face coefficient B(r, c) built from max, min, abs, sign
and ratio of rational functions is, for c inside an open band between critical
values, one rational function of (r, c) on each piece of the r axis, and each
piece ends at a rational function of c (or a constant). The critical values
are where that picture may change: where a factor in c alone vanishes, where
two ends meet or one escapes to infinity (resultants and leading coefficients
in r), where a piece changes sign. Marks (r = 0, r = 1) are always ends.

Between critical values, the sup (or inf) over r of a rational transform of the
pieces is the largest (smallest) of finitely many candidates: limits at the
ends of each piece and values at its stationary points, each a function of c.
A condition `sum of a_k(c) * extreme_k <= bound(c)` is then a conjunction of
inequalities between candidates, so its truth changes only at roots in c of
their combinations. `courant_set` collects every such root and decides the set
with one exact test per gap (intervals.decide). A body outside this class (an
end or a stationary point that is an irrational function of c) gives None, and
the caller says it used another method.
"""
from __future__ import annotations

import itertools
from dataclasses import dataclass
from functools import lru_cache
from typing import Callable

import sympy

from ..symbols import C, R
from . import intervals, piecewise
from .intervals import CourantSet, Span
from .singular import ieee_values

MAX_ROUNDS = 8
MAX_TUPLES = 4096


class NotExact(Exception):
    """The body leaves the class treated here (the caller falls back)."""


def _exact_only(function):
    """Constants outside the rational field (2**(27/145)) make sympy's field arithmetic
    refuse them deep inside; for the callers that is the class left: NotExact."""
    import functools

    @functools.wraps(function)
    def wrapper(*args, **kwargs):
        try:
            return function(*args, **kwargs)
        except (ValueError, TypeError, sympy.PolynomialError, sympy.CoercionFailed) as err:
            raise NotExact(str(err)) from None
    return wrapper


@dataclass(frozen=True)
class Piece:
    expr: sympy.Expr      # rational in r (and c)
    lo: sympy.Expr        # the piece is lo <= r < hi; ends are functions of c, or -oo/oo
    hi: sympy.Expr


@dataclass(frozen=True)
class Band:
    lo: sympy.Expr        # c in (lo, hi)
    hi: sympy.Expr
    sample: sympy.Rational
    pieces: tuple[Piece, ...]
    zero_values: tuple[sympy.Expr, ...]   # every value at r = 0 exactly (IEEE), functions of c

    def sign_at_sample(self, piece: Piece) -> int:
        key = (piece, self.sample)
        if key not in _SIGNS:
            r_mid = piecewise.rational_between(_at(piece.lo, self.sample),
                                               _at(piece.hi, self.sample))
            _SIGNS[key] = int(sympy.sign(piece.expr.xreplace({R: r_mid, C: self.sample})))
        return _SIGNS[key]

    def contains_r(self, piece: Piece, lo, hi) -> bool:
        """Whether the piece lies inside lo < r < hi (marks: constants or -oo/oo)."""
        mid = piecewise.rational_between(_at(piece.lo, self.sample), _at(piece.hi, self.sample))
        return (lo == -sympy.oo or mid > lo) and (hi == sympy.oo or mid < hi)


_SIGNS: dict = {}


@dataclass(frozen=True)
class Picture:
    critical: tuple[sympy.Expr, ...]
    bands: tuple[Band, ...]


def _at(value, c_value):
    return value.xreplace({C: c_value}) if value.free_symbols else value


def _leq(a, b) -> bool:
    """a <= b for exact real numbers (algebraic ones included): the sign of a - b from
    60 digits where that is far from zero, else exactly."""
    if a.is_Rational and b.is_Rational:
        return bool(a <= b)
    difference = a - b
    approx = sympy.N(difference, 60)
    if approx.is_comparable and abs(approx) > sympy.Float(10) ** -40:
        return bool(approx < 0)
    return bool(sympy.nsimplify(sympy.simplify(difference)) <= 0)


# ---- the picture: bands of c and pieces of r ----------------------------------

def _polynomial_factors(polys) -> set:
    """Irreducible factors over QQ of polynomials in (r, c), normalised; constants dropped."""
    out = set()
    for poly in polys:
        poly = sympy.expand(poly)
        if not poly.free_symbols:
            continue
        if not poly.free_symbols <= {R, C}:
            raise NotExact
        try:
            _, factors = sympy.factor_list(poly, R, C)
        except (sympy.PolynomialError, sympy.CoercionFailed):
            raise NotExact from None
        for factor, _ in factors:
            p = sympy.Poly(factor, R, C)
            if not (p.domain.is_QQ or p.domain.is_ZZ):
                raise NotExact
            _, primitive = p.primitive()
            if primitive.LC() < 0:
                primitive = -primitive
            out.add(primitive.as_expr())
    return out


def _positive_roots_in_c(expr) -> list:
    expr = sympy.expand(expr)
    if C not in expr.free_symbols:
        return []
    if expr.free_symbols != {C}:
        raise NotExact
    return list(_cached_positive_roots(expr))


@lru_cache(maxsize=4096)
def _cached_positive_roots(expr) -> tuple:
    return tuple(intervals.positive_roots(expr, C))


@lru_cache(maxsize=4096)
def _crossings(f, g) -> tuple:
    """Positive c where a zero in r of f meets one of g (their resultant in r)."""
    return tuple(_positive_roots_in_c(sympy.resultant(f, g, R)))


def _critical_values(factors) -> set:
    critical = set()
    r_factors = []
    for f in factors:
        if R not in f.free_symbols:
            critical.update(_positive_roots_in_c(f))
            continue
        r_factors.append(f)
        if C in f.free_symbols:
            p = sympy.Poly(f, R)
            critical.update(_positive_roots_in_c(p.LC()))
            if p.degree() >= 2:
                critical.update(_positive_roots_in_c(sympy.discriminant(p.as_expr(), R)))
    for f, g in itertools.combinations(r_factors, 2):
        if C not in f.free_symbols and C not in g.free_symbols:
            continue
        critical.update(_crossings(*sorted((f, g), key=sympy.default_sort_key)))
    return critical


def _cuts_at(factors, c_value) -> list:
    """(value at c_value, end as a function of c) for every zero in r of the factors."""
    cuts = []
    for f in factors:
        if R not in f.free_symbols:
            continue
        p = sympy.Poly(f, R)
        if C not in f.free_symbols:
            cuts += [(root, root) for root in sympy.real_roots(p)]
        elif p.degree() == 1:
            end = sympy.cancel(-p.coeff_monomial(1) / p.coeff_monomial(R))
            cuts.append((_at(end, c_value), end))
        elif sympy.real_roots(sympy.Poly(f.xreplace({C: c_value}), R)):
            raise NotExact  # an end that is an irrational function of c
    cuts.sort(key=lambda pair: sympy.N(pair[0], 40))
    unique = []
    for value, end in cuts:
        if unique and sympy.N(value - unique[-1][0], 40) == 0:
            continue
        unique.append((value, end))
    return unique


def _band_at(body, lo, hi, factors, found: set, at_zero=None) -> Band:
    sample = intervals.rational_between(lo, hi) if hi != sympy.oo else (
        sympy.floor(intervals.number(lo)) + 1 if lo != 0 else sympy.Integer(1))
    cuts = _cuts_at(factors, sample)
    ends = [(-sympy.oo, -sympy.oo)] + cuts + [(sympy.oo, sympy.oo)]
    pieces = []
    for (a_value, a_end), (b_value, b_end) in zip(ends, ends[1:]):
        r_mid = piecewise.rational_between(a_value, b_value)
        try:
            expr = sympy.cancel(piecewise._resolve(body, {R: r_mid, C: sample}, found))
        except piecewise._Pole:
            raise _Again from None
        numerator, denominator = sympy.fraction(expr)
        found.update((numerator, denominator))  # sign changes and c-only poles
        pieces.append(Piece(expr, a_end, b_end))
    zero_values = []
    outcomes = at_zero if at_zero is not None else ieee_values(body, {R: sympy.Integer(0)})
    if outcomes is None or any(v in (sympy.nan, sympy.oo, -sympy.oo) for v in outcomes):
        raise NotExact
    for value in outcomes:
        try:
            zero_values.append(sympy.cancel(piecewise._resolve(value, {C: sample}, found)))
        except piecewise._Pole:
            raise NotExact from None
    return Band(lo, hi, sample, tuple(pieces), tuple(dict.fromkeys(zero_values)))


class _Again(Exception):
    pass


def _structural_switches(body) -> set:
    """Denominators that are polynomials: poles are ends from the start."""
    out = set()
    for node in sympy.preorder_traversal(body):
        if isinstance(node, sympy.Pow) and node.exp.is_negative:
            base = sympy.together(node.base)
            if not base.has(sympy.Abs, sympy.Min, sympy.Max, sympy.sign):
                out.update(sympy.fraction(base))
    return out


def picture(body: sympy.Expr, marks=(0, 1), extra_critical=(), top=None) -> Picture:
    """Bands of 0 < c (< top, when given) and, in each, the pieces of body in r.
    Raises NotExact. Cached: several analyses ask for the same body's picture."""
    key = (sympy.sympify(body), tuple(marks), tuple(extra_critical), top)
    if key not in _PICTURES:
        try:
            _PICTURES[key] = _picture(*key)
        except NotExact:
            _PICTURES[key] = None
        if len(_PICTURES) > 256:
            _PICTURES.pop(next(iter(_PICTURES)))
    if _PICTURES[key] is None:
        raise NotExact
    return _PICTURES[key]


_PICTURES: dict = {}


def _picture(body: sympy.Expr, marks, extra_critical, top) -> Picture:
    if not body.free_symbols <= {R, C}:
        raise NotExact
    switches = {R - m for m in marks} | _structural_switches(body)
    at_zero = ieee_values(body, {R: sympy.Integer(0)})  # the same for every band
    try:
        for _ in range(MAX_ROUNDS):
            factors = _polynomial_factors(switches)
            critical = sorted(_critical_values(factors) | set(extra_critical),
                              key=intervals.number)
            if top is not None:
                critical = [v for v in critical if intervals.number(v) < intervals.number(top)]
            edges = [sympy.Integer(0)] + critical + [top if top is not None else sympy.oo]
            found: set = set()
            bands = []
            try:
                for lo, hi in zip(edges, edges[1:]):
                    bands.append(_band_at(body, lo, hi, factors, found, at_zero))
            except _Again:
                bands = None
            new = _polynomial_factors(found) - factors
            if not new and bands is not None:
                return Picture(tuple(critical), tuple(bands))
            switches |= found
    except (piecewise._NotRational, TypeError, ValueError, sympy.PolynomialError):
        raise NotExact from None
    raise NotExact


# ---- candidates for the extremes over r -------------------------------------------

@dataclass(frozen=True)
class Candidate:
    value: sympy.Expr                 # a function of c; for an infinite one, its direction
    infinite: bool = False            # value's sign says +oo or -oo
    when: tuple[sympy.Expr, ...] = ()  # it counts where each of these is > 0

    def at(self, c_value):
        """The candidate at c_value: a number, oo, -oo, or None where it does not count."""
        if any(_at(w, c_value) <= 0 for w in self.when):
            return None
        v = _at(self.value, c_value)
        if self.infinite:
            s = sympy.sign(v)
            return sympy.oo if s > 0 else (-sympy.oo if s < 0 else None)
        return v


_FIELD = sympy.QQ.frac_field(C)


def _as_polys(h):
    """h = N / D as polynomials in r over the field QQ(c)."""
    numerator, denominator = piecewise.fraction_of(h)
    try:
        return (sympy.Poly(numerator, R, domain=_FIELD), sympy.Poly(denominator, R, domain=_FIELD))
    except (sympy.PolynomialError, sympy.CoercionFailed):
        raise NotExact from None


def _lowest(p: sympy.Poly, inward: int):
    """(order, coefficient) of the lowest power of t in p(t * inward), p already shifted."""
    for (k,), coeff in reversed(p.terms()):
        return k, coeff * (inward ** k)
    return None, p.domain.zero


def _end_candidate(h, end, inward: int, extra: set) -> Candidate:
    """The limit of h as r -> end from inside the piece (inward = +1 from the right)."""
    key = (h, end, inward)
    if key in _END_CACHE:
        cand, found = _END_CACHE[key]
        extra.update(found)
        return cand
    found: set = set()
    numerator, denominator = _as_polys(h)
    if end in (sympy.oo, -sympy.oo):
        n_deg, d_deg = numerator.degree(), denominator.degree()
        n_lc, d_lc = numerator.LC(), denominator.LC()
        if numerator.is_zero or n_deg < d_deg:
            cand = Candidate(sympy.Integer(0))
        else:
            ratio = _FIELD.to_sympy(n_lc / d_lc)
            found.update(piecewise.fraction_of(ratio))
            if n_deg == d_deg:
                cand = Candidate(ratio)
            else:
                sign = 1 if end == sympy.oo or (n_deg - d_deg) % 2 == 0 else -1
                cand = Candidate(sign * ratio, infinite=True)
    else:
        shift = _FIELD.from_sympy(end) if end.free_symbols else _FIELD.from_sympy(sympy.nsimplify(end)) \
            if end.is_Rational else None
        if shift is None:  # an algebraic end: exact sympy limit of the shifted quotient
            cand = _end_by_limit(h, end, inward)
        else:
            k_num, c_num = _lowest(numerator.shift(shift), inward)
            k_den, c_den = _lowest(denominator.shift(shift), inward)
            for coeff in (c_num, c_den):
                found.update(piecewise.fraction_of(_FIELD.to_sympy(coeff)))
            if k_num is None or not c_num or k_num > k_den:
                cand = Candidate(sympy.Integer(0))
            elif k_num == k_den:
                cand = Candidate(_FIELD.to_sympy(c_num / c_den))
            else:
                cand = Candidate(_FIELD.to_sympy(c_num / c_den), infinite=True)
    if len(_END_CACHE) > 4096:
        _END_CACHE.clear()
    _END_CACHE[key] = (cand, frozenset(found))
    extra.update(found)
    return cand


_END_CACHE: dict = {}


def _end_by_limit(h, end, inward: int) -> Candidate:
    """At an irrational constant end (c-free pieces only): sympy's exact one-sided limit."""
    if C in h.free_symbols:
        raise NotExact
    value = sympy.limit(h, R, end, "+" if inward > 0 else "-")
    if value.is_infinite:
        return Candidate(sympy.sign(value), infinite=True)
    return Candidate(value)


def _stationary_candidates(h, piece: Piece, extra: set) -> list[Candidate]:
    numerator = piecewise.fraction_of(sympy.diff(h, R))[0]
    if R not in numerator.free_symbols:
        return []
    out = []
    for factor in _polynomial_factors([numerator]):
        if R not in factor.free_symbols:
            continue
        p = sympy.Poly(factor, R)
        if C in factor.free_symbols:
            if p.degree() > 1:
                raise NotExact
            points = [sympy.cancel(-p.coeff_monomial(1) / p.coeff_monomial(R))]
            extra.update(piecewise.fraction_of(points[0]))
        else:
            points = sympy.real_roots(p)
        for point in points:
            when = tuple(w for w in (point - piece.lo if piece.lo != -sympy.oo else None,
                                     piece.hi - point if piece.hi != sympy.oo else None)
                         if w is not None)
            for w in when:
                extra.update(piecewise.fraction_of(w))
            out.append(Candidate(sympy.cancel(h.xreplace({R: point})), when=when))
    return out


Transform = Callable[[sympy.Expr, int], sympy.Expr]


@dataclass(frozen=True)
class Extreme:
    """sup (or inf) of transform(piece, its sign) over each part's r-intervals (between
    marks), and over the exact value(s) at r = 0 through at_zero, when given."""

    sup: bool
    parts: tuple[tuple[Transform, tuple[tuple, ...]], ...] = ()
    at_zero: Callable[[sympy.Expr], sympy.Expr] | None = None


def over(sup: bool, transform: Transform, *domain, at_zero=None) -> Extreme:
    """One transform over the given r-intervals."""
    return Extreme(sup, ((transform, tuple(domain)),), at_zero)


@dataclass(frozen=True)
class Condition:
    """sum of weight_k(c) * extreme_k <= bound(c); weights >= 0 on sups, <= 0 on infs."""

    terms: tuple[tuple[sympy.Expr, Extreme], ...]
    bound: sympy.Expr
    label: str


_PIECE_CACHE: dict = {}


def _piece_candidates(h, piece: Piece, extra: set) -> list[Candidate]:
    """Candidates for the extremes of h over one piece (cached: transforms repeat)."""
    key = (h, piece.lo, piece.hi)
    if key not in _PIECE_CACHE:
        found: set = set()
        cands = [_end_candidate(h, piece.lo, +1, found), _end_candidate(h, piece.hi, -1, found)]
        cands += _stationary_candidates(h, piece, found)
        if len(_PIECE_CACHE) > 4096:
            _PIECE_CACHE.clear()
        _PIECE_CACHE[key] = (cands, frozenset(found))
    cands, found = _PIECE_CACHE[key]
    extra.update(found)
    return cands


@lru_cache(maxsize=4096)
def _transformed(transform, expr, sign):
    return sympy.cancel(transform(expr, sign))


def candidates(band: Band, extreme: Extreme, extra: set) -> list[Candidate]:
    out = []
    for transform, domain in extreme.parts:
        for (lo, hi), piece in itertools.product(domain, band.pieces):
            if not band.contains_r(piece, lo, hi):
                continue
            out += _piece_candidates(_transformed(transform, piece.expr,
                                                  band.sign_at_sample(piece)), piece, extra)
    if extreme.at_zero is not None:
        out += [Candidate(sympy.cancel(extreme.at_zero(v))) for v in band.zero_values]
    unique = {}
    for cand in out:
        unique.setdefault((cand.value, cand.infinite, cand.when), cand)
    return list(unique.values())


def _extreme_at(cands, sup: bool, c_value):
    values = [v for v in (cand.at(c_value) for cand in cands) if v is not None]
    if not values:
        return None
    return max(values, key=piecewise._key) if sup else min(values, key=piecewise._key)


def _holds(band_candidates, conditions, c_value) -> bool:
    for condition, per_term in zip(conditions, band_candidates):
        total = sympy.Integer(0)
        for (weight, extreme), cands in zip(condition.terms, per_term):
            w = _at(weight, c_value)
            if w == 0:
                continue  # the term is absent here (0 * oo = 0)
            value = _extreme_at(cands, extreme.sup, c_value)
            if value is None:
                continue
            if not value.is_finite:
                if (w * value) == sympy.oo:
                    return False
                total = -sympy.oo if total != sympy.oo else sympy.nan
                continue
            total = total + w * value
        if total == sympy.nan:
            return False
        if total == -sympy.oo:
            continue
        if not _leq(total, _at(condition.bound, c_value)):
            return False
    return True


_FIELD_CACHE: dict = {}


def _in_field(expr):
    """expr as an element of QQ(c), or None (algebraic numbers, other symbols)."""
    if expr not in _FIELD_CACHE:
        try:
            _FIELD_CACHE[expr] = _FIELD.from_sympy(expr)
        except (sympy.CoercionFailed, sympy.PolynomialError, TypeError, ValueError):
            _FIELD_CACHE[expr] = None
        if len(_FIELD_CACHE) > 16384:
            _FIELD_CACHE.clear()
    return _FIELD_CACHE[expr]


def _condition_roots(band, band_candidates, conditions, extra: set) -> set:
    """Every c in the band where some inequality between candidates may change.

    Sums of candidates are formed in the field QQ(c) where every value lies in it (the
    usual case: fast), else as sympy expressions; each distinct numerator is solved once."""
    exprs = set()
    numerators = set()

    def add(expr):
        if C not in expr.free_symbols:
            return
        element = _in_field(expr)
        if element is None:
            exprs.add(expr)
        else:
            numerators.add(element.numer)
            numerators.add(element.denom)

    for condition, per_term in zip(conditions, band_candidates):
        options = []
        for (weight, _), cands in zip(condition.terms, per_term):
            add(weight)
            finite = []
            for cand in cands:
                for w in cand.when:
                    add(w)
                if cand.infinite:
                    add(cand.value)
                else:
                    finite.append(weight * cand.value)
            options.append(list(dict.fromkeys(finite)) or [sympy.Integer(0)])
        count = 1
        for o in options:
            count *= len(o)
        if count > MAX_TUPLES:
            raise NotExact
        fields = [[_in_field(v) for v in o] for o in options]
        bound = _in_field(condition.bound)
        if bound is not None and all(v is not None for o in fields for v in o):
            for combo in itertools.product(*fields):
                total = sum(combo, _FIELD.zero) - bound
                numerators.add(total.numer)
                numerators.add(total.denom)
        else:
            for combo in itertools.product(*options):
                add(sympy.Add(*combo) - condition.bound)
    for expr in extra:
        add(expr)
    roots = set()
    for numerator in numerators:
        if numerator.degree() > 0:
            roots.update(_algebraic_free_roots(numerator.as_expr()))
    for expr in exprs:
        for part in piecewise.fraction_of(expr):
            roots.update(_algebraic_free_roots(part))
    return {v for v in roots if intervals.number(band.lo) < intervals.number(v)
            and (band.hi == sympy.oo or intervals.number(v) < intervals.number(band.hi))}


_ROOT_CACHE: dict = {}


def _algebraic_free_roots(expr) -> list:
    expr = sympy.expand(expr)
    if expr not in _ROOT_CACHE:
        if len(_ROOT_CACHE) > 8192:
            _ROOT_CACHE.clear()
        _ROOT_CACHE[expr] = _algebraic_free_roots_uncached(expr)
    return _ROOT_CACHE[expr]


def _algebraic_free_roots_uncached(expr) -> list:
    """Positive roots in c of a polynomial whose coefficients may be algebraic numbers:
    the algebraic atoms are eliminated by resultants with their minimal polynomials,
    which keeps every root (and may add some; extra critical values cost one test)."""
    expr = sympy.expand(expr)
    if C not in expr.free_symbols:
        return []
    atoms = [a for a in expr.atoms(sympy.Pow, sympy.CRootOf)
             if not a.free_symbols and not a.is_Rational]
    for atom in atoms:
        x = sympy.Dummy("x")
        try:
            minimal = sympy.minimal_polynomial(atom, x)
        except (NotImplementedError, ValueError):
            raise NotExact from None
        expr = sympy.resultant(sympy.expand(expr.xreplace({atom: x})), minimal, x)
    return _positive_roots_in_c(expr)


# ---- deciding the set ------------------------------------------------------------------

@_exact_only
def courant_set(body: sympy.Expr, conditions_any: list[list[Condition]], method: str,
                c_top=None, marks=(0, 1)) -> CourantSet:
    """The set of c > 0 (up to c_top) where, for at least one list in conditions_any,
    every condition holds. Raises NotExact when the body is outside the exact class."""
    pic = picture(body, marks, top=c_top)
    bands = []
    critical = set(pic.critical)
    for band in pic.bands:
        extra: set = set()
        per_alternative = []
        for conditions in conditions_any:
            per_condition = [[candidates(band, extreme, extra) for _, extreme in cond.terms]
                             for cond in conditions]
            per_alternative.append(per_condition)
        for conditions, per_condition in zip(conditions_any, per_alternative):
            critical |= _condition_roots(band, per_condition, conditions, extra)
        bands.append((band, per_alternative))

    edges = {intervals.number(v) for v in pic.critical}

    def holds(c_value) -> bool:
        """At a c inside a band (between its edges): from the band's candidates."""
        if c_top is not None and intervals.number(c_value) > intervals.number(c_top):
            return False
        x = intervals.number(c_value)
        for band, per_alternative in bands:
            if intervals.number(band.lo) < x and (band.hi == sympy.oo
                                                    or x < intervals.number(band.hi)):
                return any(_holds(pc, conds, c_value)
                           for conds, pc in zip(conditions_any, per_alternative))
        return False

    def holds_at_point(c_value) -> bool:
        if c_top is not None and intervals.number(c_value) > intervals.number(c_top):
            return False
        if intervals.number(c_value) not in edges and c_value != c_top:
            return holds(c_value)  # inside a band: its picture holds at the point too
        if not c_value.is_Rational:
            return False  # an isolated irrational edge: not claimed
        return point_holds(body, conditions_any, c_value, marks)

    if c_top is not None:
        critical.add(c_top)
    return intervals.decide(sorted(critical, key=intervals.number), holds, holds_at_point,
                            method=method)


def point_holds(body, conditions_any, c_value, marks=(0, 1)) -> bool:
    """The conditions at one rational c, from the body with c substituted (every value
    IEEE arithmetic can give there must satisfy them)."""
    outcomes = ieee_values(body, {C: c_value})
    if outcomes is None or any(v in (sympy.nan, sympy.oo, -sympy.oo) for v in outcomes):
        return False
    for one in outcomes:
        try:
            pic = picture(sympy.cancel(one) if not one.has(sympy.Min, sympy.Max, sympy.Abs,
                                                            sympy.sign) else one, marks)
        except NotExact:
            return False
        band = pic.bands[0]
        ok = False
        for conditions in conditions_any:
            per_condition = [[candidates(band, extreme, set()) for _, extreme in cond.terms]
                             for cond in conditions]
            fixed = [Condition(tuple((_at(w, c_value), e) for w, e in cond.terms),
                               _at(cond.bound, c_value), cond.label) for cond in conditions]
            if _holds(per_condition, fixed, band.sample):
                ok = True
                break
        if not ok:
            return False
    return True


def restrict(cset: CourantSet, top) -> CourantSet:
    """The part of a set with c <= top."""
    return intervals.restrict_to(cset, top)


# ---- the separable case B(r, c) = k(c) phi(r): extremes are constants --------------

_SEPARABLE_EXTREMES: dict = {}  # (phi, marks, extreme, sign) -> the constant extreme


@_exact_only
def separable_courant_set(k: sympy.Expr, phi: sympy.Expr, conditions_any: list[list[Condition]],
                          method: str, c_top=None, marks=(0, 1)) -> CourantSet:
    """courant_set for the body k(c) * phi(r), phi free of c.

    Every transform used in conditions is positively homogeneous of degree one in the
    body (T(l B) = l T(B) for l > 0), so over r the extreme of T(k phi) is |k| times
    the extreme of T(s phi), s the sign of k: a constant, found once from phi's pieces.
    Each condition is then an inequality between functions of c, exact."""
    pic = picture(phi, marks)
    band = pic.bands[0]
    constants = _SEPARABLE_EXTREMES

    def extreme_of(extreme: Extreme, sign: int):
        key = (phi, tuple(marks), extreme, sign)
        if key not in constants:
            if len(constants) > 4096:
                constants.clear()
            scaled = Band(band.lo, band.hi, band.sample,
                          tuple(Piece(sign * p.expr, p.lo, p.hi) for p in band.pieces),
                          tuple(sign * v for v in band.zero_values))
            values = [cand.at(sympy.Integer(1)) for cand in candidates(scaled, extreme, set())]
            values = [v for v in values if v is not None]
            constants[key] = (None if not values else
                              max(values, key=piecewise._key) if extreme.sup else
                              min(values, key=piecewise._key))
        return constants[key]

    critical = set(_positive_roots_in_c(piecewise.fraction_of(k)[0]))
    critical |= set(_positive_roots_in_c(piecewise.fraction_of(k)[1]))
    for conditions in conditions_any:
        for condition in conditions:
            for weight, _ in condition.terms:
                critical |= set(_algebraic_free_roots(piecewise.fraction_of(weight)[0]))
            for sign in (1, -1):
                total = -condition.bound
                for weight, extreme in condition.terms:
                    value = extreme_of(extreme, sign)
                    if value is not None and value.is_finite:
                        total += weight * sign * k * value
                for part in piecewise.fraction_of(total):
                    critical |= set(_algebraic_free_roots(part))
    if c_top is not None:
        critical.add(c_top)

    def holds(c_value) -> bool:
        if c_top is not None and intervals.number(c_value) > intervals.number(c_top):
            return False
        k_value = _at(k, c_value)
        if not k_value.is_finite:
            return False
        sign = int(sympy.sign(k_value))
        for conditions in conditions_any:
            if all(_condition_holds(cond, sign, abs(k_value), c_value, extreme_of)
                   for cond in conditions):
                return True
        return False

    return intervals.decide(sorted(critical, key=intervals.number), holds, holds,
                            method=method)


def _condition_holds(condition: Condition, sign: int, size, c_value, extreme_of) -> bool:
    total = sympy.Integer(0)
    for weight, extreme in condition.terms:
        w = _at(weight, c_value) * size
        if w == 0:
            continue  # the term is absent (B = 0 here, or no weight): 0 * oo = 0
        value = extreme_of(extreme, sign if sign != 0 else 1)
        if value is None:
            continue
        if not value.is_finite:
            if w * value == sympy.oo:
                return False
            return True if total != sympy.oo else False
        total += w * value
    return _leq(total, _at(condition.bound, c_value))
