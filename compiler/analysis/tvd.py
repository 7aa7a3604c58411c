"""Total variation diminishing: Harten's incremental form over all ratios.

For an upwind-biased face g = q[0] + B(r, c) (q[1] - q[0]) with
r = (q[0] - q[-1]) / (q[1] - q[0]), one forward-Euler step is
q_j(new) = q_j - C_{j-1/2} (q_j - q_{j-1}) with C = c (1 + B(r_j)/r_j - B(r_{j-1})),
D = 0, and is TVD where 0 <= C <= 1 for every pair of ratios (Harten 1983).
With B = k(c) phi(r), the extremes of C come from inf/sup of phi and phi/r,
computed exactly piece by piece; the Courant set follows from the roots in c of
the two bounding conditions. Linear schemes are TVD exactly where monotone.
"""
from __future__ import annotations

from dataclasses import dataclass

import sympy

from ..symbols import C, R
from . import intervals, piecewise
from .intervals import CourantSet, Span
from .timemethods import method
from .upwind_form import upwind_form


@dataclass(frozen=True)
class TVD:
    holds: bool | None              # None: undecided
    stable_set: CourantSet | None   # Courant numbers where one whole step is TVD
    method: str
    reason: str
    source: str                     # which property of the scheme decided it
    incremental_c: str | None = None  # Harten's C for one forward-Euler step


def undecided(reason: str, source: str = "scheme") -> TVD:
    return TVD(None, None, "undecided", reason, source)


def _inf_sup(parts, divide_by_r: bool = False):
    """(inf, sup) over r != 0 of phi (or phi / r) from phi's pieces."""
    lows, highs = [], []
    for piece, span in parts:
        if span.is_empty or not isinstance(span, sympy.Interval) or span.measure == 0:
            continue
        lo, hi = piecewise.extrema_on(sympy.cancel(piece / R) if divide_by_r else piece, span)
        lows.append(lo)
        highs.append(hi)
    return min(lows, key=piecewise._key), max(highs, key=piecewise._key)


def _times(k, value):
    """k * value with 0 * oo = 0 (the term is absent where k vanishes)."""
    return sympy.Integer(0) if k == 0 else k * value


def analyse_tvd(scheme, monotone_whole_step: CourantSet | None) -> TVD:
    if scheme.correct == "fct":
        return undecided("flux-corrected transport bounds each cell by its neighbours' old and "
                         "low-order values; total variation is not analysed symbolically "
                         "(the harness measures it)", "fct")
    if not scheme.limited:
        if monotone_whole_step is None:
            return undecided("the linear update could not be formed")
        return TVD(not monotone_whole_step.empty, monotone_whole_step,
                   "linear scheme: TVD exactly where monotone (Harten 1983), "
                   "from the coefficients of the whole step", "", _source(scheme))
    form = upwind_form(scheme)
    if form is None:
        return undecided("no split g = q[0] + k(c) phi(r) (q[1] - q[0]) with "
                         "r = (q[0] - q[-1]) / (q[1] - q[0]) was found for this face")
    k, phi = form.k, form.phi
    parts = piecewise.pieces(phi)
    if parts is None:
        return undecided(f"phi(r) = {sympy.sstr(phi)} is not piecewise rational, "
                         "so its extremes were not found exactly")
    (phi_lo, phi_hi), (ratio_lo, ratio_hi) = _inf_sup(parts), _inf_sup(parts, divide_by_r=True)

    def extremes(c_value):
        kv = sympy.nsimplify(k.subs(C, c_value)) if k.has(C) else k
        if kv >= 0:
            low = 1 + _times(kv, ratio_lo) - _times(kv, phi_hi)
            high = 1 + _times(kv, ratio_hi) - _times(kv, phi_lo)
        else:
            low = 1 + _times(kv, ratio_hi) - _times(kv, phi_lo)
            high = 1 + _times(kv, ratio_lo) - _times(kv, phi_hi)
        return c_value * low, c_value * high

    def holds(c_value) -> bool:
        low, high = extremes(c_value)
        if sympy.nan in (low, high):  # oo - oo: C is unbounded both ways
            return False
        return bool(low >= 0) and bool(high <= 1)

    critical = _positive_real(k)
    for kv_sign_inf, kv_sign_sup in ((ratio_lo, phi_hi), (ratio_hi, phi_lo)):
        for a, b in ((kv_sign_inf, kv_sign_sup), (kv_sign_sup, kv_sign_inf)):
            if all(v.is_finite for v in (a, b)):
                critical += _positive_real(C * (1 + k * a - k * b))
                critical += _positive_real(C * (1 + k * a - k * b) - 1)
    fe_set = intervals.decide(critical, holds, method="exact")
    incremental = f"c*(1 + ({sympy.sstr(k)})*(phi(r)/r - phi(r')))" + \
        f", phi(r) = {sympy.sstr(phi)}"
    detail = (f"Harten C = {incremental}; inf/sup of phi = {_t(phi_lo)}, {_t(phi_hi)}; "
              f"of phi/r = {_t(ratio_lo)}, {_t(ratio_hi)} (exact, piece by piece); "
              f"form {form.how}")
    if scheme.time == "euler":
        return TVD(not fe_set.empty, fe_set, "exact: Harten's incremental form over all ratios",
                   detail, _source(scheme), incremental)
    rk = method(scheme.time)
    if rk.ssp_coefficient == 0:
        return undecided(f"{rk.description} is not strong-stability preserving, so the "
                         f"forward-Euler TVD interval ({fe_set.text()}) does not carry over")
    scaled = _scale(fe_set, rk.ssp_coefficient)
    if scaled is None:
        return undecided(f"the forward-Euler TVD set ({fe_set.text()}) does not start at c = 0 "
                         f"and the SSP coefficient is {rk.ssp_coefficient}")
    return TVD(not scaled.empty, scaled,
               f"exact: Harten's incremental form for one forward-Euler step, times the SSP "
               f"coefficient {rk.ssp_coefficient} of {rk.description}",
               detail + f"; forward Euler TVD for {fe_set.text()}", _source(scheme), incremental)


def _scale(fe_set: CourantSet, factor) -> CourantSet | None:
    if factor == 1:
        return fe_set
    main = fe_set.main
    if main is None:
        return fe_set
    if main.lo != 0:
        return None
    return CourantSet((Span(sympy.Integer(0), main.hi * factor, True, main.hi_closed),),
                      fe_set.method, fe_set.tolerance)


def _positive_real(expr: sympy.Expr) -> list:
    """Positive real roots in c (the conditions are low-degree polynomials in c)."""
    expr = sympy.expand(expr)
    if C not in expr.free_symbols:
        return []
    try:
        found = sympy.roots(sympy.Poly(expr, C))
    except (sympy.PolynomialError, NotImplementedError):
        return []
    return [r for r in found if r.is_real and r > 0]


def _t(value) -> str:
    return intervals.exact_text(value)


def _source(scheme) -> str:
    return "scheme"
