"""Predicted against measured: each property the analysis states, checked on a kernel.

`Prediction` reads the analysis JSON (the document of `fluxloom check --json`);
`verify_kernel` runs the harness's measurements and gives every property a
`Finding` with a verdict. A guarantee that fails is a disagreement; where the
analysis guarantees nothing, whatever is measured is reported and agrees.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from . import harness
from .profiles import BELL, DISCONTINUOUS, MIXED, SINE, Profile

AGREE, DISAGREE = "agree", "disagree"
LINEAR_ORDER_TOL = 0.3     # issue 5: l1 order at the finest pair within 0.3 of the prediction
LIMITED_ORDER_TOL = 0.5    # limited schemes: the smooth-region order, clipped at extrema
STABILITY_TOL = 0.02       # measured limit within 0.02 of the predicted one
GODUNOV_MAX_ORDER = 1.3    # "first order", measured
SMALL_DATA = 1e-30         # random data this small see a face linearised at a constant state
                           # act as its linearisation (differences far below any weight's scale)


# ---- what the analysis says ---------------------------------------------------------

def _number(value) -> float | None:
    if value is None:
        return None
    try:
        out = float(value)
    except (TypeError, ValueError):
        return None
    return out if not math.isnan(out) else None


def _holds(value) -> bool:
    """A verdict given either as a bool or as {"holds": bool, ...}."""
    if isinstance(value, dict):
        return bool(value.get("holds"))
    return bool(value)


def _within(c: float, low: float | None, high: float | None, tol: float = 1e-9) -> bool:
    return (low is None or c >= low - tol) and (high is None or c <= high + tol)


Spans = tuple[tuple[float | None, float | None], ...]


def _spans(verdict: dict) -> Spans:
    """The Courant intervals where a verdict holds: its main interval and any islands."""
    found = []
    if verdict.get("holds"):
        found.append((_number(verdict.get("courant_min")), _number(verdict.get("courant_max"))))
    for island in verdict.get("islands") or ():
        found.append((_number(island.get("courant_min")), _number(island.get("courant_max"))))
    return tuple(found)


def _largest_limit(stability: dict) -> float | None:
    limits = [_number(s.get("courant_max")) for s in stability.get("schemes") or ()
              if s.get("kind") == "conditional"]
    limits = [x for x in limits if x is not None]
    return max(limits) if limits else _number(stability.get("courant_max"))


def _in_spans(c: float, spans: Spans) -> bool:
    return any(_within(c, low, high) for low, high in spans)


@dataclass(frozen=True)
class Prediction:
    """The analysis's verdicts, in the form the harness needs."""

    scheme: str
    order: int | None                   # overall order at fixed Courant number
    limited: bool                       # nonlinear in q: order holds in smooth monotone regions
    clip: tuple[float, float] | None
    fct: bool
    stability_kind: str                 # unconditional | conditional | unstable | undecided
    stable_min: float | None
    stable_max: float | None
    conservative: bool
    monotone_max: float | None          # linear schemes: monotone for 0 <= c <= this
    tvd: tuple[float | None, float | None] | None
    bounded: tuple[float | None, float | None] | None  # Courant interval of a bounds guarantee
    stable_max_any: float | None = None  # largest limit among the linear schemes standing for it
    stable_spans: Spans = ()            # every interval (islands included) where each holds
    linearised_at: str | None = None     # nonlinear faces without a limiter: where the analysis
                                         # linearised them ("a constant state", "smooth monotone data")
    monotone_spans: Spans = ()
    tvd_spans: Spans = ()
    source: dict = field(default_factory=dict, compare=False)

    @classmethod
    def from_analysis(cls, doc: dict, scheme) -> "Prediction":
        found = doc.get("order") or {}
        order = found.get("at_courant", found.get("overall"))
        stability = doc.get("stability") or {}
        monotone = doc.get("monotone") or {}
        tvd = doc.get("tvd") or {}
        clip = tuple(float(v) for v in scheme.clip) if scheme.clip is not None else None
        fct = scheme.correct == "fct"
        monotone_max = _number(monotone.get("courant_max")) if monotone.get("holds") else None
        bounded = None
        found = doc.get("bounded")
        if isinstance(found, dict) and found.get("holds"):
            bounded = (_number(found.get("courant_min")), _number(found.get("courant_max")))
        elif clip is not None:
            bounded = (None, None)
        elif fct and monotone_max is not None:
            bounded = (0.0, monotone_max)
        return cls(
            scheme=doc.get("scheme", scheme.name),
            order=int(order) if isinstance(order, (int, float)) and order == order else None,
            limited=bool(scheme.limited),
            clip=clip,
            fct=fct,
            stability_kind=str(stability.get("kind", "undecided")),
            stable_min=_number(stability.get("courant_min")),
            stable_max=_number(stability.get("courant_max")),
            conservative=_holds(doc.get("conservative")),
            monotone_max=monotone_max,
            tvd=((_number(tvd.get("courant_min")), _number(tvd.get("courant_max")))
                 if tvd.get("holds") else None),
            bounded=bounded,
            stable_max_any=_largest_limit(stability),
            stable_spans=(_spans({**stability, "holds": stability.get("kind") == "conditional"})
                          if stability else ()),
            monotone_spans=_spans(monotone),
            tvd_spans=_spans(tvd),
            linearised_at=doc.get("linearised_at"),
            source=doc,
        )

    @property
    def linear(self) -> bool:
        """Linear in q (a clamp aside): stability can be measured mode by mode."""
        return not self.limited and not self.fct

    def stable_at(self, c: float) -> bool:
        if self.stability_kind == "unstable":
            return False
        if self.stability_kind == "unconditional":
            return True
        return _in_spans(c, self.stable_spans)

    def monotone_at(self, c: float) -> bool:
        return _in_spans(c, self.monotone_spans)

    def tvd_at(self, c: float) -> bool:
        return self.monotone_at(c) or _in_spans(c, self.tvd_spans)

    def bounded_at(self, c: float) -> str | None:
        """Why the solution must stay within its initial bounds at c, or None."""
        if self.clip is not None:
            return "post-step clamp"
        return self.no_new_extrema_at(c)

    def no_new_extrema_at(self, c: float) -> str | None:
        """Why no step may create a new extremum at c, or None (a clamp is no reason)."""
        if self.fct and self.bounded is not None and _within(c, *self.bounded):
            return "flux-corrected transport"
        if self.monotone_at(c):
            return "monotone"
        if self.tvd_at(c):
            return "TVD"
        return None


