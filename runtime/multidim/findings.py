"""`verify --dims 2` and `--dims 3`: the cases run through split sweeps, judged against
the split scheme's claims (`split` in the analysis document).

Findings, each agree / disagree / no claim / fault as in runtime/rules.py:

- conservation, per case: a conservative scheme's split steps keep the total to
  round-off (relative drift within the 1-D harness's tolerance: 1e-12 in double);
- convergence, on the smooth cases: where the flow varies in space the claim is
  `order.variable_coefficients`, an asymptotic order; under the uniform 3-D flow
  (constant coefficients) it is `order.overall`. The finest pair of grids
  must show at least that order less the harness's tolerance (0.3; 0.5 for
  nonlinear schemes), capped by what the field allows (its second derivative
  jumps). More is allowed: on coarse grids the higher-order 1-D error often
  outweighs the first-order term (the 1-D order shows first). Grids whose finest
  error is above RESOLVED_L1 do not resolve the field and make no claim;
- bounds, per case: where every sweep's velocity is constant along its lines
  (solid-body rotation), each sweep is a 1-D step with a constant velocity, so a
  1-D bound (monotone, TVD, FCT, clamp) claimed for every Courant number up to the
  sweep's carries over; under the swirling flow nothing is claimed (split sweeps
  do not keep a constant constant) and the overshoot is reported as measured.
"""
from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np

from fluxloom.compiler import LoomError

from ..measurements import mass_tolerance
from ..norms import pair_orders
from ..prediction import Prediction
from ..rules import (AGREE, DISAGREE, FAULT, LIMITED_ORDER_TOL, LINEAR_ORDER_TOL, NO_CLAIM,
                     Finding, fault_text, fmt)
from ..sweeps import KernelSweep
from .cases import (ORDER_CASES, Case, CaseRun, cases_for, check_case_size, grids_for, run_case,
                    smooth_case)
from .fields import Field

RESOLVED_L1 = 0.1
"""Above this normalised l1 error on the finest grid the field is not resolved yet: the
pair orders there say nothing about the asymptotic order."""
CONSTANT_ALONG_SWEEPS = {"rotation", "diagonal"}
"""Flows whose velocity along each axis does not vary along that axis (u(y), v(x))."""


@dataclass(frozen=True)
class SplitVerification:
    dims: int
    method: str
    courant: float
    grids: tuple[int, ...]
    runs: tuple[CaseRun, ...]
    findings: tuple[Finding, ...]
    orders: dict            # the smooth case's pair orders per norm

    def rows(self, case: str) -> list[CaseRun]:
        return [r for r in self.runs if r.case == case]

    def to_json(self) -> dict:
        return {"dims": self.dims, "method": self.method, "courant": self.courant,
                "grids": list(self.grids), "sweep_path": "generated sweep (NAME_sweep)",
                "smooth_case": smooth_case(self.dims), "observed_order": _finest(self.orders),
                "pair_orders": self.orders,
                "cases": [{"name": c.name, "description": c.description,
                           "flow": c.flow.description, "field": c.field.description}
                          for c in cases_for(self.dims)]}


def _finest(orders: dict) -> dict:
    return {norm: values[-1] if values else None for norm, values in orders.items()}


def check_split_run(grids, courant: float, dims: int = 2) -> None:
    """Refuse unbounded work before any (LoomError)."""
    for n in grids:
        check_case_size(n, courant, dims)


def _field(case: Case, prediction: Prediction) -> Field:
    clip = prediction.clip
    source = case.field
    if clip is not None and (source.low < clip[0] or source.high > clip[1]):
        return source.scaled(*clip)
    return source


def measure_split(kernel, prediction: Prediction, method: str, courant: float,
                  grids=None, progress=None, cases=None, dims: int = 2) -> tuple[CaseRun, ...]:
    """Every case (or those named in `cases`) on every grid."""
    say = progress or (lambda message: None)
    grids = grids_for(dims) if grids is None else grids
    line_sweep = KernelSweep(kernel)
    runs = []
    for case in _selected(cases, dims):
        say(f"{dims}-D {case.name} ({method} splitting, N = {', '.join(map(str, grids))})")
        runs += [run_case(line_sweep, case, n, courant, method, _field(case, prediction))
                 for n in grids]
    return tuple(runs)


def _selected(names, dims: int) -> tuple[Case, ...]:
    cases = cases_for(dims)
    if names is None:
        return cases
    unknown = set(names) - {c.name for c in cases}
    if unknown:
        raise LoomError(f"unknown {dims}-D case(s) {', '.join(sorted(unknown))}; the cases "
                        f"are {', '.join(c.name for c in cases)}", file="cases")
    return tuple(c for c in cases if c.name in names)


