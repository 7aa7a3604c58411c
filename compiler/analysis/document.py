"""The JSON document of `fluxloom check --json`, built from an Analysis.

Numbers are JSON numbers; each exact value sits beside its number as a string
(`courant_max` and `courant_max_exact`). An unbounded end is null with exact
form "oo". Every verdict says which property of the scheme it comes from
("scheme", "clip", "fct", "limiter") and what decided it.
"""
from __future__ import annotations

import sympy

from ..emit.exchange import exchange_schedule
from . import intervals
from .intervals import CourantSet, Span
from .stability import kind_of
from .limiters import range_text
from .wording import r_set_text
from .timemethods import imaginary_axis_limit, method, stability_polynomial

SCHEMA_VERSION = 1


def _num(value):
    if value is None or getattr(value, "free_symbols", None):
        return None  # unknown, or a function of c
    if value == sympy.oo or value == -sympy.oo:
        return None
    return float(sympy.N(value, 17))


def _exact(value):
    """The exact form as text; null for a value known only numerically (a float)."""
    if value is None or (isinstance(value, sympy.Basic) and value.has(sympy.Float)):
        return None
    return intervals.exact_text(value)


def _span(span: Span | None) -> dict:
    if span is None:
        return {"courant_min": None, "courant_min_exact": None,
                "courant_max": None, "courant_max_exact": None}
    return {"courant_min": _num(span.lo), "courant_min_exact": _exact(span.lo),
            "courant_max": _num(span.hi), "courant_max_exact": _exact(span.hi)}


def _set(cset: CourantSet | None, leading: bool = True) -> dict:
    """courant_min/max of the interval nearest c = 0 (leading=True: where there is none,
    the first isolated point c > 0), every other part in islands."""
    if cset is None:
        return {**_span(None), "islands": [], "set": None, "method": None, "tolerance": None}
    first = cset.leading if leading else cset.main
    rest = cset.others if leading else cset.islands
    return {**_span(first), "islands": [_span(p) for p in rest],
            "set": cset.text(), "method": cset.method, "tolerance": cset.tolerance}


def _r_end(value):
    return None if value in (sympy.oo, -sympy.oo) else float(sympy.N(value, 17))


def _failure(failure) -> dict:
    """A limiter failure: the property, the range of r where it fails (readable and numeric)."""
    where = failure.where
    return {"property": failure.property, "r": r_set_text(where),
            "r_min": _r_end(where.inf), "r_max": _r_end(where.sup), "detail": failure.detail}


def _terms(terms) -> list[dict]:
    return [{"derivative": t.derivative_name, "derivative_order": t.derivative,
             "coefficient": t.coefficient_text} for t in terms]


def time_method_document(name: str) -> dict:
    """The time method's facts, each derived from its registry table."""
    m = method(name)
    return {"name": name, "description": m.description, "stages": m.stages,
            "order": m.order, "linear_order": m.linear_order,
            "ssp_coefficient": _num(m.ssp_coefficient),
            "ssp_coefficient_exact": _exact(m.ssp_coefficient)}