# ---- findings ----------------------------------------------------------------

@dataclass(frozen=True)
class Finding:
    check: str          # convergence | stability | conservation | bounds | extrema | tv | symmetry | godunov
    context: str        # profile, velocity, Courant number
    predicted: str
    measured: str
    verdict: str        # agree | disagree
    values: dict = field(default_factory=dict)

    def to_json(self) -> dict:
        return {"check": self.check, "context": self.context, "predicted": self.predicted,
                "measured": self.measured, "verdict": self.verdict, **self.values}


def _fmt(x: float | None, digits: int = 3) -> str:
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return "n/a"
    return f"{x:.{digits}g}"


def _interval(low: float | None, high: float | None) -> str:
    return f"[{_fmt(low if low is not None else 0.0)}, {_fmt(high) if high is not None else 'inf'}]"


@dataclass(frozen=True)
class Options:
    courant: float = 0.5
    velocity: str = "+1"                       # "+1", "-1" or "varying"
    cells: tuple[int, ...] = harness.CONVERGENCE_CELLS
    shape_cells: int = 100
    conservation_steps: int = 200
    stability: bool = True

    @property
    def sign(self) -> float:
        return -1.0 if self.velocity == "-1" else 1.0


@dataclass(frozen=True)
class Verification:
    scheme: str
    backend: str
    precision: str
    options: Options
    prediction: Prediction
    convergence: tuple[harness.Convergence, ...]
    shapes: tuple[harness.Shape, ...]
    conservation: tuple[harness.Conservation, ...]
    stability: harness.Stability | None
    mirror: float
    findings: tuple[Finding, ...]

    @property
    def agree(self) -> bool:
        return all(f.verdict == AGREE for f in self.findings)

    @property
    def disagreements(self) -> list[Finding]:
        return [f for f in self.findings if f.verdict != AGREE]


