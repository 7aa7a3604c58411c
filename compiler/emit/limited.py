"""Limiters in a form that stays finite for every finite input.

A limited face multiplies psi(r), r = ratio(a, b), by the slope b. Written as is,
r overflows when b is tiny next to a (a tail of 1e-300 beside a value of 1, or a
subnormal difference), and a rational psi then gives inf/inf = NaN; products
such as r^2 or a*b overflow for large values even when the limited slope is
small. Each limiter call is therefore emitted from a and b, never from r:

Homogeneous form. With A = a sign(b) and B = |b| (so r = A/B, B > 0), every
subexpression e(r) of the limiter body is rewritten as E(A, B) / B^d, pushing
the powers of B into sums, products, min, max, abs and sign (B > 0 keeps their
order); a division stays an IEEE division (`Quotient`, one node, so its parts of
degree 1 are divided before anything multiplies them). Then

    psi(ratio(a, b)) * b = sign(b) * H(A, B),  H = E * B^(1 - d)   (the slope form)
    psi(ratio(a, b))     = E / B^d                                   (the value form)

for every b != 0; where b = 0 the slope form is 0 (a select where H(A, 0) might not
be 0). Van Leer becomes B (A + |A|) / (B + |A|), minmod max(0, min(A, B)): no
division at all. Where H = B * rest, the slope form is b * rest (b exact, no sign to
restore); the sign of b is taken with copysign (two bit operations).

Scaling. When some part of H is of degree 2 or more in (A, B) (or below 0), A and
B are first multiplied by a power of two k chosen from max(|A|, B) (`ScaleDown`:
the larger then lies in [2, 4)), and a slope form without the factor B multiplies
the result by 1/k (`ScaleUp`). Multiplying by a power of two is exact, so in the
normal range the result has the very bits of the unscaled formula; what changes
is that no intermediate overflows, and none underflows to zero while the result is
representable. The value form cannot multiply back (it is of degree 0); it keeps B
at least RATIO_FLOOR (2^-60 in double, 2^-30 in single precision), so a ratio
beyond 2^60 (2^30) is evaluated there: for a limiter with a finite limit psi(inf)
this differs by less than the precision's rounding.

A limiter of (r, c) is rewritten the same way, c a constant of the rewrite; its forms
take c as a third argument. A limiter the rewrite does not cover (a power with a
param exponent it cannot bind) keeps the plain form psi(r).
"""
from __future__ import annotations

from dataclasses import dataclass

import sympy

from ..ir import Scheme
from ..symbols import C, R, Ratio, limiter_calls, limiter_name_of


class ScaleDown(sympy.Function):
    """2^(bias - e) for the biased exponent e of m (clamped to the normal range):
    m * ScaleDown(m) lies in [2, 4) for every normal m > 2^(2 - bias) and below 2 for
    smaller m (zero included); the printers read the exponent field of max(m / 2,
    2^(1 - bias))."""

    nargs = 1
    is_positive = True


class ScaleUp(sympy.Function):
    """1 / ScaleDown(m), also an exact power of two."""

    nargs = 1
    is_positive = True


class UnitSign(sympy.Function):
    """copysign(1, b): 1 or -1 with the sign bit of b (also at b = 0)."""

    nargs = 1
    is_real = True


class Quotient(sympy.Function):
    """x / y with IEEE meaning (a zero divisor gives an infinity the limiter's min or
    max may absorb), kept as one node so that the quotient of two parts of degree 1 is
    taken before anything multiplies it."""

    nargs = 2
    is_real = True


class NonzeroOr(sympy.Function):
    """x where b != 0, else 0 (a select: x need not be finite at b = 0)."""

    nargs = 2
    is_real = True


class RatioFloor(sympy.Symbol):
    """The least B the value form divides by: 2^-60 (double) or 2^-30 (single)."""


RATIO_FLOOR = RatioFloor("ratio_floor", positive=True)
FLOOR_EXPONENT = {"double": 60, "float": 30}


