"""Total variation diminishing: Harten's incremental form over all ratios.

For an upwind-biased face g = q[0] + B(r, c) (q[1] - q[0]) with
r = (q[0] - q[-1]) / (q[1] - q[0]), one forward-Euler step is
    q_j(new) = q_j - c (1 - B(r_{j-1})) D_{j-1/2} - c B(r_j) D_{j+1/2},
D the differences. The term B(r_j) D_{j+1/2} may be written as (B(r_j)/r_j) D_{j-1/2},
a part of Harten's C_{j-1/2}, or kept on D_{j+1/2} as Harten's D term, which must be
>= 0, so only where B < 0 (and always at r = 0, where D_{j-1/2} = 0). Harten
(1983): the step is TVD when, on every interface, C >= 0, D >= 0 and C + D <= 1,
for every pair of ratios (independent of each other). With P the part kept in C:
    C_{j+1/2} = c (1 + P(r_{j+1}) / r_{j+1} - B(r_j)),  D_{j+1/2} = c (B(r_j) - P(r_j)).
Four ways of splitting are tried (negative parts of B for r < 0 and for r > 0 each in
C or in D); a Courant number is TVD when one of them meets the conditions. The
extremes over r are exact, piece by piece and as functions of c
(compiler/analysis/parametric.py), so B may depend on c in any piecewise-rational
way: a limiter of (r, c) included. Linear schemes are TVD exactly where monotone.
"""
from __future__ import annotations

from dataclasses import dataclass

import sympy

from ..symbols import C, R
from . import parametric
from .intervals import CourantSet, Span
from .parametric import Condition, Extreme
from .timemethods import method
from .upwind_form import upwind_form


@dataclass(frozen=True)
class TVD:
    holds: bool | None              # None: undecided; True: TVD on an interval of c > 0
                                    # (isolated Courant numbers are parts of the set too)
    stable_set: CourantSet | None   # Courant numbers where one whole step is TVD
    method: str
    reason: str
    source: str                     # which property of the scheme decided it
    incremental_c: str | None = None  # Harten's C and D for one forward-Euler step
    outside: str = "no claim"       # what is said outside the set: "not TVD" or "no claim"


def undecided(reason: str, source: str = "scheme") -> TVD:
    return TVD(None, None, "undecided", reason, source)


NEG, POS = (-sympy.oo, 0), (0, sympy.oo)


def _b_over_r(expr, sign):
    return expr / R


def _positive_over_r(expr, sign):
    return (expr if sign > 0 else sympy.Integer(0)) / R


def _b(expr, sign):
    return expr


def _minus_b(expr, sign):
    return -expr


def _d_minus_b(expr, sign):
    """D-part minus B where negative parts go to D: -2B where B < 0, else -B."""
    return -2 * expr if sign < 0 else -expr


def _itself(value):
    return value


def _twice_negated(value):
    return -2 * value


def harten_conditions(neg_in_d: bool, pos_in_d: bool) -> list[Condition]:
    """The three conditions of one way of splitting B(r) D_{j+1/2} between C and D."""
    x = Extreme(False, ((_positive_over_r if neg_in_d else _b_over_r, (NEG,)),
                        (_positive_over_r if pos_in_d else _b_over_r, (POS,))))
    x_sup = Extreme(True, x.parts)
    y = Extreme(True, ((_b, (NEG, POS)),), at_zero=_itself)
    z = Extreme(True, ((_d_minus_b if neg_in_d else _minus_b, (NEG,)),
                       (_d_minus_b if pos_in_d else _minus_b, (POS,))),
                at_zero=_twice_negated)
    at_zero = Extreme(True, (), at_zero=_itself)
    one = sympy.Integer(1)
    return [Condition(((one, y), (-one, x)), one, "C >= 0"),
            Condition(((C, x_sup), (C, z)), 1 - C, "C + D <= 1"),
            Condition(((one, at_zero),), sympy.Integer(0), "D >= 0 at r = 0")]


SPLITS = [(False, False), (True, True), (True, False), (False, True)]


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
                   "from the coefficients of the whole step", "", "scheme", outside="not TVD")
    form = upwind_form(scheme)
    if form is None:
        return undecided("no split g = q[0] + B(r, c) (q[1] - q[0]) with "
                         "r = (q[0] - q[-1]) / (q[1] - q[0]) was found for this face")
    b = form.coefficient
    incremental = (f"C = c*(1 + P(r')/r' - B(r)), D = c*(B(r) - P(r)), "
                   f"B(r) = {sympy.sstr(b)}, P = B or its positive part")
    conditions = [harten_conditions(*split) for split in SPLITS]
    how = ("exact: Harten's incremental form over all pairs of ratios, negative parts of "
           "the correction in C or in D")
    try:
        if form.separable:
            fe_set = parametric.separable_courant_set(form.k, form.phi, conditions, how)
        else:
            fe_set = parametric.courant_set(b, conditions, how)
    except parametric.NotExact:
        return undecided(f"B(r, c) = {sympy.sstr(b)} is not piecewise rational in r with "
                         "breakpoints rational in c, so the extremes of Harten's C and D over "
                         "all ratios were not found exactly")
    detail = (f"Harten C and D for B(r) = {sympy.sstr(b)} (the face is q[0] + B(r) (q[1] - q[0])), "
              f"exact piece by piece in r and c; form {form.how}")
    if scheme.time == "euler":
        return TVD(not fe_set.empty, fe_set,
                   "exact: Harten's incremental form (C and D) over all ratios",
                   detail, "limiter", incremental)
    rk = method(scheme.time)
    if rk.ssp_coefficient == 0:
        return undecided(f"{rk.description} is not strong-stability preserving, so the "
                         f"forward-Euler TVD set ({fe_set.text()}) does not carry over",
                         "limiter")
    scaled = _scale(fe_set, rk.ssp_coefficient)
    if scaled is None:
        return undecided(f"the forward-Euler TVD set ({fe_set.text()}) does not start at c = 0 "
                         f"and the SSP coefficient is {rk.ssp_coefficient}", "limiter")
    return TVD(not scaled.empty, scaled,
               f"exact: Harten's incremental form for one forward-Euler step, times the SSP "
               f"coefficient {rk.ssp_coefficient} of {rk.description}",
               detail + f"; forward Euler TVD for {fe_set.text()}", "limiter", incremental)


def _scale(fe_set: CourantSet, factor) -> CourantSet | None:
    """An SSP method is TVD for c up to its coefficient times the forward-Euler limit,
    from c = 0; islands of forward Euler do not carry over (a stage may take a shorter
    forward-Euler step than the island's)."""
    main = fe_set.main
    if main is None:
        return CourantSet((), fe_set.method, fe_set.tolerance)
    if main.lo != 0:
        return None
    return CourantSet((Span(sympy.Integer(0), main.hi * factor, True, main.hi_closed),),
                      fe_set.method, fe_set.tolerance)