def in_clip_range(profile: Profile, clip) -> Profile:
    """A profile that sticks out of a clamp's range is mapped onto it, so the clamp does
    not judge the data instead of the scheme."""
    if clip is not None and (profile.low < clip[0] or profile.high > clip[1]):
        return profile.scaled(*clip)
    return profile


def mass_tolerance(precision: str) -> float:
    return 1e-12 if precision == "double" else 1e-5


def verify_kernel(kernel, prediction: Prediction, options: Options = Options(),
                  progress=None) -> Verification:
    """Run every measurement on `kernel` and judge it against `prediction`."""
    say = progress or (lambda message: None)
    c, sign, clip = options.courant, options.sign, prediction.clip
    findings: list[Finding] = []

    say("convergence")
    smooth = (SINE, BELL)
    convergence = tuple(harness.convergence(kernel, in_clip_range(p, clip), c, sign, options.cells)
                        for p in smooth)
    for profile, conv in zip(smooth, convergence):
        findings.append(_convergence_finding(conv, profile, prediction, c,
                                             harness.round_off(kernel)))

    say("bounds, extrema and total variation")
    shapes = tuple(harness.shape(kernel, in_clip_range(p, clip), c, sign, options.shape_cells)
                   for p in DISCONTINUOUS)
    for sh in shapes:
        findings += _shape_findings(sh, prediction, c)

    say("conservation")
    conservation = tuple(
        harness.conservation(kernel, in_clip_range(MIXED, clip), c, v, options.shape_cells,
                             options.conservation_steps)
        for v in ("-1" if sign < 0 else "+1", "varying"))
    for cons in conservation:
        findings.append(_conservation_finding(cons, prediction, mass_tolerance(kernel.precision)))

    say("velocity sign symmetry")
    mirror = harness.mirror_mismatch(kernel, in_clip_range(MIXED, clip), min(c, 1.0))
    tol = 1e3 * harness.round_off(kernel)
    findings.append(Finding(
        "symmetry", f"mixed, c = {_fmt(min(c, 1.0))}, u = +1 against its mirror image with u = -1",
        "mirror images (one upwind-frame expression serves both signs)",
        f"largest difference {_fmt(mirror)} of the profile's scale",
        AGREE if mirror <= tol else DISAGREE, {"mismatch": mirror}))

    stability = None
    if options.stability:
        say("stability sweep")
        at_constant = (prediction.linearised_at or "").startswith("a constant state")
        stability = harness.stability_sweep(kernel, sign, prediction.stable_max_any,
                                            linear=prediction.linear or at_constant, clip=clip,
                                            amplitude=SMALL_DATA if at_constant else None)
        findings.append(_stability_finding(stability, prediction))

    godunov = _godunov_finding(prediction, shapes, convergence, c, harness.round_off(kernel))
    if godunov is not None:
        findings.append(godunov)

    return Verification(prediction.scheme, kernel.backend, kernel.precision, options,
                        prediction, convergence, shapes, conservation, stability, mirror,
                        tuple(findings))