class LimiterFormCall(sympy.Function):
    """A limiter evaluated from (a, b); subclasses per limiter carry its name."""

    limiter_name = ""
    kind = ""
    is_real = True

    def _sympystr(self, printer):
        return f"{self.kind}_{self.limiter_name}({', '.join(printer._print(a) for a in self.args)})"


class LimitedSlope(LimiterFormCall):
    """psi(ratio(a, b)) * b for one limiter psi."""

    kind = "slope"


class LimiterOfRatio(LimiterFormCall):
    """psi(ratio(a, b)) for one limiter psi (b = 1 for a limiter of any argument)."""

    kind = "psi"


_FORMS: dict[tuple[type, str], type] = {}


def form_function(base: type, name: str) -> type:
    """The function class standing for one limiter's slope or value form."""
    key = (base, name)
    if key not in _FORMS:
        _FORMS[key] = type(f"{base.kind}_{name}", (base,), {"limiter_name": name,
                                                            "nargs": (2, 3)})
    return _FORMS[key]


# ---- the homogeneous rewrite -----------------------------------------------------

_A = sympy.Dummy("A", real=True)
_B = sympy.Dummy("B", positive=True)


def homogeneous(psi: sympy.Expr) -> tuple[sympy.Expr, sympy.Expr] | None:
    """(E, d) with psi(A/B) = E(A, B) / B^d for B > 0, divisions as guarded ratios;
    None where the body has something the rewrite does not cover."""
    try:
        return _homogenise(psi)
    except _NotCovered:
        return None


class _NotCovered(Exception):
    pass


def _lift(term: tuple[sympy.Expr, sympy.Expr], degree: sympy.Expr) -> sympy.Expr:
    expr, d = term
    return expr * _B ** (degree - d)


def _homogenise(e: sympy.Expr) -> tuple[sympy.Expr, sympy.Expr]:
    if not e.has(R):
        return e, sympy.Integer(0)
    if e == R:
        return _A, sympy.Integer(1)
    if isinstance(e, sympy.Add):
        terms = [_homogenise(t) for t in e.args]
        degree = max(d for _, d in terms)
        return sympy.Add(*[_lift(t, degree) for t in terms]), degree
    if isinstance(e, sympy.Mul):
        top, bottom, degree = [], [], sympy.Integer(0)
        for factor in e.args:
            base, exponent = factor.as_base_exp()
            if exponent.is_Integer and exponent < 0 and base.has(R):
                expr, d = _homogenise(base ** -exponent)
                bottom.append(expr)
                degree -= d
            else:
                expr, d = _homogenise(factor)
                top.append(expr)
                degree += d
        numerator = sympy.Mul(*top)
        return (Quotient(numerator, sympy.Mul(*bottom)) if bottom else numerator), degree
    if isinstance(e, sympy.Pow):
        base, exponent = e.args
        if not exponent.is_Rational or exponent.has(R):
            raise _NotCovered(e)
        expr, d = _homogenise(base)
        if exponent.is_Integer and exponent < 0:
            return Quotient(sympy.Integer(1), expr ** -exponent), d * exponent
        if exponent.is_Integer:
            return expr ** exponent, d * exponent
        p, q = exponent.p, exponent.q
        lift = next(k for k in range(q) if ((d + k) * p) % q == 0)
        root = (expr * _B ** lift) ** abs(exponent)
        if p < 0:
            return Quotient(sympy.Integer(1), root), (d + lift) * exponent
        return root, (d + lift) * exponent
    if isinstance(e, (sympy.Max, sympy.Min)):
        terms = [_homogenise(t) for t in e.args]
        degree = max(d for _, d in terms)
        return type(e)(*[_lift(t, degree) for t in terms]), degree
    if isinstance(e, sympy.Abs):
        expr, d = _homogenise(e.args[0])
        return sympy.Abs(expr), d
    if isinstance(e, sympy.sign):
        expr, _ = _homogenise(e.args[0])
        return sympy.sign(expr), sympy.Integer(0)
    if isinstance(e, Ratio):
        (x, dx), (y, dy) = _homogenise(e.args[0]), _homogenise(e.args[1])
        return Ratio(x, y), dx - dy
    raise _NotCovered(e)


