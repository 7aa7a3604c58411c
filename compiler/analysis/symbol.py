"""Linear schemes behind a Scheme and their von Neumann symbols.

A linear face expression g = sum_k a_k q(k) (a_k may depend on c) gives, with
q(k) -> z^k and z = exp(i theta), the update G(z) as a Laurent polynomial:
forward Euler G = 1 - c (1 - 1/z) g(z); a method-of-lines scheme has the
semi-discrete symbol lambda(z) = -(1 - 1/z) g(z) and G = R(c lambda).
Limited schemes are represented by linear schemes too: the linearisation about
smooth monotone data (limiter value and slope at r = 1) and the two bounding
schemes with the limiter frozen at 0 and at psi(1).
"""
from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy
import sympy

from ..symbols import C, R, Ratio, limiter_calls, limiter_name_of, offset_of
from . import piecewise
from .timemethods import Z, stability_polynomial

S = sympy.Symbol("s", nonnegative=True)
"""sin^2(theta / 2): |G|^2 is a polynomial in it."""

Laurent = dict  # offset m -> coefficient (sympy expression in c)


@dataclass(frozen=True)
class LinearScheme:
    """One linear scheme: a face g = sum a_k q(k) staged by a time method."""

    label: str                                   # what it stands for, for reports
    time: str
    face_coefficients: tuple[tuple[int, sympy.Expr], ...]
    valid_to: sympy.Expr | None = None           # stands for the scheme only for c <= this

    @cached_property
    def face(self) -> Laurent:
        return dict(self.face_coefficients)

    @cached_property
    def semi_discrete(self) -> Laurent:
        """lambda(z) = -(1 - 1/z) g(z): coefficient of z^m is -(a_m - a_{m+1})."""
        return _trim({m: -(self.face.get(m, 0) - self.face.get(m + 1, 0))
                      for m in range(min(self.face) - 1, max(self.face) + 1)}) if self.face else {}

    @cached_property
    def update(self) -> Laurent:
        """Coefficients b_m of q_{j+m} in one whole step: G(z) = sum b_m z^m."""
        try:
            return self._update_by_polynomials()
        except (sympy.PolynomialError, sympy.CoercionFailed):
            pass  # coefficients not polynomial in c over QQ: the general sympy path
        step = {m: C * v for m, v in self.semi_discrete.items()}
        out: Laurent = {0: sympy.Integer(1)}
        poly = sympy.Poly(stability_polynomial(self.time), Z)
        power: Laurent = {0: sympy.Integer(1)}
        for degree in range(1, poly.degree() + 1):
            power = _multiply(power, step)
            weight = poly.coeff_monomial(Z ** degree)
            for m, v in power.items():
                out[m] = out.get(m, 0) + weight * v
        return _trim({m: sympy.expand(v) for m, v in out.items()})

    def _update_by_polynomials(self) -> Laurent:
        """The same sum with QQ[z, c] polynomial arithmetic: lambda(z) z^shift = P(z, c),
        so (c lambda)^k = c^k P^k z^(-k shift)."""
        if not self.semi_discrete:
            return {0: sympy.Integer(1)}
        shift = -min(self.semi_discrete)
        p = sympy.Poly(sum((v * Z ** (m + shift) for m, v in self.semi_discrete.items()),
                           sympy.Integer(0)), Z, C, domain="QQ")
        r = sympy.Poly(stability_polynomial(self.time), Z)
        degree = r.degree()
        total = sympy.Poly(Z ** (degree * shift), Z, C, domain="QQ")
        power = sympy.Poly(1, Z, C, domain="QQ")
        c_poly = sympy.Poly(C, Z, C, domain="QQ")
        for k in range(1, degree + 1):
            power = power * p * c_poly
            weight = r.coeff_monomial(Z ** k)
            total += power * weight * sympy.Poly(Z ** ((degree - k) * shift), Z, C, domain="QQ")
        out: Laurent = {}
        for (z_power, c_power), value in total.terms():
            m = z_power - degree * shift
            out[m] = out.get(m, 0) + sympy.Rational(value) * C ** c_power
        return _trim(out)

    @cached_property
    def amplification(self) -> sympy.Expr:
        """G(c, theta) as an expression in z = exp(i theta)."""
        return sum((v * Z ** m for m, v in sorted(self.update.items())), sympy.Integer(0))

    @cached_property
    def abs_squared(self) -> sympy.Expr:
        """|G|^2 as a polynomial in s = sin^2(theta/2) (coefficients in c)."""
        b = self.update
        try:
            return _chebyshev_sum_fast(_autocorrelation_fast(b))
        except (sympy.PolynomialError, sympy.CoercionFailed):
            pass  # coefficients not polynomial in c over QQ: the general sympy path
        # H = G(z) G(1/z) is symmetric in z <-> 1/z: h_0 + sum_k h_k (z^k + z^-k).
        h: Laurent = {}
        for m, v in b.items():
            for n, w in b.items():
                h[m - n] = h.get(m - n, 0) + v * w
        cos_theta = 1 - 2 * S
        total = h.get(0, 0)
        for k, v in h.items():
            if k > 0:
                total += 2 * v * sympy.chebyshevt(k, cos_theta)
        return sympy.expand(total)

    def numeric(self):
        return self._numeric

    @cached_property
    def _numeric(self):
        """A fast numpy G: (cs, thetas) -> array of shape (len(cs), len(thetas)).

        Evaluates each coefficient b_m(c) once per c and sums b_m(c) exp(i m theta)
        as a matrix product.
        """
        offsets = sorted(self.update)
        coefficient = [_numpy_function_of_c(self.update[m]) for m in offsets]
        exponents = numpy.array(offsets, dtype=float)

        def g(cs, thetas):
            cs = numpy.atleast_1d(numpy.asarray(cs, dtype=float))
            thetas = numpy.atleast_1d(numpy.asarray(thetas, dtype=float))
            values = numpy.array([numpy.broadcast_to(f(cs), cs.shape) for f in coefficient]).T
            waves = numpy.exp(1j * numpy.outer(exponents, thetas))
            return values @ waves
        return g

    def numeric_direct(self):
        """G(c, theta) like `numeric`, but from the face coefficients and R(z) alone, in
        floating point (no exact update is formed): the budget's fallback."""
        offsets = sorted(self.face)
        coefficient = [_numpy_function_of_c(self.face[k]) for k in offsets]
        r = [float(v) for v in sympy.Poly(stability_polynomial(self.time), Z).all_coeffs()]
        exponents = numpy.array(offsets, dtype=float)

        def g(cs, thetas):
            cs = numpy.atleast_1d(numpy.asarray(cs, dtype=float))
            thetas = numpy.atleast_1d(numpy.asarray(thetas, dtype=float))
            values = numpy.array([numpy.broadcast_to(f(cs), cs.shape) for f in coefficient]).T
            face = values @ numpy.exp(1j * numpy.outer(exponents, thetas))
            z = cs[:, None] * -(1 - numpy.exp(-1j * thetas))[None, :] * face
            out = numpy.zeros_like(z)
            for weight in r:  # Horner
                out = out * z + weight
            return out
        return g

    def lambdified(self):
        """A numpy function G(c, theta) for plots and numeric scans."""
        theta = sympy.Symbol("theta", real=True)
        expr = sum((v * sympy.exp(sympy.I * m * theta) for m, v in self.update.items()),
                   sympy.Integer(0))
        return sympy.lambdify((C, theta), expr.evalf(), modules="numpy")  # floats, not big ints


