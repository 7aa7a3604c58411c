"""Linearisation of a nonlinear face by differentiation, exactly and without `cancel`.

A face g(q[k]) written without a `limiter` statement (a weighted reconstruction,
a clamp between neighbours, products of differences) stands for linear schemes
through its Jacobian a_k = dg/dq[k]:

- at a constant state q[k] = Q (Q = 0 and Q = 1), where g is differentiable
  there: every branch of abs/min/max/sign that is tied at the state is followed,
  and all of them must give the same value and gradient (then g is
  differentiable, whichever branch is active nearby). Weighted reconstructions
  take their ideal weights there;
- otherwise at smooth monotone data q[k] = f(x + k dx), as dx -> 0: f increasing
  or decreasing, with r = (q[0] - q[-1]) / (q[1] - q[0]) tending to 1 from below
  or above. Branches are chosen by the leading terms in dx, and a_k is the
  dx -> 0 limit of the Jacobian there. A clamp between neighbours is linearised
  this way, like a limiter at r = 1 (one-sided where its slope is).

Nothing is simplified symbolically: the face is evaluated once per state as a
truncated power series in dx (forward-mode derivatives alongside), with exact
coefficients in QQ, in QQ(c) when c appears, or in sympy's expression domain
for irrational constants. The same series give the order of the remainder
g - sum a_k q[k] on smooth data, which caps the order the linearisation can
claim (a remainder O(dx^p) in the face is an O(dx^p) truncation error).
"""
from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction

import sympy

from ..symbols import C, Ratio, offset_of
from . import budget
from .series import EXACT, Arithmetic, Evaluator, Field, Inexact, Jet, TooManyBranches, \
    Undefined, exact_zero

JACOBIAN_TERMS = (4, 8)    # series terms for branch choices and derivatives; retried with more
REMAINDER_TERMS = 10       # series terms for the remainder's order
GENERIC_COURANT = sympy.Rational(3, 7)   # where the remainder's order is read when c appears
# Taylor coefficients f''' ... of two smooth data sets (fixed: the same verdict every run).
HIGHER_A = [sympy.Rational(n, d) for n, d in ((1, 3), (-2, 7), (3, 11), (-5, 13), (7, 17),
                                              (-11, 19), (13, 23), (-17, 29))]
HIGHER_B = [sympy.Rational(n, d) for n, d in ((-3, 5), (5, 7), (-1, 9), (4, 11), (-6, 13),
                                              (8, 15), (-9, 17), (10, 19))]
LEVELS = (sympy.Integer(0), sympy.Integer(1))
NUMERIC_HALVINGS = 22      # central-difference steps 1e-2 ... 1e-2 / 2^22 (about 2e-9)
NUMERIC_TOLERANCE = 1e-6   # numeric Jacobian entries must settle to this, else no answer


# ---- states --------------------------------------------------------------------------

def _field_for(g) -> Field:
    return Field("QQ(c)" if C in g.free_symbols else "QQ")


def _with_wider_field(g, run):
    """run(field) in QQ / QQ(c), or in sympy expressions when a value is not rational."""
    try:
        return run(_field_for(g))
    except Inexact:
        return run(Field("EX"))


def _symbols(g):
    return sorted((s for s in g.free_symbols if offset_of(s) is not None), key=offset_of)


def _evaluate_at(g, field: Field, cap: int, values: dict, gradients: bool, courant=C):
    """Alternatives [(choices, Jet)] of g at q[k] = values[q[k]] (series in dx)."""
    arithmetic = Arithmetic(field, cap)
    qs = list(values)
    leaves = {}
    for i, sym in enumerate(qs):
        grad = None
        if gradients:
            grad = tuple(arithmetic.constant(field.one) if j == i else exact_zero()
                         for j in range(len(qs)))
        leaves[sym] = Jet(values[sym], grad)
    c_value = field.convert(courant) if C in g.free_symbols else None
    return Evaluator(arithmetic, leaves, c_value).evaluate(g)


def _jacobian(jet: Jet, field: Field) -> tuple:
    """The dx -> 0 limit of the gradient, exact; Undefined when it is unbounded or unknown."""
    out = []
    for series in jet.grad:
        if not series.is_zero and series.lo < 0:
            raise Undefined("the derivative grows without bound as dx -> 0")
        if series.prec <= 0:
            raise Undefined("the derivative was not resolved to the precision held")
        out.append(field.to_sympy(series.get(0, field.zero)))
    return tuple(out)