def _convergence_finding(conv: harness.Convergence, profile: Profile, pred: Prediction,
                         c: float, eps: float) -> Finding:
    finest = conv.finest_order
    context = f"{conv.profile}, one revolution, c = {_fmt(conv.rows[-1].courant)}, N = " \
              f"{conv.rows[0].n}..{conv.rows[-1].n}"
    values = {"profile": conv.profile, "observed_order": finest, "fitted_order": conv.fitted,
              "predicted_order": pred.order}
    measured = (f"l1 order {_fmt(finest['l1'])} (fit {_fmt(conv.fitted['l1'])}), "
                f"linf order {_fmt(finest['linf'])}")
    if conv.diverged:
        first = conv.diverged[0]
        measured = f"diverged at N = {first.n}, step {first.diverged_at}"
    if not pred.stable_at(c):
        # No claim to test: a weak instability may not show in one revolution (the
        # stability sweep is where it is measured).
        where = ("at every Courant number" if pred.stability_kind == "unstable" else
                 f"at c = {_fmt(c)}, outside {_interval(pred.stable_min, pred.stable_max)}")
        return Finding("convergence", context, f"not guaranteed: unstable {where}",
                       measured, AGREE, values)
    if _exact(conv, eps):
        values["exact"] = True
        return Finding("convergence", context, f"order {pred.order}",
                       "exact to round-off at this Courant number", AGREE, values)
    if pred.order is None:
        return Finding("convergence", context, "order undecided", measured, AGREE, values)
    expected = profile.expected_order(pred.order)
    values["expected_order"] = expected
    predicted = f"order {pred.order}"
    if expected < pred.order:
        predicted += (f"; at most {_fmt(expected)} on this profile (its derivative of order "
                      f"{profile.jump_derivative} jumps)")
    if conv.diverged:
        return Finding("convergence", context, predicted, measured, DISAGREE, values)
    if pred.limited or pred.fct:
        ok = abs(finest["l1"] - expected) <= LIMITED_ORDER_TOL
        return Finding("convergence", context,
                       predicted + f" in smooth monotone regions, lower at extrema "
                       f"(l1 within {LIMITED_ORDER_TOL})",
                       measured + " (the limiter clips extrema)", AGREE if ok else DISAGREE, values)
    ok = abs(finest["l1"] - expected) <= LINEAR_ORDER_TOL
    return Finding("convergence", context, predicted + f" (l1 within {LINEAR_ORDER_TOL})",
                   measured, AGREE if ok else DISAGREE, values)


def _exact(conv: harness.Convergence, eps: float) -> bool:
    """Every run reproduced the exact solution to round-off (e.g. c = 1: a shift by one cell)."""
    tol = max(1e-11, 1e3 * eps)
    # the finest two grids decide: on a coarse one the step count may not divide N / c
    return all(row.errors is not None and row.errors.linf <= tol for row in conv.rows[-2:])


def _diverged_text(sh: harness.Shape) -> str:
    return f"diverged at step {sh.diverged_at}"


def _shape_findings(sh: harness.Shape, pred: Prediction, c: float) -> list[Finding]:
    context = f"{sh.profile}, N = {sh.n}, {sh.steps} steps, c = {_fmt(c)}"
    out = []
    # bounds
    why = pred.bounded_at(c)
    lo, hi = sh.initial_bounds
    seen = f"range [{_fmt(sh.seen_bounds[0], 4)}, {_fmt(sh.seen_bounds[1], 4)}]"
    if sh.diverged_at is not None:
        measured = _diverged_text(sh)
    elif sh.bounded:
        measured = f"stayed within [{_fmt(lo)}, {_fmt(hi)}]"
    else:
        measured = f"left [{_fmt(lo)}, {_fmt(hi)}] at step {sh.first_out_of_bounds}: {seen}"
    values = {"profile": sh.profile, "bounded": sh.bounded and sh.diverged_at is None,
              "seen_min": sh.seen_bounds[0], "seen_max": sh.seen_bounds[1],
              "diverged_at": sh.diverged_at}
    if why == "post-step clamp":
        # the clamp's promise is its own range, which may be wider than the data's
        lo_c, hi_c = pred.clip
        slack = 1e3 * np.finfo(float).eps * max(abs(lo_c), abs(hi_c), 1.0)
        ok = (sh.diverged_at is None and sh.seen_bounds[0] >= lo_c - slack
              and sh.seen_bounds[1] <= hi_c + slack)
        measured = f"{seen}" if not sh.diverged_at else measured
        out.append(Finding("bounds", context, f"within [{_fmt(lo_c)}, {_fmt(hi_c)}] ({why})",
                           measured, AGREE if ok else DISAGREE, values))
    elif why:
        ok = sh.bounded and sh.diverged_at is None
        out.append(Finding("bounds", context, f"within initial bounds ({why})", measured,
                           AGREE if ok else DISAGREE, values))
    else:
        out.append(Finding("bounds", context, "not guaranteed", measured, AGREE, values))
    # new extrema
    why = pred.no_new_extrema_at(c)
    if sh.diverged_at is not None:
        measured = _diverged_text(sh)
    elif sh.new_extrema:
        measured = f"up to {sh.new_extrema} cells in one step, first at step {sh.first_new_extremum}"
    else:
        measured = "none"
    values = {"profile": sh.profile, "new_extrema": sh.new_extrema}
    if why:
        ok = sh.new_extrema == 0 and sh.diverged_at is None
        out.append(Finding("extrema", context, f"no new extrema ({why})", measured,
                           AGREE if ok else DISAGREE, values))
    else:
        reason = "a clamp bounds values, not shape" if pred.clip else "not excluded"
        out.append(Finding("extrema", context, f"may appear ({reason})", measured, AGREE, values))
    # total variation
    if sh.diverged_at is not None:
        measured = _diverged_text(sh)
    elif sh.tv_growth_steps:
        measured = (f"grew in {sh.tv_growth_steps} steps, first at step {sh.first_tv_growth}, "
                    f"by up to {_fmt(sh.tv_increase)} of the initial TV in one step")
    else:
        measured = "never grew"
    values = {"profile": sh.profile, "tv_growth_steps": sh.tv_growth_steps,
              "tv_increase": sh.tv_increase}
    if pred.tvd_at(c):
        ok = sh.tv_growth_steps == 0 and sh.diverged_at is None
        out.append(Finding("tv", context, "TVD: total variation never grows", measured,
                           AGREE if ok else DISAGREE, values))
    else:
        where = (f"TVD only for c in {_interval(*pred.tvd)}" if pred.tvd else "not TVD")
        out.append(Finding("tv", context, f"may grow ({where})", measured, AGREE, values))
    return out