def _numpy_function_of_c(value: sympy.Expr):
    """value(c) for numpy arrays: Horner on the coefficients when it is a polynomial."""
    try:
        coefficients = [float(v) for v in sympy.Poly(value, C).all_coeffs()]
    except (sympy.PolynomialError, TypeError):
        return sympy.lambdify(C, value.evalf(), modules="numpy")
    return lambda cs: numpy.polyval(coefficients, cs)


def _chebyshev_sum_fast(h: Laurent) -> sympy.Expr:
    """h_0 + sum_k 2 h_k T_k(1 - 2s) with polynomial arithmetic over QQ[s, c].

    Works in a polynomial ring (no expression expansion), with T_k from the
    recurrence T_{k+1} = 2 x T_k - T_{k-1}, x = 1 - 2s.
    """
    ring, s_, c_ = sympy.polys.rings.ring("s, c", sympy.QQ)

    def element(value):
        poly = sympy.Poly(value, S, C, domain="QQ")  # raises for non-polynomial values
        return ring.from_dict({m: v for m, v in poly.as_dict().items()})

    x = 1 - 2 * s_
    chebyshev = [ring.one, x]
    top = max(h)
    while len(chebyshev) <= top:
        chebyshev.append(2 * x * chebyshev[-1] - chebyshev[-2])
    total = element(h.get(0, 0))
    for k, v in h.items():
        if k > 0:
            total += 2 * element(v) * chebyshev[k]
    return total.as_expr(S, C)