@dataclass(frozen=True)
class Variant:
    """One kind of smooth monotone data: direction of f and side of r -> 1."""

    increasing: bool
    r_below: bool

    @property
    def text(self) -> str:
        return (f"{'increasing' if self.increasing else 'decreasing'}, "
                f"r -> 1 from {'below' if self.r_below else 'above'}")

    def data(self, higher, scale=1) -> list:
        """Taylor coefficients f(x), f'(x), ... (r = 1 - f''/f' dx + ...)."""
        s = 1 if self.increasing else -1
        t = 1 if self.r_below else -1
        return [sympy.Integer(0), s * sympy.Integer(scale), s * t * sympy.Rational(scale, 2)] + \
            [s * v for v in higher]


VARIANTS = tuple(Variant(inc, below) for inc in (True, False) for below in (True, False))


def _smooth_values(qs, taylor, field: Field, cap: int) -> dict:
    """q[k] = f(x + k dx) = sum_m f_m (k dx)^m / m! for the polynomial f with these
    Taylor coefficients: exact series in dx."""
    arithmetic = Arithmetic(field, len(taylor))
    out = {}
    for sym in qs:
        k = offset_of(sym)
        coefficients = [field.convert(taylor[m] * sympy.Integer(k) ** m / sympy.factorial(m))
                        for m in range(len(taylor))]
        out[sym] = arithmetic.make(0, coefficients, EXACT)
    return out


def _constant_state(g, qs, field: Field, level) -> tuple[tuple | None, str]:
    """(Jacobian, "") when g is differentiable at q[k] = level, else (None, why not)."""
    arithmetic = Arithmetic(field, 1)
    values = {sym: arithmetic.constant(field.convert(level)) for sym in qs}
    try:
        alternatives = _evaluate_at(g, field, 1, values, True)
    except TooManyBranches as why:
        return None, f"not shown differentiable there: {why}"
    except Undefined as why:
        return None, str(why)
    jacobians = {_jacobian(jet, field) for _, jet in alternatives}
    values_seen = {field.to_sympy(jet.value.get(0, field.zero)) for _, jet in alternatives}
    if len(jacobians) > 1 or len(values_seen) > 1:
        return None, ("the branches of abs/min/max/sign tied there have different derivatives "
                      "(a clamp between neighbours)")
    return jacobians.pop(), ""


def _smooth_state(g, qs, field: Field, variant: Variant) -> list:
    """Every Jacobian limit at smooth monotone data of one variant (several if ties persist),
    in a fixed order."""
    last = None
    for cap in JACOBIAN_TERMS:
        values = _smooth_values(qs, variant.data(HIGHER_A), field, cap)
        try:
            alternatives = _evaluate_at(g, field, cap, values, True)
            return list(dict.fromkeys(_jacobian(jet, field) for _, jet in alternatives))
        except Undefined as why:
            last = why
    raise Undefined(str(last))


def _remainder_order(g, qs, coefficients: dict, variants) -> int | None:
    """Lowest power of dx in g - sum a_k q[k] on smooth data (None: zero to the precision held).

    Two data sets are differenced so that a constant added to the face (which
    cancels between neighbouring faces) does not count.
    """
    c_free = {s: sympy.sympify(v).subs(C, GENERIC_COURANT) for s, v in coefficients.items()}
    g_at = g.subs(C, GENERIC_COURANT) if C in g.free_symbols else g
    lowest = None

    def run(field):
        nonlocal lowest
        lowest = None
        arithmetic = Arithmetic(field, REMAINDER_TERMS)
        for variant in variants:
            remainders = []
            for higher, scale in ((HIGHER_A, 1), (HIGHER_B, 2)):
                values = _smooth_values(qs, variant.data(higher, scale), field, REMAINDER_TERMS)
                alternatives = _evaluate_at(g_at, field, REMAINDER_TERMS, values, False)
                linear = arithmetic.constant(field.zero)
                for sym in qs:
                    linear = arithmetic.add(linear, arithmetic.scale(values[sym],
                                                                     field.convert(c_free[sym])))
                remainders.append([arithmetic.add(jet.value, arithmetic.neg(linear))
                                   for _, jet in alternatives])
            for first in remainders[0]:
                for second in remainders[1]:
                    diff = arithmetic.add(first, arithmetic.neg(second))
                    power = diff.lo if not diff.is_zero else None
                    if power is not None and (lowest is None or power < lowest):
                        lowest = power
    _with_wider_field(g_at, run)
    return lowest