def needs_scaling(expr: sympy.Expr) -> bool:
    """True unless every subexpression in A and B is of degree 0 or 1 in (A, B): then
    no intermediate is far larger or smaller than the inputs and the result (van
    Leer's B (A + |A|) / (B + |A|) is; van Albada's A^2 + B^2 is not)."""
    return _degree(expr) is None


def _degree(expr: sympy.Expr):
    """The degree of expr in (A, B) when it and all its parts are of degree 0 or 1."""
    if not expr.has(_A, _B):
        return 0
    if expr in (_A, _B):
        return 1
    if isinstance(expr, sympy.sign):
        return 0 if _degree(expr.args[0]) is not None else None
    parts = [_degree(a) for a in expr.args]
    if any(d is None for d in parts):
        return None
    if isinstance(expr, (sympy.Add, sympy.Max, sympy.Min, sympy.Abs)):
        degree = max(parts)
    elif isinstance(expr, sympy.Mul):
        degree = sum(parts)
    elif isinstance(expr, (Ratio, Quotient)):
        degree = parts[0] - parts[1]
    else:  # powers, roots
        return None
    return degree if degree in (0, 1) else None


# ---- function programs -------------------------------------------------------------

A_ARG, B_ARG = sympy.symbols("a b", real=True)


@dataclass(frozen=True)
class LimiterForm:
    """One limiter evaluated from (a, b): named steps, then the result.

    kind "slope": psi(ratio(a, b)) * b; kind "psi": psi(ratio(a, b)).
    """

    name: str
    kind: str
    steps: tuple[tuple[sympy.Symbol, sympy.Expr], ...]
    result: sympy.Expr
    scaled: bool


def _step(name: str, **assumptions) -> sympy.Symbol:
    return sympy.Symbol(name, real=True, **assumptions)


def limiter_form(name: str, psi: sympy.Expr, kind: str) -> LimiterForm | None:
    """The overflow-safe program of psi for one kind, or None where not covered."""
    found = homogeneous(psi)
    if found is None:
        return None
    expr, degree = found
    if kind == "slope":
        return _slope_form(name, expr * _B ** (1 - degree) if degree <= 1
                           else Quotient(expr, _B ** (degree - 1)))
    return _value_form(name, expr * _B ** (-degree) if degree <= 0
                       else Quotient(expr, _B ** degree))


def _slope_form(name: str, body: sympy.Expr) -> LimiterForm:
    """psi(ratio(a, b)) * b = sign(b) H(A, B). Where H = B * rest, that is b * rest:
    no sign to restore and no scale to undo (b is exact). The sign of b is taken with
    copysign (two bit operations); at b = 0, where A = a and B = 0, the result is made
    0 by a select wherever H(A, 0) might not be (a quotient 0/0, a limiter unbounded
    at infinity), as psi(ratio(a, 0)) * 0 = psi(0) * 0 is."""
    factors = sympy.Mul.make_args(body)
    rest = sympy.Mul(*[f for f in factors if f != _B]) if _B in factors else None
    divides = body.has(Quotient) or any(node.is_Pow and node.exp.is_negative
                                        for node in sympy.preorder_traversal(body))
    vanishes = not divides and all(sympy.simplify(body.xreplace({_A: v, _B: 0})) == 0
                                   for v in (1, -1))
    sign_b, top, bottom = _step("sign_b"), _step("top"), _step("bottom", nonnegative=True)
    steps = [(sign_b, UnitSign(B_ARG)), (top, A_ARG * sign_b), (bottom, sympy.Abs(B_ARG))]
    scaled = needs_scaling(body)
    if scaled:
        largest, down = _step("largest", nonnegative=True), _step("down", positive=True)
        new_top, new_bottom = _step("top_scaled"), _step("bottom_scaled", nonnegative=True)
        steps += [(largest, sympy.Max(sympy.Abs(top), bottom)), (down, ScaleDown(largest)),
                  (new_top, top * down), (new_bottom, bottom * down)]
        values = {_A: new_top, _B: new_bottom}
    else:
        values = {_A: top, _B: bottom}
    if rest is not None:
        inner = rest.xreplace(values)
        result = B_ARG * (NonzeroOr(B_ARG, inner) if divides else inner)
    else:
        inner = sign_b * body.xreplace(values)
        if scaled:
            inner = inner * ScaleUp(steps[3][0])
        result = inner if vanishes else NonzeroOr(B_ARG, inner)
    return LimiterForm(name, "slope", tuple(steps), result, scaled)