def _conservation_finding(cons: harness.Conservation, pred: Prediction, tol: float) -> Finding:
    context = f"{cons.profile}, u = {cons.velocity}, N = {cons.n}, {cons.steps} steps"
    measured = f"relative drift {_fmt(cons.mass_drift)}"
    if cons.diverged_at is not None:
        measured += f" (up to step {cons.diverged_at - 1}, then diverged)"
    values = {"velocity": cons.velocity, "mass_drift": cons.mass_drift,
              "diverged_at": cons.diverged_at}
    if pred.conservative:
        return Finding("conservation", context, f"conservative: drift <= {tol:g}", measured,
                       AGREE if cons.mass_drift <= tol else DISAGREE, values)
    note = " (the clamp never acted here)" if cons.mass_drift <= tol else ""
    why = "post-step clamp" if pred.clip else "not conservative"
    return Finding("conservation", context, f"total may drift ({why})", measured + note,
                   AGREE, values)


def _stability_finding(st: harness.Stability, pred: Prediction) -> Finding:
    how = ("one step of random data, per-mode gain" if st.method == "spectral"
           else "random data, l2 growth over 1000 steps")
    context = f"Courant numbers {st.probes[0].courant:g}..{st.tried_max:g} ({how})"
    values = {"predicted_max": pred.stable_max, "measured_max": st.measured_max,
              "method": st.method}
    if pred.stability_kind == "unstable":
        measured = ("grew at every Courant number tried" if st.unstable_everywhere else
                    f"stable up to {_fmt(st.measured_max)}" if st.measured_max is not None else
                    "stable at some Courant numbers")
        return Finding("stability", context, "unstable at every Courant number", measured,
                       AGREE if st.unstable_everywhere else DISAGREE, values)
    predicted = f"stable for c in {_interval(pred.stable_min, pred.stable_max)}"
    if pred.linearised_at == "smooth monotone data":
        # The claim is the linearisation's, on smooth monotone data; random data exercise
        # the nonlinear face away from there, so what they show is reported, not judged.
        measured = (f"stable up to c = {st.measured_max:.3f} (+-{st.resolution / 2:g})"
                    if st.measured_max is not None else
                    "grew at every Courant number tried" if st.unstable_everywhere else
                    f"stable at every Courant number tried (up to {st.tried_max:g})")
        return Finding("stability", context, predicted + " for the linearisation on smooth "
                       "monotone data; no claim on random data", measured, AGREE, values)
    if st.unstable_everywhere:
        return Finding("stability", context, predicted, "grew at every Courant number tried",
                       DISAGREE, values)
    if st.measured_max is None:
        measured = f"stable at every Courant number tried (up to {st.tried_max:g})"
        ok = pred.stable_max is None
        return Finding("stability", context, predicted, measured, AGREE if ok else DISAGREE, values)
    measured = f"stable up to c = {st.measured_max:.3f} (+-{st.resolution / 2:g})"
    if pred.stable_max is None:
        return Finding("stability", context, predicted, measured, DISAGREE, values)
    upper = pred.stable_max_any or pred.stable_max
    if st.method == "growth" and upper > pred.stable_max + STABILITY_TOL:
        # Nonlinear: the scheme is each of its linear stand-ins somewhere; random data
        # finds the limit of one of them, between the smallest and the largest.
        ok = pred.stable_max - STABILITY_TOL <= st.measured_max <= upper + STABILITY_TOL
        return Finding("stability", context,
                       predicted + f"; its linear stand-ins reach {_fmt(upper, 4)}, so random "
                       f"data may stay stable up to there", measured,
                       AGREE if ok else DISAGREE, values)
    ok = abs(st.measured_max - pred.stable_max) <= STABILITY_TOL
    return Finding("stability", context, predicted + f" (limit within {STABILITY_TOL})",
                   measured, AGREE if ok else DISAGREE, values)