def analysis_document(a) -> dict:
    s = a.scheme
    lin = a.linearisation
    doc: dict = {"schema": SCHEMA_VERSION, "scheme": s.name, "about": s.about, "time": s.time,
                 "halo": s.stencil_reach, "offsets": list(s.offsets), "fingerprint": s.fingerprint,
                 "params": {p.name: {"value": _num(p.value), "exact": _exact(p.value)}
                            for p in s.params},
                 "courant": a.courant, "linear": lin.exact, "linearisation": lin.note,
                 "linearised_at": lin.where or None}
    doc["time_method"] = time_method_document(s.time)
    doc["exchange"] = exchange_schedule(s).to_json()  # the kernel's, for decomposed hosts
    undecided: list[str] = []

    # consistency and order
    doc["consistent"] = a.consistent
    order = a.order
    notes = [c.note for c in a.consistency if c.note]
    if not lin.exact and lin.source == "linearisation" and lin.smooth:
        notes.append(f"order of the linearisation (at {lin.where}), for smooth data; near "
                     "extrema and discontinuities the nonlinear face may act differently")
    elif not lin.exact and lin.source == "limiter":
        notes.append("order in smooth monotone regions (limiter linearised at r = 1); it drops "
                     "to first order or below at extrema, where the limiter switches off")
    if a.order_cap_note:
        notes.append(a.order_cap_note)
    if s.correct == "fct":
        notes.append("order of the flux in smooth regions; it drops where the FCT correction bites")
    if s.clip is not None:
        notes.append("the scheme's own order where the clamp is inactive")
    if order["at_courant"] is not None and order["overall"] is not None \
            and order["at_courant"] > order["overall"]:
        notes.append(f"order {order['at_courant']} at c = {a.courant:g}: the leading error "
                     "term vanishes there")
    doc["order"] = {**order, "note": "; ".join(dict.fromkeys(notes))}
    first = a.consistency[0] if a.consistency else None
    doc["modified_equation"] = _terms(first.terms) if first else []
    doc["modified_equation_form"] = "q_t + u q_x = sum of coefficient * derivative (u > 0, c = u dt/dx)"
    doc["modified_equation_by_scheme"] = [
        {"label": c.label, "consistent": c.consistent,
         "order": {"space": c.order_space, "time": c.order_time, "overall": c.order_overall},
         "terms": _terms(c.terms), "semi_discrete_terms": _terms(c.spatial_terms)}
        for c in a.consistency]
    if not a.consistency:
        undecided.append(_over(a, "consistency") or f"consistency: {lin.note}")

    # stability: the scheme's own verdict, then the linear stand-ins
    span = a.stable_interval
    scheme_set = a.stable_set
    every = [st.stable for st in a.stability]
    claim = a.stability_claim
    if a.small_data:
        basis, source = ("small perturbations of a constant state, where the face is its "
                         "Jacobian linearisation (von Neumann, exact for that linearisation); "
                         "larger data, where the weights or clamps act, are not covered"), \
            "linearisation"
    elif claim == "exact":
        basis, source = "the scheme's own amplification factor (von Neumann, exact)", "scheme"
        if s.clip is not None:
            basis += "; the clamp only acts at the bounds and keeps values in them regardless"
    elif s.correct == "fct":
        basis, source = ("bounded: each cell stays within its neighbours' old and low-order "
                         "values where the low-order step is monotone (Zalesak 1979); the "
                         "linear stand-ins are the flux alone and the low flux alone"), "fct"
    else:
        stand_in_words = ("the linearisation of the nonlinear face" if lin.source == "linearisation"
                          else "the linear stand-ins (linearised at r = 1, limiter frozen at 0 "
                               "and at psi(1))")
        basis, source = ("bounded where one step is TVD (see tvd): total variation, and with it "
                         f"every value, stays bounded there; {stand_in_words}: reported under "
                         "stand_ins, as stand-ins, not as the scheme's verdict"), lin.source
    stand_ins = a.stand_in_set
    exact = all(cs.tolerance is None for cs in every)
    kind = a.stability_kind if a.stability else None
    doc["stability"] = {
        "kind": kind, **_set(scheme_set, leading=False),
        "outside": "unstable" if claim == "exact" else "no claim",
        "method": ("; ".join(dict.fromkeys(cs.method for cs in every)) or None) if claim == "exact"
        else (scheme_set.method if scheme_set is not None else None),
        "tolerance": None if exact else max(cs.tolerance for cs in every if cs.tolerance),
        "basis": basis,
        "source": source,
        "at_courant": {"courant": a.courant, "courant_exact": _exact(a.courant_exact),
                       "stable": a.stable_at(a.courant_exact)},
        "stand_ins": None if (lin.exact and s.correct != "fct") else {
            "kind": kind_of(stand_ins) if stand_ins is not None else None,
            **_set(stand_ins, leading=False),
            "note": "Courant numbers where every linear stand-in is stable; the scheme itself "
                    "is nonlinear, so this is not its verdict"},
        "schemes": [{"label": "flux alone" if (s.correct == "fct" and st.label == "the scheme")
                     else st.label, "kind": st.kind, "amplification_z": st.amplification,
                     "abs_squared_s": st.abs_squared, "semi_discrete_z": st.semi_discrete,
                     **_set(st.stable, leading=False)} for st in a.stability],
        "variables": "z = exp(i theta), s = sin(theta/2)^2, theta = k dx",
    }
    if s.time != "euler":
        limit = imaginary_axis_limit(s.time)
        doc["stability"]["time_method"] = {
            **doc["time_method"],
            "stability_polynomial": sympy.sstr(stability_polynomial(s.time)),
            "imaginary_axis_limit": _num(limit) if limit != 0 else 0.0,
            "imaginary_axis_limit_exact": _exact(limit)}
    if not a.stability:
        undecided.append(_over(a, "stability") or f"stability: {lin.note}")
    elif kind is None:
        proven = f" (only at {scheme_set.text()})" if scheme_set is not None else ""
        undecided.append("stability: " + (f"the scheme is nonlinear and one step is shown TVD "
                                          f"on no interval of Courant numbers{proven} (see "
                                          "tvd); its linear stand-ins are under stand_ins"
                                          if s.correct != "fct" else
                                          "the low-order step is monotone on no interval"))

    # conservation
    doc["conservative"] = a.conservation.conservative
    if a.conservation.conservative is None:
        undecided.append(f"conservation: {a.conservation.reason}")
    doc["conservation"] = {"reason": a.conservation.reason, "source": a.conservation.source}

    # convergence (Lax equivalence: linear schemes only)
    conv = {"holds": None, **_span(None), "order": None, "reason": "", "source": "scheme"}
    if not lin.exact or s.clip is not None or s.correct == "fct":
        why = ("post-step clamp makes the scheme nonlinear" if s.clip is not None else
               "flux-corrected transport is nonlinear" if s.correct == "fct" else
               "the scheme is nonlinear (limited)" if lin.source == "limiter" else
               "the face is nonlinear in q")
        conv["reason"] = (f"{why}; the Lax equivalence theorem covers linear schemes "
                          "only (the harness measures convergence)")
        conv["source"] = "clip" if s.clip is not None else ("fct" if s.correct == "fct" else lin.source)
        undecided.append("convergence: " + why)
    elif not a.consistent:
        conv.update(holds=False, reason="not consistent, so not convergent")
    elif scheme_set is None or not scheme_set.any_positive:
        conv.update(holds=False, reason="consistent but stable at no Courant number c > 0, so "
                    "by the Lax equivalence theorem it does not converge")
    else:
        where = scheme_set.text()
        conv.update(**_set(scheme_set, leading=False), order=order["overall"])
        if scheme_set.main is not None:
            conv.update(holds=True, reason=f"consistent and stable for {where}, hence "
                        f"convergent there (Lax equivalence theorem, refining at a fixed Courant "
                        f"number) with order {order['overall']}")
        else:
            conv.update(holds=False, reason=f"consistent but stable on no interval of Courant "
                        f"numbers; at {where} it converges (Lax equivalence theorem at that "
                        "fixed Courant number), nowhere else")
        for key in ("set", "tolerance", "method"):
            conv.pop(key, None)
    conv.setdefault("islands", [])
    doc["convergent"] = conv

    # monotonicity
    mono = {"holds": None, **_span(None), "islands": [], "coefficients": {}, "method": None,
            "reason": "", "source": "scheme", "bounding": []}
    if s.correct == "fct":
        mono["reason"] = ("flux-corrected transport is nonlinear, so the coefficient test does "
                          "not apply; it is bounded and free of new extrema where its low flux is "
                          "monotone (see bounds)")
        mono["bounding"] = [{"label": m.label if m.label.startswith("low flux")
                             else f"flux alone ({m.label})",
                             "holds": m.holds, **_set(m.monotone, leading=False)}
                            for m in a.monotone]
        undecided.append("monotone: flux-corrected transport (see bounds)")
    elif lin.exact and a.exceeded("monotone"):
        mono["reason"] = _over(a, "monotone")
        undecided.append(mono["reason"])
    elif lin.exact and a.monotone:
        m0 = a.monotone[0]
        mono.update(holds=m0.holds, **_set(m0.monotone, leading=False))
        mono.pop("set", None)
        mono.pop("tolerance", None)
        mono["coefficients"] = {str(k): sympy.sstr(v) for k, v in m0.coefficients}
        mono["reason"] = (f"every update coefficient is >= 0 for {m0.monotone.text()}"
                          if m0.monotone.any_positive else
                          "some update coefficient is negative for every c > 0")
    else:
        mono["reason"] = ("the coefficient test applies to linear schemes; a limited "
                          "scheme is judged by TVD (see tvd)" if lin.source == "limiter" else
                          "the coefficient test applies to linear schemes; `bounding` gives it "
                          "for each linear scheme standing for this nonlinear one")
        mono["bounding"] = [{"label": m.label, "holds": m.holds,
                             **_set(m.monotone, leading=False)} for m in a.monotone]
        mono["source"] = lin.source
        undecided.append("monotone: nonlinear scheme")
    if s.clip is not None and mono["holds"] is not None:
        mono["reason"] += "; the clamp is pointwise and non-decreasing, so it keeps this verdict"
    if s.correct == "fct":
        mono["source"] = "fct"
    doc["monotone"] = mono

    # limiters
    doc["limiters"] = {}
    for lim in a.limiters:
        doc["limiters"][lim.name] = {
            "psi": lim.body, "arguments": ["r", "c"] if lim.courant else ["r"],
            "psi_at_1": _num(lim.psi_at_1), "psi_at_1_exact": _exact(lim.psi_at_1),
            "slope_at_1": {"left": _num(lim.slope_left), "right": _num(lim.slope_right),
                           "left_exact": _exact(lim.slope_left),
                           "right_exact": _exact(lim.slope_right)},
            "sweby_tvd": lim.sweby_tvd, "second_order_region": lim.second_order_region,
            "symmetric": lim.symmetric, "sup_psi": _num(lim.sup_psi),
            "sup_psi_exact": _exact(lim.sup_psi), "sup_psi_over_r": _num(lim.sup_psi_over_r),
            "sup_psi_over_r_exact": _exact(lim.sup_psi_over_r),
            "tvd_courant": _set(lim.tvd_courant, leading=False), "second_order_courant":
                _set(lim.second_order_courant, leading=False),
            "method": lim.method, "why_not": list(lim.why),
            "failures": [_failure(f) for f in lim.failures],
            "courant_failures": [{"property": f.property, "detail": f.detail,
                                  "c": " and ".join(range_text(w, "c") for w in f.where),
                                  "ranges": [{**_span(w), "lo_closed": w.lo_closed,
                                              "hi_closed": w.hi_closed} for w in f.where],
                                  "text": f.text()} for f in lim.courant_failures]}

    # TVD
    t = a.tvd
    tvd = {"holds": t.holds, **_set(t.stable_set, leading=False), "method": t.method,
           "reason": t.reason,
           "source": t.source, "harten_c": t.incremental_c,
           "outside": t.outside if t.holds is not None else None}
    tvd.pop("tolerance", None)
    if s.clip is not None and t.holds is not None:
        tvd["reason"] = "; ".join(filter(None, [tvd["reason"], "the clamp is pointwise, non-decreasing and 1-Lipschitz, so it "
                          "does not raise total variation"]))
    if t.holds is None:
        undecided.append("tvd: " + t.reason)
    doc["tvd"] = tvd

    # dispersion
    if a.dispersion is not None:
        doc["dispersion"] = {
            "label": a.dispersion.label, "courant": a.dispersion.courant,
            "stable_at_courant": a.stable_at(a.courant_exact),
            "rows": [{"cells_per_wavelength": r.cells_per_wavelength, "theta": r.theta,
                      "amplitude_per_step": r.amplitude_per_step,
                      "phase_error_per_step": r.phase_error_per_step,
                      "relative_phase_speed": r.relative_phase_speed,
                      "amplitude_per_wavelength": r.amplitude_per_wavelength,
                      "phase_error_per_wavelength": r.phase_error_per_wavelength}
                     for r in a.dispersion.rows]}
    else:
        doc["dispersion"] = None

    # bounds
    b = a.bounds
    if b is None:
        doc["bounds"] = None
    else:
        doc["bounds"] = {"kind": b.kind, "bounded": b.bounded, "low": _num(b.low),
                         "low_exact": _exact(b.low), "high": _num(b.high), "high_exact": _exact(b.high),
                         **({"bounded_for": _set(b.bounded_set)} if b.bounded_set else {}),
                         "new_extrema": b.new_extrema, "order": b.order, "reason": b.reason,
                         "low_flux_coefficients": {str(k): sympy.sstr(v)
                                                   for k, v in b.low_flux_coefficients},
                         "source": b.kind}
    if b is None:
        doc["bounded"] = {"holds": None, **_span(None), "reason": "no clip or correct statement; "
                          "see monotone and tvd", "source": "scheme"}
    elif b.kind == "clip":
        doc["bounded"] = {"holds": True, **_span(None), "reason": b.reason, "source": "clip"}
    else:
        doc["bounded"] = {"holds": b.bounded, **_span(b.bounded_set.main if b.bounded_set else None),
                          "reason": b.reason, "source": "fct"}
    doc["verdict_sources"] = {
        "consistent": lin.source,
        "order": "fct" if s.correct == "fct" else lin.source,
        "stability": doc["stability"]["source"],
        "conservative": doc["conservation"]["source"], "convergent": conv["source"],
        "monotone": mono["source"], "tvd": tvd["source"],
        "bounded": None if b is None else b.kind}
    doc["budget"] = {"seconds": a.budget_seconds,
                     "exceeded": [{"pass": what, "outcome": how, "note": note}
                                  for what, how, note in a.over_budget]}
    for what, how, note in a.over_budget:
        if how == "undecided" and (what.startswith("limiter ") or what == "dispersion"):
            undecided.append(f"{what}: {note}")
    doc["undecided"] = list(dict.fromkeys(undecided))
    return doc


def _over(a, what: str) -> str | None:
    """The note of a pass that went past its budget and ended undecided, else None."""
    return next((f"{what}: {note}" for name, how, note in a.over_budget
                 if name == what and how == "undecided"), None)