def _autocorrelation_fast(b: Laurent) -> Laurent:
    """h_k = sum_m b_m b_(m-k) for k >= 0, in QQ[c] (raises when b is not polynomial in c)."""
    polys = {m: sympy.Poly(v, C, domain="QQ") for m, v in b.items()}
    h: Laurent = {}
    for m, v in polys.items():
        for n, w in polys.items():
            if m >= n:
                h[m - n] = h.get(m - n, 0) + v * w
    return {k: v.as_expr() for k, v in h.items()}


def _trim(poly: Laurent) -> Laurent:
    return {m: v for m, v in poly.items() if not (v == 0 or sympy.expand(v) == 0)}


def _multiply(a: Laurent, b: Laurent) -> Laurent:
    out: Laurent = {}
    for m, v in a.items():
        for n, w in b.items():
            out[m + n] = out.get(m + n, 0) + v * w
    return {m: sympy.expand(v) for m, v in out.items()}


# ---- from a face expression to linear schemes ---------------------------------

def linear_coefficients(g: sympy.Expr) -> tuple[tuple[int, sympy.Expr], ...] | None:
    """((k, a_k), ...) when g is linear and homogeneous in the q(k), else None."""
    qs = sorted((s for s in g.free_symbols if offset_of(s) is not None), key=offset_of)
    if not qs:
        return None if g != 0 else ()
    if g.has(Ratio) or any(isinstance(a, sympy.core.function.AppliedUndef)
                           for a in g.atoms(sympy.Function)):
        return None
    coefficients = []
    for qk in qs:
        a = sympy.diff(g, qk)
        if any(a.has(other) for other in qs):
            return None
        coefficients.append((offset_of(qk), sympy.cancel(a)))
    remainder = sympy.expand(g - sum(a * qk for qk, (_, a) in zip(qs, coefficients)))
    if remainder != 0 and sympy.simplify(remainder) != 0:
        return None
    return tuple((k, a) for k, a in coefficients if a != 0)


@dataclass(frozen=True)
class Linearisation:
    """The linear schemes standing for one Scheme, with what each means."""

    smooth: tuple[LinearScheme, ...]   # the scheme itself, or its linearisations
    bounding: tuple[LinearScheme, ...] # limiter frozen at 0 and at psi(1); empty otherwise
    exact: bool                        # True when the scheme is itself linear
    note: str                          # how the linear schemes were obtained, or why none
    curved: tuple[str, ...] = ()       # limiters (or phi) with nonzero curvature at r = 1
    source: str = "limiter"            # "scheme" (linear), "limiter" (at r = 1) or
                                       # "linearisation" (Jacobian of a face without a limiter)
    order_cap: int | None = None       # Jacobian linearisations: order claimed up to this
    cap_note: str = ""                 # (0: no order claimed); why
    where: str = ""                    # Jacobian linearisations: "a constant state",
                                       # "smooth monotone data" or "a constant state,
                                       # numerically"

    @property
    def basis(self) -> str:
        """What the stability verdict of the linear schemes stands for, in words."""
        if self.exact:
            return "the scheme's own amplification factor"
        if self.source == "linearisation":
            return ("the linearisation of the nonlinear face (" + "; ".join(
                ls.label for ls in self.smooth) + "); the interval is their common one")
        return ("every linear scheme the limited scheme reduces to (linearised at r = 1 and "
                "limiter frozen at 0 and at psi(1)); the interval is their common one")