def _godunov_finding(pred: Prediction, shapes, convergence, c: float,
                     eps: float) -> Finding | None:
    """A linear scheme measured monotone must be at most first order (Godunov's theorem)."""
    if not pred.linear or pred.clip is not None:
        return None
    monotone = all(sh.bounded and sh.new_extrema == 0 and sh.tv_growth_steps == 0
                   and sh.diverged_at is None for sh in shapes)
    if not monotone:
        return None
    sine = convergence[0]
    if _exact(sine, eps):
        return None  # an exact shift has no order to speak of
    order = sine.finest_order["l1"]
    if math.isnan(order):
        return None
    ok = (order <= GODUNOV_MAX_ORDER) and (pred.order is None or pred.order <= 1)
    return Finding("godunov", f"c = {_fmt(c)}", "a linear scheme that is monotone is at most "
                   "first order", f"measured monotone on every profile; l1 order {_fmt(order)}",
                   AGREE if ok else DISAGREE, {"observed_order": order})


# ---- the JSON document of `fluxloom verify --json` -------------------------------------

def json_safe(x):
    if isinstance(x, float) and not math.isfinite(x):
        return None
    if isinstance(x, dict):
        return {k: json_safe(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [json_safe(v) for v in x]
    if isinstance(x, np.generic):
        return json_safe(x.item())
    return x


def verification_json(v: Verification) -> dict:
    sine = v.convergence[0]
    drifts = [c.mass_drift for c in v.conservation]
    doc = {
        "scheme": v.scheme,
        "backend": v.backend,
        "precision": v.precision,
        "courant": v.options.courant,
        "velocity": v.options.velocity,
        "convergence": [
            {"profile": row.profile, "n": row.n, "steps": row.steps, "courant": row.courant,
             "l1": row.errors.l1 if row.errors else None,
             "l2": row.errors.l2 if row.errors else None,
             "linf": row.errors.linf if row.errors else None,
             "diverged_at": row.diverged_at}
            for conv in v.convergence for row in conv.rows],
        "observed_order": dict(sine.finest_order),
        "fitted_order": dict(sine.fitted),
        "observed_order_by_profile": {conv.profile: dict(conv.finest_order) for conv in v.convergence},
        "predicted_order": v.prediction.order,
        "bounded": all(sh.bounded and sh.diverged_at is None for sh in v.shapes),
        "new_extrema": max(sh.new_extrema for sh in v.shapes),
        "tv_increase": max(sh.tv_increase for sh in v.shapes),
        "mass_drift": max(drifts),
        "mass_drift_by_velocity": {c.velocity: c.mass_drift for c in v.conservation},
        "mirror_mismatch": v.mirror,
        "stability": {
            "predicted_min": v.prediction.stable_min,
            "predicted_max": v.prediction.stable_max,
            "predicted_kind": v.prediction.stability_kind,
            "measured_max": v.stability.measured_max if v.stability else None,
            "unstable_everywhere": v.stability.unstable_everywhere if v.stability else None,
            "method": v.stability.method if v.stability else None,
        },
        "findings": [f.to_json() for f in v.findings],
        "agree": v.agree,
    }
    return json_safe(doc)