def verify_split(kernel, prediction: Prediction, method: str, courant: float,
                 grids=None, progress=None, cases=None) -> SplitVerification:
    """Run the cases of the split scheme's dimension (all, or those named in `cases`)
    and judge them."""
    split = prediction.claims.split
    if split is None:
        raise LoomError("verify --dims needs the split scheme's analysis", file="--dims")
    dims = split.dims
    grids = grids_for(dims) if grids is None else grids
    check_split_run(grids, courant, dims)
    runs = measure_split(kernel, prediction, method, courant, grids, progress, cases, dims)
    orders = case_orders(runs, smooth_case(dims))
    findings = judge_split(runs, orders, prediction, method, kernel.precision, dims)
    return SplitVerification(dims, method, courant, tuple(grids), runs, findings, orders)


def case_orders(runs, case: str) -> dict:
    """The pair orders of one case's runs, per norm (NaN where a run stopped)."""
    rows = [r for r in runs if r.case == case]
    return {norm: pair_orders([r.n for r in rows],
                              [getattr(r, norm) if getattr(r, norm) is not None
                               else float("nan") for r in rows])
            for norm in ("l1", "l2", "linf")}


def with_split(verification, split: SplitVerification):
    """The verification with the split (2-D or 3-D) findings added."""
    return dataclasses.replace(verification,
                               findings=tuple(verification.findings) + split.findings)


# ---- the rules ---------------------------------------------------------------------------

def judge_split(runs, orders: dict, prediction: Prediction, method: str,
                precision: str, dims: int = 2) -> tuple[Finding, ...]:
    """`orders`: the pair orders of the dimension's smooth case (other judged cases'
    orders are computed here)."""
    findings = []
    for case in _selected({r.case for r in runs}, dims):
        rows = [r for r in runs if r.case == case.name]
        findings.append(_conservation(case, rows, prediction, method, precision))
        if case.name in ORDER_CASES[dims]:
            own = orders if case.name == smooth_case(dims) else case_orders(runs, case.name)
            if own["l1"]:
                findings.append(_convergence(case, rows, own, prediction, method))
        findings.append(_bounds(case, rows, prediction, method))
    return tuple(findings)


def _context(case: Case, rows, method: str) -> str:
    return (f"{case.dims}-D {case.name}, {method}, c = {fmt(rows[-1].courant)}, "
            f"N = {rows[0].n}..{rows[-1].n}")


def _stopped(rows) -> CaseRun | None:
    return next((r for r in rows if r.stopped_at is not None), None)


def _stopped_text(row: CaseRun) -> str:
    if row.fault_at is not None:
        return fault_text(row.fault_at, f" on N = {row.n}")
    return f"diverged at N = {row.n}, step {row.diverged_at}"


def _claimed_stable(prediction: Prediction, rows) -> bool | None:
    split = prediction.claims.split
    c = rows[-1].courant
    return split.stable_at([c] * split.dims)


def _unstable_or_fault(check, case, rows, prediction, method, predicted, values):
    """A finding for runs that stopped, or None when every run finished."""
    stopped = _stopped(rows)
    if stopped is None:
        return None
    context = _context(case, rows, method)
    if stopped.fault_at is not None:
        return Finding(check, context, predicted, _stopped_text(stopped), FAULT, values)
    if _claimed_stable(prediction, rows):
        return Finding(check, context, predicted + " (split scheme claimed stable here)",
                       _stopped_text(stopped), DISAGREE, values)
    return Finding(check, context, "no claim: the split scheme is not claimed stable at "
                   "this Courant number", _stopped_text(stopped), NO_CLAIM, values)


def _conservation(case, rows, prediction, method, precision) -> Finding:
    tol = mass_tolerance(precision)
    drift = max(r.mass_drift for r in rows)
    values = {"case": case.name, "mass_drift": drift, "tolerance": tol}
    predicted = f"total kept to round-off (relative drift <= {tol:g})"
    stopped = _unstable_or_fault("conservation", case, rows, prediction, method, predicted, values)
    if stopped is not None:
        return stopped
    measured = f"largest relative mass drift {drift:.2e}"
    context = _context(case, rows, method)
    if prediction.conservative is not True:
        return Finding("conservation", context, "no claim (not claimed conservative)", measured,
                       NO_CLAIM, values)
    return Finding("conservation", context, predicted, measured,
                   AGREE if drift <= tol else DISAGREE, values)


