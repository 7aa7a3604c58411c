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

import itertools
from dataclasses import dataclass
from fractions import Fraction

import sympy

from ..symbols import C, Ratio, offset_of
from . import budget

JACOBIAN_TERMS = (4, 8)    # series terms for branch choices and derivatives; retried with more
REMAINDER_TERMS = 10       # series terms for the remainder's order
MAX_BRANCHES = 64          # tied branches followed at one state before giving up
GENERIC_COURANT = sympy.Rational(3, 7)   # where the remainder's order is read when c appears
# Taylor coefficients f''' ... of two smooth data sets (fixed: the same verdict every run).
HIGHER_A = [sympy.Rational(n, d) for n, d in ((1, 3), (-2, 7), (3, 11), (-5, 13), (7, 17),
                                              (-11, 19), (13, 23), (-17, 29))]
HIGHER_B = [sympy.Rational(n, d) for n, d in ((-3, 5), (5, 7), (-1, 9), (4, 11), (-6, 13),
                                              (8, 15), (-9, 17), (10, 19))]
LEVELS = (sympy.Integer(0), sympy.Integer(1))
NUMERIC_STEP = 1e-5
NUMERIC_TOLERANCE = 1e-8


class Undefined(Exception):
    """The face has no value or derivative at this state (0/0, a root of 0, a c-dependent branch)."""


class Inexact(Exception):
    """The coefficient field cannot hold a value exactly; retry in a wider field."""


# ---- exact coefficients ------------------------------------------------------------

class _Field:
    """QQ, QQ(c) or sympy expressions, with the few operations the series need."""

    def __init__(self, kind: str):
        self.kind = kind
        self.dom = {"QQ": sympy.QQ, "QQ(c)": sympy.QQ.frac_field(C), "EX": sympy.EX}[kind]
        self.zero, self.one = self.dom.zero, self.dom.one

    def convert(self, value) -> object:
        try:
            return self.dom.from_sympy(sympy.sympify(value))
        except (sympy.CoercionFailed, sympy.PolynomialError, TypeError, ValueError):
            raise Inexact(f"{value} is not in {self.kind}") from None

    def to_sympy(self, value) -> sympy.Expr:
        return self.dom.to_sympy(value)

    def is_zero(self, value) -> bool:
        return self.dom.is_zero(value)

    def sign(self, value) -> int:
        if self.dom.is_zero(value):
            return 0
        if self.kind == "QQ":
            return 1 if value > 0 else -1
        expr = self.to_sympy(value)
        if self.kind == "QQ(c)" and expr.has(C):
            from .intervals import positive_roots
            num, den = sympy.fraction(sympy.together(expr))
            if positive_roots(num, C) or positive_roots(den, C):
                raise Undefined(f"a branch of abs/min/max/sign depends on the Courant number "
                                f"({sympy.sstr(expr)} changes sign for c > 0)")
            expr = expr.subs(C, 1)
        if expr.is_positive:
            return 1
        if expr.is_negative:
            return -1
        value = sympy.N(expr, 50)
        if value.is_number and value != 0 and not value.free_symbols:
            return 1 if value > 0 else -1
        raise Undefined(f"the sign of {sympy.sstr(expr)} was not decided")

    def power(self, value, exponent: sympy.Rational):
        """value ** exponent exactly (exponent rational, value non-zero)."""
        base = self.to_sympy(value)
        if exponent.q != 1 and self.sign(value) < 0:
            raise Undefined(f"a root of a negative value ({sympy.sstr(base)})")
        return self.convert(sympy.Pow(base, exponent))  # Inexact when not in this field


# ---- truncated power series in dx ---------------------------------------------------

class Series:
    """sum_i c[i] h^(lo + i), known exactly for powers below `prec` (zeros past c).

    A zero series has no terms (c == []) and lo == prec.
    """

    __slots__ = ("lo", "c", "prec")

    def __init__(self, lo: int, c: list, prec: int):
        self.lo, self.c, self.prec = lo, c, prec

    def get(self, power: int, zero):
        i = power - self.lo
        return self.c[i] if 0 <= i < len(self.c) else zero

    @property
    def is_zero(self) -> bool:
        return not self.c


EXACT = 10 ** 6
"""The precision of an exact value (a constant, a polynomial of data)."""


def exact_zero() -> Series:
    return Series(EXACT, [], EXACT)