def linearise(scheme, face: sympy.Expr | None = None) -> Linearisation:
    """Linear schemes for the face: itself when linear; for named limiters and faces of
    the form q[0] + k(c) phi(r) (q[1] - q[0]), at r = 1 with bounding schemes; for any
    other nonlinear face, its Jacobian (compiler/analysis/jacobian.py)."""
    g = scheme.bound(scheme.face if face is None else face)
    direct = linear_coefficients(g)
    if direct is not None:
        return Linearisation((LinearScheme("the scheme", scheme.time, direct),), (), True,
                             "the face flux is linear in q", source="scheme")
    calls = limiter_calls(g, scheme.limiter_names)
    if not calls:
        implicit = _linearise_upwind_form(scheme) if face is None else None
        if implicit is not None:
            return implicit
        return _by_jacobian(scheme, g, "")
    by_limiter = _linearise_limiters(scheme, g, calls)
    if by_limiter.smooth:
        return by_limiter
    return _by_jacobian(scheme, scheme.expand_limiters(g), by_limiter.note)


def _by_jacobian(scheme, g: sympy.Expr, before: str) -> Linearisation:
    from .jacobian import jacobian_linearisation

    found = jacobian_linearisation(g)
    return _from_jacobian(scheme, found, before, "no linearisation was found: the face is "
                          "undefined or unbounded at constant states and on smooth monotone data")


def _from_jacobian(scheme, found, before: str, why_none: str) -> Linearisation:
    prefix = f"{before}; " if before else ""
    if found is None:
        return Linearisation((), (), False, prefix + why_none, source="linearisation")
    smooth = tuple(LinearScheme(label, scheme.time, coefficients)
                   for label, coefficients in found.schemes)
    return Linearisation(smooth, (), False, prefix + found.note, source="linearisation",
                         order_cap=found.order_cap, cap_note=found.cap_note, where=found.where)


def linearise_numerically(scheme) -> Linearisation:
    """The budget's fallback: a numeric Jacobian at a constant state (faces free of c)."""
    from .jacobian import numeric_linearisation

    g = scheme.expand_limiters(scheme.bound(scheme.face))
    return _from_jacobian(scheme, numeric_linearisation(g), "",
                          "budget exceeded, and the numeric Jacobian was not found (the face "
                          "depends on c, or is not differentiable at a constant state)")


def _linearise_limiters(scheme, g: sympy.Expr, calls) -> Linearisation:
    smooth, bounding, notes = [], [], []
    # Smooth monotone data: r = 1 + O(dx); psi(r) ~ psi(1) + psi'(1) (r - 1).
    slopes = {}
    for call in calls:
        body = scheme.bound(scheme.limiter(limiter_name_of(call)).body)
        slopes[call] = limiter_slopes(body)
    sides = [("right", 1), ("left", 0)]
    seen = set()
    # a limiter of (r, c) is linearised for 0 < c <= 1 (limiters.REGION_TOP)
    courant_limited = any(scheme.limiter(limiter_name_of(call)).courant for call in calls)
    valid_to = sympy.Integer(1) if courant_limited else None
    courant_note = ", for 0 < c <= 1" if courant_limited else ""
    for side_name, index in sides:
        subs = {}
        ok = True
        for call, (value, left, right) in slopes.items():
            slope = right if index == 1 else left
            if value is None or slope is None:
                ok = False
                break
            subs[call] = value + slope * (call.args[0] - 1)
        if not ok:
            notes.append("a limiter has no value or one-sided slope at r = 1")
            break
        lin = _ratios_as_quotients(g.xreplace(subs))
        coefficients = linear_coefficients(sympy.cancel(lin)) if lin is not None else None
        if coefficients is None:
            notes.append("the face is not linear in q after linearising at r = 1")
            break
        key = tuple((k, sympy.cancel(a)) for k, a in coefficients)
        if key in seen:
            continue
        seen.add(key)
        label = (f"linearised at r = 1 ({side_name} slope)" if any(
            left != right for _, left, right in slopes.values()) else "linearised at r = 1")
        smooth.append(LinearScheme(label + courant_note, scheme.time, coefficients, valid_to))
    for label, pick in (("limiter frozen at 0", lambda v: sympy.Integer(0)),
                        ("limiter frozen at psi(1)", lambda v: v)):
        subs = {call: pick(slopes[call][0]) for call in calls}
        if any(v is None for v in subs.values()):
            continue
        frozen = g.xreplace(subs).replace(Ratio, lambda a, b: sympy.Integer(1))
        coefficients = linear_coefficients(frozen)
        if coefficients is not None:
            bounding.append(LinearScheme(label + courant_note, scheme.time, coefficients,
                                         valid_to))
    note = "; ".join(notes) if notes else (
        "limiters linearised at r = 1 (value and slope) for smooth monotone data; "
        "bounding schemes with each limiter frozen at 0 and at psi(1)")
    curved = tuple(limiter_name_of(call) for call in calls
                   if any(v is None or v != 0 for v in limiter_curvature(
                       scheme.bound(scheme.limiter(limiter_name_of(call)).body))))
    return Linearisation(tuple(smooth), tuple(bounding), False, note, tuple(dict.fromkeys(curved)))