def _convergence(case, rows, orders, prediction, method) -> Finding:
    split = prediction.claims.split
    constant = case.coefficients == "constant"
    claimed = split.order_overall if constant else split.order_variable
    finest = orders["l1"][-1] if orders["l1"] else float("nan")
    values = {"case": case.name, "observed_order": finest, "predicted_order": claimed,
              "pair_orders": orders["l1"]}
    wording = "constant" if constant else "variable"
    predicted = (f"order {claimed} with {wording} coefficients" if claimed is not None
                 else "order undecided")
    stopped = _unstable_or_fault("convergence", case, rows, prediction, method, predicted,
                                 values)
    if stopped is not None:
        return stopped
    context = _context(case, rows, method)
    measured = f"l1 order {fmt(finest)} (pairs: {', '.join(fmt(o) for o in orders['l1'])})"
    if claimed is None:
        return Finding("convergence", context, "no claim: order undecided", measured,
                       NO_CLAIM, values)
    if _claimed_stable(prediction, rows) is not True:
        return Finding("convergence", context, "no claim: the split scheme is not claimed "
                       "stable at this Courant number", measured, NO_CLAIM, values)
    error = rows[-1].l1
    if error > RESOLVED_L1:
        return Finding("convergence", context, f"no claim: {predicted}, but the finest grid "
                       f"does not resolve the field (l1 error {fmt(error)} > {RESOLVED_L1:g})",
                       measured, NO_CLAIM, values)
    jump = case.field.jump_derivative
    allowed = (float(claimed) if jump is None
               else min(float(claimed), claimed * (jump + 1) / (claimed + 1)))
    nonlinear = not prediction.claims.linear or prediction.fct
    tol = LIMITED_ORDER_TOL if nonlinear else LINEAR_ORDER_TOL
    values["lowest_expected_order"] = allowed - tol
    ok = math.isfinite(finest) and finest >= allowed - tol
    if allowed < claimed:
        predicted += f"; at most {fmt(allowed)} on this field (its second derivative jumps)"
    predicted += f" (asymptotic: l1 order at least {fmt(allowed - tol)} on the finest pair)"
    return Finding("convergence", context, predicted, measured, AGREE if ok else DISAGREE,
                   values)


def _covers(verdict_where, top: float) -> bool:
    """The claimed set holds every Courant number from 0 up to top."""
    return any(p.lo <= 1e-12 and p.hi >= top - 1e-12 for p in verdict_where.parts)


def _bound_reason(prediction: Prediction, top: float) -> str | None:
    """Why every sweep of a velocity constant along its lines stays within bounds, or None."""
    claims = prediction.claims
    if prediction.clip is not None:
        return "post-step clamp"
    if prediction.fct and claims.bounded.holds and _covers(claims.bounded.where, top):
        return "flux-corrected transport"
    if claims.monotone.holds and _covers(claims.monotone.where, top):
        return "monotone"
    if claims.tvd.holds and _covers(claims.tvd.where, top):
        return "TVD"
    return None


def _bounds(case, rows, prediction, method) -> Finding:
    lo, hi = rows[-1].initial_min, rows[-1].initial_max
    overshoot = max(r.overshoot for r in rows)
    seen = (min(r.sweep_min for r in rows), max(r.sweep_max for r in rows))
    values = {"case": case.name, "overshoot": overshoot, "sweep_min": seen[0],
              "sweep_max": seen[1], "initial_min": lo, "initial_max": hi}
    context = _context(case, rows, method)
    split = prediction.claims.split
    top = max(d.fraction for d in split.directions) * rows[-1].courant
    reason = _bound_reason(prediction, top) if case.flow.name in CONSTANT_ALONG_SWEEPS else None
    if reason == "post-step clamp":
        lo, hi = prediction.clip
    predicted = (f"within [{fmt(lo)}, {fmt(hi)}] ({reason}: each sweep is a 1-D step with a "
                 "velocity constant along its lines)" if reason else None)
    stopped = _unstable_or_fault("bounds", case, rows, prediction, method,
                                 predicted or "no claim", values)
    if stopped is not None:
        return stopped
    measured = (f"range after any sweep [{fmt(seen[0], 4)}, {fmt(seen[1], 4)}], at the end "
                f"[{fmt(min(r.min for r in rows), 4)}, {fmt(max(r.max for r in rows), 4)}]; "
                f"overshoot {overshoot:.2e}")
    if reason is None:
        why = ("split sweeps with a velocity that varies along them do not keep a constant "
               "constant, so no bound carries over" if case.flow.name not in CONSTANT_ALONG_SWEEPS
               else "no 1-D bound claimed for every Courant number up to the sweeps'")
        return Finding("bounds", context, f"no claim ({why})", measured, NO_CLAIM, values)
    slack = 1e3 * np.finfo(float).eps * max(abs(lo), abs(hi), 1.0)
    ok = seen[0] >= lo - slack and seen[1] <= hi + slack
    return Finding("bounds", context, predicted, measured, AGREE if ok else DISAGREE, values)
