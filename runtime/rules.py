"""The rules that hold each measurement against what the analysis claims.

Each rule turns one measurement and the `Prediction` into a `Finding` with one
of four verdicts:

- agree: the analysis claims something here and the measurement bears it out;
- disagree: the measurement contradicts a claim (a bug in fluxloom's analysis,
  or in its kernels);
- no claim: the analysis claims nothing here (undecided, or a property it says
  does not hold, which a handful of profiles cannot contradict); the
  measurement is reported for information;
- fault: the kernel produced NaN or Inf from finite data where one step cannot
  overflow (a bug in the generated kernel, distinct from a scheme diverging).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from fluxloom.compiler.analysis.wording import set_text, stability_text, verdict_text

from . import harness
from .prediction import Prediction
from .profiles import Profile

AGREE, DISAGREE, NO_CLAIM, FAULT = "agree", "disagree", "no claim", "fault"
VERDICTS = (AGREE, DISAGREE, NO_CLAIM, FAULT)
LINEAR_ORDER_TOL = 0.3     # issue 5: l1 order at the finest pair within 0.3 of the prediction
LIMITED_ORDER_TOL = 0.5    # nonlinear schemes: the smooth-region order, clipped at extrema
GODUNOV_MAX_ORDER = 1.3    # "first order", measured
CLIPPED_EXTREMUM_JUMP = 2  # a flattened smooth extremum acts like a jump in the 2nd derivative


@dataclass(frozen=True)
class Finding:
    check: str          # convergence | stability | conservation | bounds | extrema | tv | symmetry | godunov
    context: str        # profile, velocity, Courant number
    predicted: str
    measured: str
    verdict: str        # agree | disagree | no claim | fault
    values: dict = field(default_factory=dict)

    def to_json(self) -> dict:
        return {"check": self.check, "context": self.context, "predicted": self.predicted,
                "measured": self.measured, "verdict": self.verdict, **self.values}


def fmt(x: float | None, digits: int = 3) -> str:
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return "n/a"
    return f"{x:.{digits}g}"


def fault_text(step: int, where: str = "") -> str:
    return (f"kernel fault: NaN or Inf from finite data at step {step}{where} (one step "
            "cannot overflow here)")


# ---- convergence -------------------------------------------------------------------------

def expected_order(profile: Profile, order: int, clips_extrema: bool) -> float:
    """The l1 order a scheme of `order` can show on `profile`.

    A profile whose k-th derivative jumps caps it at p (k + 1) / (p + 1) (profiles.py).
    With `clips_extrema`, the cap of a scheme that flattens smooth extrema (a limiter,
    a clamp between neighbours, FCT) in a few cells round each one, as a jump in the
    second derivative does at the bell's edges: k = 2 on the sine too, so a limited
    third-order scheme may show l1 order 2.25 there [derived]."""
    k = profile.jump_derivative
    if clips_extrema:
        k = CLIPPED_EXTREMUM_JUMP if k is None else min(k, CLIPPED_EXTREMUM_JUMP)
    if k is None:
        return float(order)
    return min(float(order), order * (k + 1) / (order + 1))


def is_exact(conv: harness.Convergence, eps: float) -> bool:
    """Every run reproduced the exact solution to round-off (e.g. c = 1: a shift by one cell)."""
    tol = max(1e-11, 1e3 * eps)
    # the finest two grids decide: on a coarse one the step count may not divide N / c
    return all(row.errors is not None and row.errors.linf <= tol for row in conv.rows[-2:])


def convergence_finding(conv: harness.Convergence, profile: Profile, pred: Prediction,
                        c: float, eps: float) -> Finding:
    finest = conv.finest_order
    context = f"{conv.profile}, one revolution, c = {fmt(conv.rows[-1].courant)}, N = " \
              f"{conv.rows[0].n}..{conv.rows[-1].n}"
    values = {"profile": conv.profile, "observed_order": finest, "fitted_order": conv.fitted,
              "predicted_order": pred.order}
    measured = (f"l1 order {fmt(finest['l1'])} (fit {fmt(conv.fitted['l1'])}), "
                f"linf order {fmt(finest['linf'])}")
    if conv.diverged:
        first = conv.diverged[0]
        measured = f"diverged at N = {first.n}, step {first.diverged_at}"
    predicted = "order undecided" if pred.order is None else f"order {pred.order}"
    if conv.faults:
        first = conv.faults[0]
        values["fault_at"] = {"n": first.n, "step": first.fault_at}
        return Finding("convergence", context, predicted,
                       fault_text(first.fault_at, f" on N = {first.n}"), FAULT, values)
    stability = pred.claims.stability
    if not stability.decided:
        return Finding("convergence", context, f"no claim: {predicted}, stability undecided",
                       measured, NO_CLAIM, values)
    if not stability.stable.contains(c):
        # a weak instability may not show in one revolution (the stability sweep measures it)
        where = f"at c = {fmt(c)}, outside {set_text(stability.stable)}" \
            if not stability.stable.empty else "at every Courant number"
        return Finding("convergence", context, f"no claim: unstable {where}", measured,
                       NO_CLAIM, values)
    if is_exact(conv, eps):
        values["exact"] = True
        return Finding("convergence", context, predicted,
                       "exact to round-off at this Courant number", AGREE, values)
    if pred.order is None:
        return Finding("convergence", context, "no claim: order undecided", measured,
                       NO_CLAIM, values)
    # what the profile allows (a jump in a derivative caps the order), and, for a face
    # that may flatten smooth extrema, the cap that flattening would add
    expected = expected_order(profile, pred.order, False)
    lowest = expected_order(profile, pred.order, pred.clips_extrema)
    values["expected_order"] = expected
    values["lowest_expected_order"] = lowest
    if expected < pred.order:
        predicted += (f"; at most {fmt(expected)} on this profile (its derivative of order "
                      f"{profile.jump_derivative} jumps)")
    if lowest < expected:
        predicted += (f"; down to {fmt(lowest)} where extrema are flattened (as a jump in "
                      "the second derivative)")
    if conv.diverged:
        return Finding("convergence", context, predicted, measured, DISAGREE, values)
    nonlinear = not pred.claims.linear or pred.fct
    tol = LIMITED_ORDER_TOL if nonlinear else LINEAR_ORDER_TOL
    ok = lowest - tol <= finest["l1"] <= expected + tol
    if nonlinear:
        predicted += " in smooth monotone regions"
    return Finding("convergence", context, predicted + f" (l1 within {tol})", measured,
                   AGREE if ok else DISAGREE, values)


# ---- shape: bounds, new extrema, total variation -------------------------------------

def _stopped_text(sh: harness.Shape) -> str:
    if sh.fault_at is not None:
        return fault_text(sh.fault_at)
    return f"diverged at step {sh.diverged_at}"


def shape_findings(sh: harness.Shape, pred: Prediction, c: float) -> list[Finding]:
    context = f"{sh.profile}, N = {sh.n}, {sh.steps} steps, c = {fmt(c)}"
    out = []
    faulted = sh.fault_at is not None
    # bounds
    why = pred.bounded_at(c)
    lo, hi = sh.initial_bounds
    seen = f"range [{fmt(sh.seen_bounds[0], 4)}, {fmt(sh.seen_bounds[1], 4)}]"
    if sh.stopped_at is not None:
        measured = _stopped_text(sh)
    elif sh.bounded:
        measured = f"stayed within [{fmt(lo)}, {fmt(hi)}]"
    else:
        measured = f"left [{fmt(lo)}, {fmt(hi)}] at step {sh.first_out_of_bounds}: {seen}"
    values = {"profile": sh.profile, "bounded": sh.bounded and sh.stopped_at is None,
              "seen_min": sh.seen_bounds[0], "seen_max": sh.seen_bounds[1],
              "diverged_at": sh.diverged_at, "fault_at": sh.fault_at}
    if why == "post-step clamp":
        # the clamp's promise is its own range, which may be wider than the data's
        lo_c, hi_c = pred.clip
        slack = 1e3 * np.finfo(float).eps * max(abs(lo_c), abs(hi_c), 1.0)
        ok = (sh.stopped_at is None and sh.seen_bounds[0] >= lo_c - slack
              and sh.seen_bounds[1] <= hi_c + slack)
        measured = seen if sh.stopped_at is None else measured
        out.append(Finding("bounds", context, f"within [{fmt(lo_c)}, {fmt(hi_c)}] ({why})",
                           measured, _verdict(ok, faulted), values))
    elif why:
        ok = sh.bounded and sh.stopped_at is None
        out.append(Finding("bounds", context, f"within initial bounds ({why})", measured,
                           _verdict(ok, faulted), values))
    else:
        out.append(Finding("bounds", context, f"no claim ({_no_shape_claim(pred, c)})",
                           measured, _no_claim(faulted), values))
    # new extrema
    why = pred.no_new_extrema_at(c)
    if sh.stopped_at is not None:
        measured = _stopped_text(sh)
    elif sh.new_extrema:
        measured = f"up to {sh.new_extrema} cells in one step, first at step {sh.first_new_extremum}"
    else:
        measured = "none"
    values = {"profile": sh.profile, "new_extrema": sh.new_extrema, "fault_at": sh.fault_at}
    if why:
        ok = sh.new_extrema == 0 and sh.stopped_at is None
        out.append(Finding("extrema", context, f"no new extrema ({why})", measured,
                           _verdict(ok, faulted), values))
    else:
        reason = ("a clamp bounds values, not shape; " if pred.clip else "") + _no_shape_claim(pred, c)
        out.append(Finding("extrema", context, f"no claim ({reason})", measured,
                           _no_claim(faulted), values))
    # total variation
    if sh.stopped_at is not None:
        measured = _stopped_text(sh)
    elif sh.tv_growth_steps:
        measured = (f"grew in {sh.tv_growth_steps} steps, first at step {sh.first_tv_growth}, "
                    f"by up to {fmt(sh.tv_increase)} of the initial TV in one step")
    else:
        measured = "never grew"
    values = {"profile": sh.profile, "tv_growth_steps": sh.tv_growth_steps,
              "tv_increase": sh.tv_increase, "fault_at": sh.fault_at}
    if pred.tvd_at(c):
        ok = sh.tv_growth_steps == 0 and sh.stopped_at is None
        out.append(Finding("tv", context, "TVD: total variation never grows", measured,
                           _verdict(ok, faulted), values))
    else:
        out.append(Finding("tv", context, f"no claim (TVD: {verdict_text(pred.claims.tvd)})",
                           measured, _no_claim(faulted), values))
    return out


def _no_shape_claim(pred: Prediction, c: float) -> str:
    mono, tvd = pred.claims.monotone, pred.claims.tvd
    return (f"at c = {fmt(c)}: monotone {verdict_text(mono)}; TVD {verdict_text(tvd)}")


def _verdict(ok: bool, faulted: bool) -> str:
    return FAULT if faulted else (AGREE if ok else DISAGREE)


def _no_claim(faulted: bool) -> str:
    return FAULT if faulted else NO_CLAIM


# ---- conservation and symmetry ------------------------------------------------------------

def conservation_finding(cons: harness.Conservation, pred: Prediction, tol: float) -> Finding:
    context = f"{cons.profile}, u = {cons.velocity}, N = {cons.n}, {cons.steps} steps"
    measured = f"relative drift {fmt(cons.mass_drift)}"
    if cons.fault_at is not None:
        measured = fault_text(cons.fault_at)
    elif cons.diverged_at is not None:
        measured += f" (up to step {cons.diverged_at - 1}, then diverged)"
    values = {"velocity": cons.velocity, "mass_drift": cons.mass_drift,
              "diverged_at": cons.diverged_at, "fault_at": cons.fault_at}
    faulted = cons.fault_at is not None
    if pred.conservative:
        return Finding("conservation", context, f"conservative: drift <= {tol:g}", measured,
                       _verdict(cons.mass_drift <= tol, faulted), values)
    if pred.conservative is None:
        why = "conservation undecided"
    else:
        why = "post-step clamp" if pred.clip else "not conservative"
        if cons.mass_drift <= tol and not faulted:
            measured += " (the total happened to stay)"
    return Finding("conservation", context, f"no claim ({why}: the total may drift)", measured,
                   _no_claim(faulted), values)


def symmetry_finding(mirror: harness.Mirror, c: float, eps: float) -> Finding:
    context = f"mixed, c = {fmt(c)}, u = +1 against its mirror image with u = -1"
    predicted = "mirror images (one upwind-frame expression serves both signs)"
    values = {"mismatch": mirror.mismatch, "fault_at": mirror.fault_at}
    if mirror.fault_at is not None:
        return Finding("symmetry", context, predicted, fault_text(mirror.fault_at), FAULT, values)
    tol = 1e3 * eps
    measured = f"largest difference {fmt(mirror.mismatch)} of the profile's scale"
    if mirror.diverged_at is not None:
        measured += f" (both diverged at step {mirror.diverged_at})" if mirror.mismatch == 0 \
            else " (one run diverged, the other did not)"
    return Finding("symmetry", context, predicted, measured,
                   AGREE if mirror.mismatch <= tol else DISAGREE, values)


# ---- stability --------------------------------------------------------------------------

def measured_set_text(st: harness.Stability) -> str:
    """The Courant numbers measured stable, as runs of probes with bisected edges."""
    parts = []
    for lo, hi in st.measured:
        if hi - lo <= 2 * st.resolution:
            parts.append(f"c = {(lo + hi) / 2:.3f}")
        else:
            top = f"{hi:.3f}" + (" (the largest tried)" if hi >= st.tried_max else "")
            parts.append(f"[{lo:.3f}, {top}]" if lo > 0 else f"[0, {top}]")
    return " and ".join(parts) if parts else "no Courant number tried"


def stability_finding(st: harness.Stability, pred: Prediction) -> Finding:
    how = ("one step of random data, per-mode gain" if st.method == "spectral"
           else "random data, l2 growth over 1000 steps")
    context = (f"{len(st.probes)} Courant numbers in {st.tried_min:.3g}..{st.tried_max:g} "
               f"({how})")
    margin = pred.stability_margin()
    stable_where_grows, grows_where_stable, judged = [], [], 0
    for probe in st.probes:
        if probe.fault:
            continue
        claim = pred.stable_at(probe.courant)
        if claim is None:
            continue
        judged += 1
        if claim and probe.grows:
            grows_where_stable.append(probe)
        elif not claim and not probe.grows:
            stable_where_grows.append(probe)
    values = {"predicted_set": set_text(pred.stable_set) if pred.stability_decided else None,
              "measured_set": [list(r) for r in st.measured], "measured_max": st.measured_max,
              "method": st.method, "probes": len(st.probes), "judged": judged,
              "grew_where_stable": [p.courant for p in grows_where_stable],
              "stable_where_growth": [p.courant for p in stable_where_grows],
              "faults": [p.courant for p in st.faults]}
    predicted = stability_text(pred.claims.stability)
    if pred.linearised_on_smooth_data:
        predicted += (" for the linearisation on smooth monotone data; random data exercise "
                      "the face elsewhere")
    elif pred.stability_decided and pred.stable_set.edges():
        predicted += f" (edges within {margin:g})"
        if not pred.claims.stability.claims_growth_outside:
            predicted += "; no claim outside it"
    if pred.linearised_at_constant_state:
        how += f", data of size {pred.probe_amplitude:g}"
        context = (f"{len(st.probes)} Courant numbers in {st.tried_min:.3g}..{st.tried_max:g} "
                   f"({how})")
    measured = f"stable for {measured_set_text(st)}"
    if st.unstable_everywhere:
        measured = "grew at every Courant number tried"
    if st.faults:
        where = ", ".join(f"{p.courant:.4g}" for p in st.faults[:4])
        return Finding("stability", context, predicted,
                       f"kernel fault: NaN or Inf from finite data at c = {where}", FAULT, values)
    problems = []
    if grows_where_stable:
        worst = max(grows_where_stable, key=lambda p: p.growth)
        problems.append(f"grew at {_courant_list(grows_where_stable)} where stability is "
                        f"predicted (largest gain {fmt(worst.growth, 4)} at c = "
                        f"{worst.courant:.4g})")
    if stable_where_grows:
        problems.append(f"stable at {_courant_list(stable_where_grows)} where growth is predicted")
    if problems:
        return Finding("stability", context, predicted, measured + "; " + "; ".join(problems),
                       DISAGREE, values)
    if judged == 0:
        return Finding("stability", context, f"no claim ({predicted})", measured, NO_CLAIM, values)
    return Finding("stability", context, predicted, measured, AGREE, values)


def _courant_list(probes) -> str:
    shown = ", ".join(f"{p.courant:.4g}" for p in probes[:5])
    more = f" and {len(probes) - 5} more" if len(probes) > 5 else ""
    return f"c = {shown}{more}"


# ---- Godunov's theorem ------------------------------------------------------------------

def godunov_finding(pred: Prediction, shapes, convergence, c: float,
                    eps: float) -> Finding | None:
    """A linear scheme measured monotone must be at most first order (Godunov's theorem)."""
    if not pred.linear or pred.clip is not None:
        return None
    monotone = all(sh.bounded and sh.new_extrema == 0 and sh.tv_growth_steps == 0
                   and sh.stopped_at is None for sh in shapes)
    if not monotone:
        return None
    sine = convergence[0]
    if is_exact(sine, eps):
        return None  # an exact shift has no order to speak of
    order = sine.finest_order["l1"]
    if math.isnan(order):
        return None
    ok = (order <= GODUNOV_MAX_ORDER) and (pred.order is None or pred.order <= 1)
    return Finding("godunov", f"c = {fmt(c)}", "a linear scheme that is monotone is at most "
                   "first order", f"measured monotone on every profile; l1 order {fmt(order)}",
                   AGREE if ok else DISAGREE, {"observed_order": order})