def _linearise_upwind_form(scheme) -> Linearisation | None:
    """Linear schemes for a face q[0] + k(c) phi(r) (q[1] - q[0]) written without a named limiter."""
    from .upwind_form import upwind_form

    form = upwind_form(scheme)
    if form is None:
        return None
    value, left, right = limiter_slopes(form.phi)
    if value is None or left is None or right is None:
        return None
    q0, q1, qm = (sympy.Symbol(n, real=True) for n in ("q_0", "q_1", "q_m1"))
    jump, behind = q1 - q0, q0 - qm
    smooth, seen = [], set()
    for label, slope in (("right slope", right), ("left slope", left)):
        face = q0 + form.k * (value * jump + slope * (behind - jump))
        coefficients = linear_coefficients(sympy.expand(face))
        if coefficients is None or coefficients in seen:
            continue
        seen.add(coefficients)
        smooth.append(LinearScheme(f"linearised at r = 1 ({label})" if left != right
                                   else "linearised at r = 1", scheme.time, coefficients))
    bounding = [LinearScheme("phi frozen at 0", scheme.time, ((0, sympy.Integer(1)),)),
                LinearScheme("phi frozen at phi(1)", scheme.time,
                             linear_coefficients(sympy.expand(q0 + form.k * value * jump)))]
    curved = ("phi",) if any(v is None or v != 0 for v in limiter_curvature(form.phi)) else ()
    return Linearisation(tuple(smooth), tuple(bounding), False,
                         f"nonlinear face of the form q[0] + k(c) phi(r) (q[1] - q[0]) "
                         f"({form.how}), linearised at r = 1 (value and slope of phi); bounding "
                         f"schemes with phi frozen at 0 and at phi(1)", curved)


def _ratios_as_quotients(expr: sympy.Expr) -> sympy.Expr | None:
    try:
        return sympy.cancel(expr.replace(Ratio, lambda a, b: a / b))
    except sympy.PolynomialError:
        return None


def limiter_slopes(body: sympy.Expr):
    """(psi(1), left slope, right slope) at r = 1, exact; None where undefined.

    For a limiter of (r, c), expressions in c that hold for every 0 < c < 1."""
    if C in body.free_symbols:
        from .limiters import courant_value_at_one
        return courant_value_at_one(body)
    value = body.subs(R, 1)
    value = sympy.simplify(value) if value.is_number else None
    parts = piecewise.pieces(body)
    if parts is not None:
        left_piece = piecewise.piece_at(parts, sympy.Integer(1), -1)
        right_piece = piecewise.piece_at(parts, sympy.Integer(1), +1)
        left = sympy.diff(left_piece, R).subs(R, 1) if left_piece is not None else None
        right = sympy.diff(right_piece, R).subs(R, 1) if right_piece is not None else None
        return value, left, right
    try:
        slope = sympy.diff(body, R).subs(R, 1)
        slope = slope if slope.is_number and slope.is_finite else None
    except Exception:  # a body sympy cannot differentiate: no slope, the caller says so
        slope = None
    return value, slope, slope


def limiter_curvature(body: sympy.Expr) -> tuple[sympy.Expr | None, sympy.Expr | None]:
    """One-sided second derivatives at r = 1 (None where unknown)."""
    if C in body.free_symbols:
        from .limiters import courant_curvature_at_one
        return courant_curvature_at_one(body)
    parts = piecewise.pieces(body)
    if parts is None:
        return None, None
    out = []
    for side in (-1, 1):
        piece = piecewise.piece_at(parts, sympy.Integer(1), side)
        out.append(None if piece is None else sympy.diff(piece, R, 2).subs(R, 1))
    return tuple(out)