class _Arithmetic:
    """Series arithmetic over one field, keeping `cap` terms past the leading one
    (a relative precision, like floating point, so that small quantities keep
    their digits)."""

    def __init__(self, field: _Field, cap: int):
        self.f, self.cap = field, cap

    def make(self, lo: int, c: list, prec: int) -> Series:
        c = c[:max(prec - lo, 0)]
        start = 0
        while start < len(c) and self.f.is_zero(c[start]):
            start += 1
        if start == len(c):
            return Series(prec, [], prec)
        lo += start
        prec = min(prec, lo + self.cap)
        c = c[start:start + prec - lo]
        while c and self.f.is_zero(c[-1]):
            c.pop()
        return Series(lo, c, prec)

    def constant(self, value) -> Series:
        return self.make(0, [value], EXACT) if not self.f.is_zero(value) else exact_zero()

    def add(self, a: Series, b: Series) -> Series:
        if a.is_zero and a.prec >= b.prec:
            return b
        if b.is_zero and b.prec >= a.prec:
            return a
        prec = min(a.prec, b.prec)
        lo = min(a.lo, b.lo)
        top = min(prec, max(a.lo + len(a.c), b.lo + len(b.c)))
        zero = self.f.zero
        return self.make(lo, [a.get(p, zero) + b.get(p, zero) for p in range(lo, top)], prec)

    def neg(self, a: Series) -> Series:
        return Series(a.lo, [-v for v in a.c], a.prec)

    def scale(self, a: Series, k) -> Series:
        return self.make(a.lo, [k * v for v in a.c], a.prec)

    def mul(self, a: Series, b: Series) -> Series:
        prec = min(a.lo + b.prec, b.lo + a.prec)
        if a.is_zero or b.is_zero:
            return Series(prec, [], prec)
        lo = a.lo + b.lo
        n = min(prec - lo, len(a.c) + len(b.c) - 1)
        out = []
        for p in range(max(n, 0)):
            total = self.f.zero
            for i in range(max(0, p - len(b.c) + 1), min(p, len(a.c) - 1) + 1):
                total += a.c[i] * b.c[p - i]
            out.append(total)
        return self.make(lo, out, prec)

    def power(self, a: Series, exponent: sympy.Rational) -> Series:
        if exponent.is_Integer and exponent >= 0:
            out, base, k = self.constant(self.f.one), a, int(exponent)
            while k:
                if k & 1:
                    out = self.mul(out, base)
                k >>= 1
                if k:
                    base = self.mul(base, base)
            return out
        if a.is_zero:
            raise Undefined("a division by zero or a root of zero")
        lo = a.lo * exponent
        if not lo.is_Integer:
            raise Undefined("a fractional power of a quantity vanishing like a power of dx")
        lead = self.f.power(a.c[0], exponent)
        terms = min(a.prec - a.lo, self.cap)
        u = [v / a.c[0] for v in a.c]
        one = self.f.one
        b = [one]
        for n in range(1, max(terms, 1)):
            total = self.f.zero
            for k in range(1, min(n, len(u) - 1) + 1):
                weight = self.f.convert(((exponent + 1) * k - n) / sympy.Integer(n))
                total += weight * u[k] * b[n - k]
            b.append(total)
        return self.make(int(lo), [lead * v for v in b[:max(terms, 1)]], int(lo) + terms)

    def sign(self, a: Series) -> int:
        """Sign as dx -> 0+ (0: zero to the precision held, a tie)."""
        return 0 if a.is_zero else self.f.sign(a.c[0])


# ---- forward-mode jets over series, with tied branches followed ----------------------

@dataclass
class Jet:
    value: Series
    grad: tuple | None      # one Series per q[k] (None: values only)