# ---- the linearisation -----------------------------------------------------------------

@dataclass(frozen=True)
class JacobianLinearisation:
    schemes: tuple[tuple[str, tuple[tuple[int, sympy.Expr], ...]], ...]  # (label, face coefficients)
    where: str              # "a constant state" | "smooth monotone data" | "a constant state, numerically"
    note: str
    order_cap: int | None   # remainder O(dx^p): order claimed up to p; None: no cap
    cap_note: str


def _coefficients(qs, jacobian) -> tuple[tuple[int, sympy.Expr], ...]:
    return tuple((offset_of(s), sympy.factor(a) if a.free_symbols else a)
                 for s, a in zip(qs, jacobian) if a != 0)


def jacobian_linearisation(g: sympy.Expr) -> JacobianLinearisation | None:
    """Linear schemes for a nonlinear face g, or None (with no linearisation found)."""
    qs = _symbols(g)
    if not qs:
        return None

    def constant_states(field):
        return [_constant_state(g, qs, field, level) for level in LEVELS]

    at_levels = _with_wider_field(g, constant_states)
    differentiable = all(j is not None for j, _ in at_levels)
    why_not = next((why for j, why in at_levels if j is None), "")

    smooth: dict[tuple, list[Variant]] = {}
    smooth_failed = ""
    for variant in VARIANTS:
        try:
            found = _with_wider_field(g, lambda field: _smooth_state(g, qs, field, variant))
        except Undefined as why:
            smooth_failed = str(why)
            continue
        for jac in found:
            smooth.setdefault(jac, []).append(variant)

    if differentiable and at_levels[0][0] != at_levels[1][0]:
        schemes = tuple((f"Jacobian at the constant state q = {level}", _coefficients(qs, j))
                        for level, (j, _) in zip(LEVELS, at_levels))
        return JacobianLinearisation(
            schemes, "a constant state",
            "nonlinear face without a limiter statement, linearised by differentiation: the "
            "Jacobian of the face with respect to each q[k] at a constant state (exact); it "
            "depends on the level of that state, so the states q = 0 and q = 1 both stand for it",
            0, "the linearisation depends on the level of the data, so no order is claimed")
    if differentiable and (not smooth or set(smooth) == {at_levels[0][0]}):
        jac = at_levels[0][0]
        also = ("; it is also the limit of the Jacobian on smooth monotone data" if smooth else
                f"; the limit on smooth monotone data was not found ({smooth_failed})")
        schemes = (("Jacobian at a constant state", _coefficients(qs, jac)),)
        cap, cap_note = _cap(g, qs, {jac: list(VARIANTS)}, bool(smooth))
        return JacobianLinearisation(
            schemes, "a constant state",
            "nonlinear face without a limiter statement, linearised by differentiation: the "
            "Jacobian of the face with respect to each q[k] at a constant state (exact; "
            "smoothness-weighted blends take their ideal weights there)" + also, cap, cap_note)
    if not smooth:
        return None
    lead = (f"not differentiable at a constant state ({why_not})" if not differentiable else
            "its Jacobian at a constant state differs from the limit on smooth data, which is "
            "what governs convergence")
    schemes = tuple((_label(variants, len(smooth)), _coefficients(qs, jac))
                    for jac, variants in smooth.items())
    cap, cap_note = _cap(g, qs, smooth, True)
    missing = [v.text for v in VARIANTS if not any(v in vs for vs in smooth.values())]
    return JacobianLinearisation(
        schemes, "smooth monotone data",
        f"nonlinear face without a limiter statement, {lead}: linearised at smooth monotone "
        f"data q[k] = f(x + k dx) as dx -> 0 (exact; increasing and decreasing f, r -> 1 from "
        f"below and above; {len(schemes)} linear scheme{'s' if len(schemes) > 1 else ''})"
        + (f"; not found for {', '.join(missing)} ({smooth_failed})" if missing else ""),
        cap, cap_note)


def _label(variants, groups: int) -> str:
    if groups == 1:
        return "linearised at smooth monotone data"
    sides = {v.r_below for v in variants}
    directions = {v.increasing for v in variants}
    if len(directions) == 2 and len(sides) == 1:
        what = f"r -> 1 from {'below' if variants[0].r_below else 'above'}"
    elif len(sides) == 2 and len(directions) == 1:
        what = "increasing" if variants[0].increasing else "decreasing"
    else:
        what = "; ".join(v.text for v in variants)
    return f"linearised at smooth monotone data ({what})"