def _value_form(name: str, body: sympy.Expr) -> LimiterForm:
    """psi(ratio(a, b)) = E(A, B) / B^d, scaled, with B kept at least RATIO_FLOOR."""
    sign_b, top, bottom = _step("sign_b"), _step("top"), _step("bottom", nonnegative=True)
    largest, down = _step("largest", nonnegative=True), _step("down", positive=True)
    new_top, new_bottom = _step("top_scaled"), _step("bottom_scaled", positive=True)
    steps = [(sign_b, sympy.sign(B_ARG)), (top, A_ARG * sign_b), (bottom, sympy.Abs(B_ARG)),
             (largest, sympy.Max(sympy.Abs(top), bottom)), (down, ScaleDown(largest)),
             (new_top, top * down), (new_bottom, sympy.Max(bottom * down, RATIO_FLOOR))]
    return LimiterForm(name, "psi", tuple(steps), body.xreplace({_A: new_top, _B: new_bottom}),
                       True)


# ---- rewriting a face ----------------------------------------------------------------

def limiter_bodies(scheme: Scheme, call: sympy.Expr) -> tuple[sympy.Expr, sympy.Expr]:
    """psi in symbols.R for one call: with params as named constants, and with them bound
    (a param exponent only the bound body can rewrite)."""
    body = scheme.limiter(limiter_name_of(call)).body
    return body, scheme.bound(body)


def _is_slope_product(expr: sympy.Expr, call: sympy.Expr, b: sympy.Expr) -> bool:
    return expr.is_Mul and call in expr.args and b in expr.args


def _slope_products(face: sympy.Expr, call: sympy.Expr, b: sympy.Expr) -> bool:
    return any(_is_slope_product(e, call, b) for e in sympy.preorder_traversal(face))


def _without(product: sympy.Expr, factors) -> sympy.Expr:
    """product with one of each of factors taken out."""
    args = list(product.args)
    for factor in factors:
        args.remove(factor)
    return sympy.Mul(*args)


def safe_limiters(scheme: Scheme, face: sympy.Expr) -> tuple[sympy.Expr, dict]:
    """face with every limiter call replaced by a slope or value form where covered,
    and {(name, kind): LimiterForm} for the forms it uses."""
    forms: dict[tuple[str, str], LimiterForm] = {}

    def form(call, kind):
        name = limiter_name_of(call)
        key = (name, kind)
        if key not in forms:
            body, bound = limiter_bodies(scheme, call)
            built = limiter_form(name, body, kind) or limiter_form(name, bound, kind)
            if built is None:
                return None
            forms[key] = built
        return form_function(LimitedSlope if kind == "slope" else LimiterOfRatio, name)

    for call in limiter_calls(face, scheme.limiter_names):
        argument, extra = call.args[0], call.args[1:]  # extra: (c,) for a limiter of (r, c)
        if extra and extra != (C,):
            continue  # not a call the front end makes: keep the plain form
        a, b = argument.args if isinstance(argument, Ratio) else (argument, sympy.Integer(1))
        if isinstance(argument, Ratio) and _slope_products(face, call, b):
            slope = form(call, "slope")
            if slope is not None:
                # every product call * b becomes slope(a, b); other uses keep the value
                face = face.replace(lambda e: _is_slope_product(e, call, b),
                                    lambda e: _without(e, (call, b)) * slope(a, b, *extra))
        value = form(call, "psi")
        if value is not None:
            face = face.xreplace({call: value(a, b, *extra)})
    used = {(type(f).limiter_name, type(f).kind) for f in face.atoms(LimiterFormCall)}
    return face, {key: forms[key] for key in forms if key in used}