class _Evaluator:
    def __init__(self, arithmetic: _Arithmetic, leaves: dict, courant):
        self.a = arithmetic
        self.leaves = leaves            # q symbol -> Jet
        self.courant = courant          # C as a field element (QQ(c)) or a number
        self.memo: dict = {}
        first = next(iter(leaves.values()), None)
        self.gradients = len(first.grad) if first is not None and first.grad is not None else 0

    # jets
    def const(self, value) -> Jet:
        grad = None
        if self.gradients:
            grad = (exact_zero(),) * self.gradients
        return Jet(self.a.constant(value), grad)

    def add(self, x: Jet, y: Jet) -> Jet:
        a = self.a
        return Jet(a.add(x.value, y.value),
                   None if x.grad is None else tuple(a.add(p, q) for p, q in zip(x.grad, y.grad)))

    def neg(self, x: Jet) -> Jet:
        return Jet(self.a.neg(x.value), None if x.grad is None else tuple(self.a.neg(p) for p in x.grad))

    def mul(self, x: Jet, y: Jet) -> Jet:
        a = self.a
        grad = None
        if x.grad is not None:
            grad = tuple(a.add(a.mul(x.value, q), a.mul(y.value, p)) for p, q in zip(x.grad, y.grad))
        return Jet(a.mul(x.value, y.value), grad)

    def power(self, x: Jet, exponent: sympy.Rational) -> Jet:
        a = self.a
        value = a.power(x.value, exponent)
        grad = None
        if x.grad is not None:
            if exponent == 0:
                grad = tuple(exact_zero() for _ in x.grad)
            else:
                slope = a.scale(a.power(x.value, exponent - 1), a.f.convert(exponent))
                grad = tuple(a.mul(slope, p) for p in x.grad)
        return Jet(value, grad)

    # branches
    def evaluate(self, node) -> list:
        """[(choices, Jet)]: one entry per combination of tied branches followed."""
        found = self.memo.get(node)
        if found is not None:
            return found
        budget.check()
        out = self._evaluate(node)
        if len(out) > MAX_BRANCHES:
            raise Undefined(f"more than {MAX_BRANCHES} combinations of tied branches")
        self.memo[node] = out
        return out

    def _combine(self, lists, build) -> list:
        if all(len(x) == 1 for x in lists):
            return [({k: v for choices, _ in (x[0] for x in lists) for k, v in choices.items()},
                     build([x[0][1] for x in lists]))]
        out = []
        for combo in itertools.product(*lists):
            merged, ok = {}, True
            for choices, _ in combo:
                for key, branch in choices.items():
                    if merged.setdefault(key, branch) != branch:
                        ok = False
            if ok:
                out.append((merged, build([jet for _, jet in combo])))
                if len(out) > MAX_BRANCHES:
                    raise Undefined(f"more than {MAX_BRANCHES} combinations of tied branches")
        return out

    def _fork(self, node, options, choices) -> list:
        """options: [(branch name, Jet)]; one alternative per branch."""
        if len(options) == 1:
            return [(choices, options[0][1])]
        out = []
        for branch, jet in options:
            if choices.get(node, branch) == branch:
                out.append(({**choices, node: branch}, jet))
        return out

    def _evaluate(self, node) -> list:
        if node.is_Number:
            if not node.is_finite:
                raise Undefined(f"the face contains {node}")
            return [({}, self.const(self.a.f.convert(node)))]
        if node.is_Symbol:
            if node in self.leaves:
                return [({}, self.leaves[node])]
            if node == C and self.courant is not None:
                return [({}, self.const(self.courant))]
            raise Undefined(f"unexpected symbol {node}")
        if node.is_NumberSymbol or (node.is_number and not node.is_Atom):
            return [({}, self.const(self.a.f.convert(node)))]
        args = [self.evaluate(arg) for arg in node.args]
        if isinstance(node, sympy.Add):
            return self._combine(args, lambda jets: _fold(self.add, jets))
        if isinstance(node, sympy.Mul):
            return self._combine(args, lambda jets: _fold(self.mul, jets))
        if isinstance(node, sympy.Pow):
            exponent = node.args[1]
            if not exponent.is_Rational:
                raise Undefined(f"a power with exponent {exponent}")
            return [(ch, self.power(jet, exponent)) for ch, jet in args[0]]
        if isinstance(node, sympy.Abs):
            out = []
            for choices, jet in args[0]:
                s = self.a.sign(jet.value)
                options = [("+", jet)] if s > 0 else [("-", self.neg(jet))] if s < 0 else \
                    [("+", jet), ("-", self.neg(jet))]
                out += self._fork(node, options, choices)
            return out
        if isinstance(node, sympy.sign):
            out = []
            for choices, jet in args[0]:
                s = self.a.sign(jet.value)
                values = [s] if s else [1, -1, 0]
                out += self._fork(node, [(str(v), self.const(self.a.f.convert(v))) for v in values],
                                  choices)
            return out
        if isinstance(node, (sympy.Min, sympy.Max)):
            pick = -1 if isinstance(node, sympy.Min) else 1
            out = []
            for choices, jets in self._combine(args, lambda jets: jets):
                best = [0]
                for i in range(1, len(jets)):
                    s = self.a.sign(self.a.add(jets[i].value, self.a.neg(jets[best[0]].value)))
                    if s == pick:
                        best = [i]
                    elif s == 0:
                        best.append(i)
                out += self._fork(node, [(str(i), jets[i]) for i in best], choices)
            return out
        if isinstance(node, Ratio):
            def ratio(jets):
                top, bottom = jets
                if bottom.value.is_zero:
                    raise Undefined("ratio(a, b) with b = 0 at this state (0/0 nearby)")
                return self.mul(top, self.power(bottom, sympy.Integer(-1)))
            return self._combine(args, ratio)
        raise Undefined(f"{type(node).__name__} is not differentiated here")


def _fold(op, jets):
    out = jets[0]
    for jet in jets[1:]:
        out = op(out, jet)
    return out


# ---- states --------------------------------------------------------------------------

def _field_for(g) -> _Field:
    return _Field("QQ(c)" if C in g.free_symbols else "QQ")


