"""Exact truncated power series in dx with forward-mode derivatives, for evaluating a
face expression at a state without simplifying it symbolically.

A face is evaluated node by node over its sympy tree (shared subexpressions once):
each value is a `Series` sum_i c_i dx^(lo + i) with exact coefficients, kept to a
fixed number of terms past the leading one (a relative precision, so small
quantities keep their digits); alongside it, the gradient with respect to each
q[k] (a `Jet`). abs/min/max/sign choose their branch from the leading terms as
dx -> 0+; where two branches tie to the precision held, both are followed, and
the result lists every consistent combination. Coefficients live in QQ, in QQ(c)
when the Courant number appears, or in sympy's expression domain for irrational
constants (an `Inexact` from a narrower field asks for that).
"""
from __future__ import annotations

import itertools
from dataclasses import dataclass

import sympy

from ..symbols import C, Ratio
from . import budget

MAX_BRANCHES = 256         # combinations of tied branches followed at one state


class Undefined(Exception):
    """The face has no value or derivative at this state (0/0, a root of 0, a c-dependent branch)."""


class TooManyBranches(Undefined):
    """More tied branches than MAX_BRANCHES combinations: not followed."""


class Inexact(Exception):
    """The coefficient field cannot hold a value exactly; retry in a wider field."""


# ---- exact coefficients ------------------------------------------------------------

class Field:
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


class Arithmetic:
    """Series arithmetic over one field, keeping `cap` terms past the leading one
    (a relative precision, like floating point, so that small quantities keep
    their digits)."""

    def __init__(self, field: Field, cap: int):
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


class Evaluator:
    def __init__(self, arithmetic: Arithmetic, leaves: dict, courant):
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
            raise TooManyBranches(f"more than {MAX_BRANCHES} combinations of tied branches "
                                  "of abs/min/max/sign")
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
                    raise TooManyBranches(f"more than {MAX_BRANCHES} combinations of tied branches "
                                  "of abs/min/max/sign")
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
