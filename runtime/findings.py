"""Predicted against measured: each property the analysis states, checked on a kernel.

`verify_kernel` plans and runs the measurements (runtime/measurements.py) from a
`Prediction` (runtime/prediction.py, the analysis's typed claims) and judges
each with the rules of runtime/rules.py. Every finding says agree, disagree,
no claim (the analysis claims nothing there) or fault (the kernel made NaN or
Inf from finite data). JSON and text output live in runtime/report.py.
"""
from __future__ import annotations

from dataclasses import dataclass

from . import harness
from .measurements import SMOOTH, Measurements, Options, in_clip_range, mass_tolerance, measure
from .prediction import SMALL_DATA, Prediction
from .rules import (AGREE, DISAGREE, FAULT, NO_CLAIM, Finding, conservation_finding,
                    convergence_finding, godunov_finding, shape_findings, stability_finding,
                    symmetry_finding)

__all__ = ["AGREE", "DISAGREE", "FAULT", "NO_CLAIM", "SMALL_DATA", "Finding", "Options", "Prediction",
           "Verification", "in_clip_range", "judge", "mass_tolerance", "verification_json",
           "verify_kernel"]


@dataclass(frozen=True)
class Verification:
    scheme: str
    backend: str
    precision: str
    options: Options
    prediction: Prediction
    measurements: Measurements
    findings: tuple[Finding, ...]

    @property
    def convergence(self) -> tuple[harness.Convergence, ...]:
        return self.measurements.convergence

    @property
    def shapes(self) -> tuple[harness.Shape, ...]:
        return self.measurements.shapes

    @property
    def conservation(self) -> tuple[harness.Conservation, ...]:
        return self.measurements.conservation

    @property
    def stability(self) -> harness.Stability | None:
        return self.measurements.stability

    @property
    def mirror(self) -> float:
        return self.measurements.mirror.mismatch

    @property
    def agree(self) -> bool:
        """No finding contradicts a claim and the kernel never faulted."""
        return all(f.verdict in (AGREE, NO_CLAIM) for f in self.findings)

    @property
    def disagreements(self) -> list[Finding]:
        return [f for f in self.findings if f.verdict in (DISAGREE, FAULT)]

    @property
    def faults(self) -> list[Finding]:
        return [f for f in self.findings if f.verdict == FAULT]


def judge(m: Measurements, prediction: Prediction, options: Options, eps: float,
          precision: str) -> tuple[Finding, ...]:
    c = options.courant
    findings = [convergence_finding(conv, profile, prediction, c, eps)
                for profile, conv in zip(SMOOTH, m.convergence)]
    for sh in m.shapes:
        findings += shape_findings(sh, prediction, c)
    findings += [conservation_finding(cons, prediction, mass_tolerance(precision))
                 for cons in m.conservation]
    findings.append(symmetry_finding(m.mirror, min(c, 1.0), eps))
    if m.stability is not None:
        findings.append(stability_finding(m.stability, prediction))
    godunov = godunov_finding(prediction, m.shapes, m.convergence, c, eps)
    if godunov is not None:
        findings.append(godunov)
    return tuple(findings)


def verify_kernel(kernel, prediction: Prediction, options: Options = Options(),
                  progress=None) -> Verification:
    """Run every measurement on `kernel` and judge it against `prediction`."""
    m = measure(kernel, prediction, options, progress)
    findings = judge(m, prediction, options, harness.round_off(kernel), kernel.precision)
    return Verification(prediction.scheme, kernel.backend, kernel.precision, options,
                        prediction, m, findings)


def verification_json(v: Verification) -> dict:
    """The document of `fluxloom verify --json` (kept here for callers; see report.py)."""
    from .report import verification_json as document

    return document(v)