def _with_wider_field(g, run):
    """run(field) in QQ / QQ(c), or in sympy expressions when a value is not rational."""
    try:
        return run(_field_for(g))
    except Inexact:
        return run(_Field("EX"))


def _symbols(g):
    return sorted((s for s in g.free_symbols if offset_of(s) is not None), key=offset_of)


def _evaluate_at(g, field: _Field, cap: int, values: dict, gradients: bool, courant=C):
    """Alternatives [(choices, Jet)] of g at q[k] = values[q[k]] (series in dx)."""
    arithmetic = _Arithmetic(field, cap)
    qs = list(values)
    leaves = {}
    for i, sym in enumerate(qs):
        grad = None
        if gradients:
            grad = tuple(arithmetic.constant(field.one) if j == i else exact_zero()
                         for j in range(len(qs)))
        leaves[sym] = Jet(values[sym], grad)
    c_value = field.convert(courant) if C in g.free_symbols else None
    return _Evaluator(arithmetic, leaves, c_value).evaluate(g)


def _jacobian(jet: Jet, field: _Field) -> tuple:
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


def _smooth_values(qs, taylor, field: _Field, cap: int) -> dict:
    """q[k] = f(x + k dx) = sum_m f_m (k dx)^m / m! for the polynomial f with these
    Taylor coefficients: exact series in dx."""
    arithmetic = _Arithmetic(field, len(taylor))
    out = {}
    for sym in qs:
        k = offset_of(sym)
        coefficients = [field.convert(taylor[m] * sympy.Integer(k) ** m / sympy.factorial(m))
                        for m in range(len(taylor))]
        out[sym] = arithmetic.make(0, coefficients, EXACT)
    return out


def _constant_state(g, qs, field: _Field, level) -> tuple[tuple | None, str]:
    """(Jacobian, "") when g is differentiable at q[k] = level, else (None, why not)."""
    arithmetic = _Arithmetic(field, 1)
    values = {sym: arithmetic.constant(field.convert(level)) for sym in qs}
    try:
        alternatives = _evaluate_at(g, field, 1, values, True)
    except Undefined as why:
        return None, str(why)
    jacobians = {_jacobian(jet, field) for _, jet in alternatives}
    values_seen = {field.to_sympy(jet.value.get(0, field.zero)) for _, jet in alternatives}
    if len(jacobians) > 1 or len(values_seen) > 1:
        return None, ("the branches of abs/min/max/sign tied there have different derivatives "
                      "(a clamp between neighbours)")
    return jacobians.pop(), ""


def _smooth_state(g, qs, field: _Field, variant: Variant) -> set:
    """Every Jacobian limit at smooth monotone data of one variant (several if ties persist)."""
    last = None
    for cap in JACOBIAN_TERMS:
        values = _smooth_values(qs, variant.data(HIGHER_A), field, cap)
        try:
            alternatives = _evaluate_at(g, field, cap, values, True)
            return {_jacobian(jet, field) for _, jet in alternatives}
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
        arithmetic = _Arithmetic(field, REMAINDER_TERMS)
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

    Coefficients are rounded to nearby rationals; the note states the tolerance.
    No order cap is derived, so no order is claimed from it.
    """
    import numpy

    qs = _symbols(g)
    if not qs or C in g.free_symbols:
        return None
    plain = g.replace(Ratio, lambda a, b: sympy.Piecewise((a / b, sympy.Ne(b, 0)), (0, True)))
    f = sympy.lambdify(qs, plain, modules="numpy")
    coefficients = []
    for i in range(len(qs)):
        budget.check()
        step = numpy.zeros(len(qs))
        step[i] = NUMERIC_STEP
        with numpy.errstate(all="ignore"):
            base = float(f(*numpy.zeros(len(qs))))
            up = (float(f(*step)) - base) / NUMERIC_STEP
            down = (base - float(f(*-step))) / NUMERIC_STEP
        if not (numpy.isfinite(up) and numpy.isfinite(down)) or abs(up - down) > 1e-4:
            return None  # not differentiable there: the exact path alone would say more
        value = (up + down) / 2
        exact = Fraction(value).limit_denominator(10 ** 6)
        coefficients.append(sympy.Rational(exact.numerator, exact.denominator))
    schemes = (("Jacobian at a constant state (numeric)", _coefficients(qs, coefficients)),)
    return JacobianLinearisation(
        schemes, "a constant state, numerically",
        f"nonlinear face without a limiter statement, linearised numerically: central "
        f"differences (step {NUMERIC_STEP:g}) at the constant state q = 0, coefficients "
        f"rounded to rationals (tolerance {NUMERIC_TOLERANCE:g})",
        0, "the linearisation is numeric, so no order is claimed")
