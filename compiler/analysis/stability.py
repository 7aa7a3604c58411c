"""Von Neumann stability: |G(c, theta)| <= 1 for all theta, as a set of Courant numbers.

|G|^2 - 1 = P(c, s) is a polynomial in s = sin^2(theta/2) on [0, 1]. The stable
set can change only where P(c, .) gains or loses a non-positive maximum: at
s = 0 or 1 (roots of P(c, 0), P(c, 1) after the factors s and 1 - s that hold
for every c are divided out), where the leading coefficient vanishes, or where
two roots in s meet (the discriminant in s). Those values of c are exact; one
exact test between each pair decides the set. Where the coefficients are not
rational, or sympy would take too long, a numeric scan with a stated tolerance
decides instead.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy
import sympy

from ..symbols import C
from . import intervals
from .intervals import CourantSet, Span
from .symbol import S, LinearScheme

NUMERIC_TOLERANCE = 1e-5     # Courant-number tolerance of the numeric path
NUMERIC_C_RANGE = 8.0        # the numeric path scans 0 < c <= this
NUMERIC_C_STEP = 0.005       # ... in steps of this
GROWTH_SLACK = 1e-12         # |G|^2 - 1 below this counts as <= 0 (round-off)
MAX_EXACT_DEGREE = 12        # above this degree in s the discriminant is left to numerics


@dataclass(frozen=True)
class Stability:
    label: str                   # which linear scheme
    amplification: str           # G as a polynomial in z = exp(i theta)
    abs_squared: str             # |G|^2 in s = sin^2(theta/2)
    semi_discrete: str | None    # lambda(z) for method-of-lines schemes
    stable: CourantSet

    @property
    def kind(self) -> str:
        return kind_of(self.stable)


def kind_of(stable: CourantSet) -> str:
    return kind_of_interval(stable.main)


def kind_of_interval(main) -> str:
    """unstable | unconditional | conditional, from the stable interval nearest c = 0."""
    if main is None:
        return "unstable"
    if main.lo == 0 and main.hi == sympy.oo:
        return "unconditional"
    return "conditional"


def analyse_stability(scheme: LinearScheme) -> Stability:
    z = sympy.Symbol("z")
    semi = None
    if scheme.time != "euler":
        semi = sympy.sstr(sum((v * z ** m for m, v in sorted(scheme.semi_discrete.items())),
                              sympy.Integer(0)))
    stable = stable_set(scheme)
    if scheme.valid_to is not None:
        stable = intervals.restrict_to(stable, scheme.valid_to)
    return Stability(scheme.label, sympy.sstr(scheme.amplification),
                     _abs_squared_text(scheme.abs_squared), semi, stable)


def _abs_squared_text(value: sympy.Expr) -> str:
    """|G|^2 for reading: 1 + factored excess when that is cheap, else expanded."""
    excess = sympy.expand(value - 1)
    if len(sympy.Add.make_args(excess)) <= 24:
        return sympy.sstr(sympy.factor(excess) + 1)
    return sympy.sstr(value)


class LongWaves:
    """|G|^2 - 1 = p_1(c) s + p_2(c) s^2 + ... near theta = 0 (s = sin^2(theta/2)): the
    sign of the lowest coefficient not zero at c decides growth of long waves, however
    small it is, so it is read from these exact coefficients and never from a theta grid.
    """

    DIGITS = 60

    def __init__(self, scheme: LinearScheme):
        excess = sympy.expand(scheme.abs_squared - 1)
        try:
            poly = sympy.Poly(excess, S)
            self.coefficients = [sympy.expand(poly.coeff_monomial(S ** k))
                                 for k in range(1, poly.degree() + 1)]
        except sympy.PolynomialError:
            self.coefficients = []
        self.coefficients = [v for v in self.coefficients]
        self._functions = [sympy.lambdify(C, v, modules="mpmath") for v in self.coefficients]

    def sign(self, c_value) -> int:
        """+1: long waves grow at c; -1: they decay; 0: |G| = 1 to every order kept."""
        import mpmath

        exact = isinstance(c_value, sympy.Basic)
        with mpmath.workdps(self.DIGITS):
            for expr, f in zip(self.coefficients, self._functions):
                if exact and c_value.is_Rational:
                    value = expr.subs(C, c_value)
                    if value.is_number and value.is_comparable:
                        if value == 0:
                            continue
                        return 1 if value > 0 else -1
                value = f(mpmath.mpf(c_value) if not exact else mpmath.mpf(sympy.N(c_value, 70)))
                if abs(value) <= mpmath.mpf(10) ** (-(self.DIGITS - 15)):
                    continue
                return 1 if value > 0 else -1
        return 0

    def unstable(self, c_value) -> bool:
        return self.sign(c_value) > 0

    def edges(self) -> list[sympy.Expr]:
        """Exact positive roots in c of the lowest nonzero coefficients (where the
        long-wave verdict can change)."""
        out = []
        for expr in self.coefficients:
            if expr == 0:
                continue
            numerator = sympy.numer(sympy.together(expr))
            try:
                out += intervals.positive_roots(numerator, C)
            except (sympy.PolynomialError, NotImplementedError, ValueError):
                # algebraic coefficients: sympy's exact roots where it finds them all
                try:
                    found = sympy.roots(sympy.Poly(numerator, C))
                except (sympy.PolynomialError, NotImplementedError, ValueError):
                    found = {}
                out += [r for r in found if r.is_real and r.is_positive]
            break
        return out


def stable_set(scheme: LinearScheme) -> CourantSet:
    excess = sympy.expand(scheme.abs_squared - 1)
    if excess == 0:
        return CourantSet((Span(sympy.Integer(0), sympy.oo, True, False),),
                          "exact: |G| = 1 for every c and theta")
    try:
        exact = _exact_set(excess, scheme)
    except NoExactSet as why:
        return numeric_set(scheme, why=str(why))
    except (sympy.PolynomialError, NotImplementedError, ValueError, TypeError) as err:
        # sympy could not treat these coefficients exactly; scan instead, and say so
        return numeric_set(scheme, why=f"sympy could not decide it exactly "
                                        f"({type(err).__name__})")
    if _numeric_agrees(scheme, exact, LongWaves(scheme)):
        return exact
    return numeric_set(scheme, why="the exact set disagreed with a numeric scan of |G|")


class NoExactSet(Exception):
    """Why the exact path gave no set (the numeric set's method says it)."""


def _exact_set(excess: sympy.Expr, scheme: LinearScheme) -> CourantSet:
    numerator, denominator = sympy.fraction(sympy.together(excess))
    if S in denominator.free_symbols:
        raise NoExactSet("|G|^2 - 1 has a denominator in theta")
    for part in (numerator, denominator):
        poly = sympy.Poly(part, S, C)
        if not (poly.domain.is_QQ or poly.domain.is_ZZ):
            raise NoExactSet("coefficients that are not rational")
    q = sympy.Poly(sympy.expand(numerator), S)   # coefficients in c
    while sympy.expand(q.eval(0)) == 0:
        q = q.exquo(sympy.Poly(S, S, domain=q.domain))        # exact division, no cancel
    while sympy.expand(q.eval(1)) == 0:
        q = q.exquo(sympy.Poly(1 - S, S, domain=q.domain))
    if q.degree() > MAX_EXACT_DEGREE:
        raise NoExactSet(f"degree {q.degree()} in s = sin^2(theta/2), above "
                         f"{MAX_EXACT_DEGREE}")
    reduced = q.as_expr()
    # Repeated factors keep their sign pattern but make the discriminant vanish
    # identically; the square-free part has the same sign changes.
    square_free = sympy.sqf_part(reduced) if reduced.free_symbols else reduced
    sf = sympy.Poly(square_free, S)
    critical = intervals.positive_roots(denominator, C)
    for boundary in (square_free.subs(S, 0), square_free.subs(S, 1), sf.LC()):
        critical += intervals.positive_roots(sympy.numer(sympy.together(boundary)), C)
    if sf.degree() >= 2:
        disc = sympy.discriminant(sf)
        if sympy.expand(disc.as_expr()) == 0:
            raise NoExactSet("a discriminant in s that vanishes identically")
        critical += intervals.positive_roots(sympy.numer(sympy.together(disc.as_expr())), C)
    sign_of_denominator = sympy.Lambda(C, denominator)

    def holds(c_value) -> bool:
        sign = 1 if sign_of_denominator(c_value) > 0 else -1
        return _nonpositive_on_unit(sympy.Poly(sign * reduced.subs(C, c_value), S))

    def holds_at_point(c_value) -> bool:
        if c_value.is_Rational:
            return sign_of_denominator(c_value) != 0 and holds(c_value)
        # An irrational critical value with unstable neighbours: only a grid can say.
        fine = numpy.linspace(0.0, numpy.pi, 16001)
        return max_growth(scheme.numeric(), float(sympy.N(c_value, 30)), fine) <= GROWTH_SLACK

    return intervals.decide(critical, holds, holds_at_point,
                            method="exact (sympy: roots in c of |G|^2 - 1 at s = 0, s = 1, "
                                   "its leading coefficient and its discriminant in s, "
                                   "s = sin^2(theta/2))")


def _numeric_agrees(scheme: LinearScheme, exact: CourantSet, long_waves=None) -> bool:
    """A guard on the exact path: spot-check its verdict at 48 Courant numbers.

    Inside the set |G| must not exceed 1 on a theta grid; outside it (away from
    its ends) some theta on a fine grid must show growth, or long waves must grow
    (exact lowest coefficients: a growth of 1e-13 near theta = 0 is still growth).
    """
    g_of = scheme.numeric()
    main = exact.main
    top = intervals.number(main.hi) if main is not None and main.hi != sympy.oo else 4.0
    ends = [intervals.number(v) for p in exact.parts for v in (p.lo, p.hi) if v != sympy.oo]
    samples = [c for c in numpy.linspace(top / 64, min(2 * top, NUMERIC_C_RANGE), 48)
               if all(abs(c - e) >= 1e-3 for e in ends)]
    inside = [c for c in samples if exact.contains(c)]
    outside = [c for c in samples if not exact.contains(c)]
    if inside:
        growth = numpy.abs(g_of(inside, numpy.linspace(0.0, numpy.pi, 1025))) ** 2 - 1
        if numpy.max(growth) > 1e-9:
            return False
    if outside:
        growth = numpy.abs(g_of(outside, numpy.linspace(0.0, numpy.pi, 16001))) ** 2 - 1
        seen = numpy.max(growth, axis=1) > GROWTH_SLACK
        for c_value, grows in zip(outside, seen):
            if not grows and not (long_waves is not None and long_waves.unstable(c_value)):
                return False
    return True


def _nonpositive_on_unit(poly: sympy.Poly) -> bool:
    """poly(s) <= 0 for all s in [0, 1], exactly (rational coefficients)."""
    if poly.is_zero:
        return True
    if poly.eval(0) > 0 or poly.eval(1) > 0:
        return False
    roots = sorted({float(r) for r in sympy.real_roots(poly) if 0 < r < 1})
    points = [0.0] + roots + [1.0]
    for a, b in zip(points, points[1:]):
        probe = sympy.Rational(a + b) / 2 if False else sympy.nsimplify((a + b) / 2, rational=True)
        if poly.eval(probe) > 0:
            return False
    return True


# ---- numeric path ------------------------------------------------------------

def max_growth(g_of, c_value: float, thetas: numpy.ndarray) -> float:
    """max over theta of |G|^2 - 1 at one Courant number (g_of from LinearScheme.numeric)."""
    return float(numpy.max(numpy.abs(g_of(c_value, thetas)) ** 2 - 1.0))


def numeric_set(scheme: LinearScheme, g_of=None, why: str = "") -> CourantSet:
    """Scan 0 < c <= NUMERIC_C_RANGE on a theta grid, bisect each change of verdict.

    The theta grid is refined (4x) while bisecting, so a band of instability
    near a boundary that the coarse grid misses is caught there. `g_of` (default
    scheme.numeric()) evaluates G; the budget's fallback passes one that needs no
    exact update. `why` says why the exact path was not taken (shown in the method).
    """
    g_of = g_of or scheme.numeric()
    coarse = numpy.linspace(0.0, numpy.pi, 2001)
    fine = numpy.linspace(0.0, numpy.pi, 8001)
    long_waves = LongWaves(scheme)

    def stable(c_value: float, grid=coarse) -> bool:
        return max_growth(g_of, c_value, grid) <= GROWTH_SLACK and not long_waves.unstable(c_value)

    cs = numpy.arange(1, int(NUMERIC_C_RANGE / NUMERIC_C_STEP) + 1) * NUMERIC_C_STEP
    with numpy.errstate(all="ignore"):
        growth = numpy.abs(g_of(cs, coarse)) ** 2 - 1
    verdicts = numpy.max(growth, axis=1) <= GROWTH_SLACK
    verdicts = numpy.array([bool(ok) and not long_waves.unstable(c) for c, ok in zip(cs, verdicts)])
    parts: list[Span] = []
    start = None
    for i, (c_value, ok) in enumerate(zip(cs, verdicts)):
        if ok and start is None:
            start = 0.0 if i == 0 else _bisect(stable, cs[i - 1], c_value, fine, rising=True)
        if not ok and start is not None:
            end = _bisect(stable, cs[i - 1], c_value, fine, rising=False)
            parts.append(_numeric_span(start, end))
            start = None
    if start is not None:
        parts.append(Span(_rational(start), sympy.oo, True, False))
    parts = _snap(parts, long_waves)
    return CourantSet(tuple(parts),
                      f"numeric{f' ({why})' if why else ''}: theta grid of 2001 points on [0, pi] (8001 while bisecting), "
                      f"c scanned in steps of {NUMERIC_C_STEP:g} up to {NUMERIC_C_RANGE:g} "
                      f"(bands narrower than the step may be missed), boundaries bisected; "
                      f"long waves (theta -> 0) from the exact lowest coefficients of "
                      f"|G|^2 - 1 in s, and an edge they decide is their exact root",
                      NUMERIC_TOLERANCE)


def _snap(parts: list, long_waves: LongWaves) -> list:
    """Replace a bisected edge by the exact root of the long-wave coefficient within the
    tolerance of it, where the long-wave verdict changes there."""
    roots = long_waves.edges()
    if not roots:
        return parts

    def snapped(value):
        if value == 0 or value == sympy.oo:
            return value
        x = float(value)
        for root in roots:
            r = float(root)
            if abs(r - x) <= 2 * NUMERIC_TOLERANCE and \
                    long_waves.sign(r - NUMERIC_TOLERANCE) != long_waves.sign(r + NUMERIC_TOLERANCE):
                return root
        return value

    return [Span(snapped(p.lo), snapped(p.hi), p.lo_closed, p.hi_closed) for p in parts]


def _bisect(stable, lo: float, hi: float, grid, rising: bool) -> float:
    """The boundary between lo and hi; rising: unstable at lo, stable at hi."""
    while hi - lo > NUMERIC_TOLERANCE / 10:
        mid = (lo + hi) / 2
        if stable(mid, grid) == rising:
            hi = mid
        else:
            lo = mid
    return hi if rising else lo


def _rational(value: float) -> sympy.Expr:
    return sympy.Float(round(value, 6))


def _numeric_span(lo: float, hi: float) -> Span:
    return Span(_rational(lo), _rational(hi))