def _cap(g, qs, groups: dict, smooth_known: bool) -> tuple[int | None, str]:
    """The order the linearisation can claim, from the remainder on smooth data."""
    if not smooth_known:
        return 0, "the face was not evaluated on smooth data, so no order is claimed"
    lowest = None
    try:
        for jac, variants in groups.items():
            found = _remainder_order(g, qs, dict(zip(qs, jac)), variants)
            if found is not None and (lowest is None or found < lowest):
                lowest = found
    except Undefined as why:
        return 0, f"the remainder on smooth data was not found ({why}), so no order is claimed"
    if lowest is None:
        return None, ""
    return lowest, (f"on smooth monotone data the face differs from its linearisation by "
                    f"O(dx^{lowest}), so the linearised order is claimed up to {lowest}")


# ---- numeric fallback ------------------------------------------------------------------

def numeric_linearisation(g: sympy.Expr) -> JacobianLinearisation | None:
    """Central differences in double precision at the constant state q = 0 (faces free of c).

    Steps halve from 1e-2 down to about 1e-8; Richardson extrapolation removes the
    step^2 term, and the pair of neighbouring estimates that agree best gives each
    coefficient and its error. Coefficients are rounded to nearby rationals within
    that error; the note states it. None when the estimates do not settle below
    NUMERIC_TOLERANCE or one-sided differences disagree (a kink). No order cap is
    derived, so no order is claimed from it.
    """
    import numpy

    qs = _symbols(g)
    if not qs or C in g.free_symbols:
        return None
    plain = g.replace(Ratio, lambda a, b: sympy.Piecewise((a / b, sympy.Ne(b, 0)), (0, True)))
    f = sympy.lambdify(qs, plain.evalf(), modules="numpy")  # floats, not big ints
    steps = [1e-2 * 0.5 ** i for i in range(NUMERIC_HALVINGS + 1)]
    zero = numpy.zeros(len(qs))
    coefficients, worst = [], 0.0
    with numpy.errstate(all="ignore"):
        for i in range(len(qs)):
            budget.check()
            unit = numpy.zeros(len(qs))
            unit[i] = 1.0
            up = numpy.array([float(f(*(zero + h * unit))) for h in steps])
            down = numpy.array([float(f(*(zero - h * unit))) for h in steps])
            central = (up - down) / (2 * numpy.array(steps))
            if not numpy.all(numpy.isfinite(central)):
                return None
            base = float(f(*zero))
            forward, backward = (up[-1] - base) / steps[-1], (base - down[-1]) / steps[-1]
            if abs(forward - backward) > 1e-3 * max(1.0, abs(central[-1])):
                return None  # a kink at the constant state: the exact path alone can say more
            extrapolated = (4 * central[1:] - central[:-1]) / 3
            gaps = numpy.abs(numpy.diff(extrapolated))
            best = int(numpy.argmin(gaps))
            value, error = float(extrapolated[best + 1]), float(gaps[best])
            if error > NUMERIC_TOLERANCE:
                return None
            worst = max(worst, error)
            coefficients.append(_nearby_rational(value, error))
    schemes = (("Jacobian at a constant state (numeric)", _coefficients(qs, coefficients)),)
    return JacobianLinearisation(
        schemes, "a constant state, numerically",
        f"nonlinear face without a limiter statement, linearised numerically: central "
        f"differences at the constant state q = 0 with Richardson extrapolation over halving "
        f"steps, coefficients rounded to rationals within the estimated error "
        f"(tolerance {max(worst, 1e-15):.1e})",
        0, "the linearisation is numeric, so no order is claimed")


def _nearby_rational(value: float, error: float) -> sympy.Rational:
    """The simplest rational within max(error, 1e-13) of value (denominators up to 10^8)."""
    slack = max(error, 1e-13)
    for limit in (10 ** 2, 10 ** 4, 10 ** 6, 10 ** 8):
        guess = Fraction(value).limit_denominator(limit)
        if abs(float(guess) - value) <= slack:
            return sympy.Rational(guess.numerator, guess.denominator)
    guess = Fraction(value).limit_denominator(10 ** 8)
    return sympy.Rational(guess.numerator, guess.denominator)
