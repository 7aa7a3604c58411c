"""`verify` exists to catch a wrong analysis: feed it wrong claims and it must disagree.

Each mutation test takes the analysis's own document for a bundled example (which
verify agrees with: test_harness_examples.py), changes one claim to something
known false from the literature, and requires a DISAGREE from the finding that
tests it. Then: a missing verdict fails loudly, "no claim" is said where the
analysis claims nothing, NaN from finite data is a kernel fault (not divergence),
and the stability probe finds growth however the stable set is shaped.
"""
from __future__ import annotations

import copy
import json
from fractions import Fraction
from pathlib import Path

import numpy as np
import pytest

from fluxloom.compiler import load_scheme, scheme_from_text
from fluxloom.compiler.analysis.claims import DocumentError, read_claims
from fluxloom.runtime import harness
from fluxloom.runtime.cli import main
from fluxloom.runtime.commands import verify as verify_command
from fluxloom.runtime.prediction import analysis_document
from fluxloom.runtime.findings import Options, Prediction, verify_kernel
from fluxloom.runtime.kernel import load_kernel
from fluxloom.runtime.report import verification_json, verification_text
from harness_kernels import HandKernel

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
QUICK = Options(cells=(50, 100, 200), conservation_steps=60, stability=False)
WITH_STABILITY = Options(cells=(50, 100), conservation_steps=20, stability=True)


def document(stem: str, courant: float = 0.5) -> tuple[object, dict]:
    scheme = load_scheme(EXAMPLES / f"{stem}.loom")
    return scheme, copy.deepcopy(analysis_document(scheme, courant))


def courant_set(main=None, islands=()) -> dict:
    """The document's fields for a Courant set: main interval (lo, hi) and point islands."""
    def span(lo, hi):
        return {"courant_min": float(Fraction(str(lo))), "courant_min_exact": str(lo),
                "courant_max": None if hi == "oo" else float(Fraction(str(hi))),
                "courant_max_exact": str(hi)}
    out = span(*main) if main else {"courant_min": None, "courant_min_exact": None,
                                    "courant_max": None, "courant_max_exact": None}
    out["islands"] = [span(p, p) for p in islands]
    return out


def set_stability(doc: dict, kind: str, main=None, islands=()) -> None:
    """Claim a stable set for the scheme and for its one linear scheme."""
    fields = courant_set(main, islands)
    doc["stability"].update(kind=kind, **fields)
    for standin in doc["stability"]["schemes"]:
        standin.update(kind=kind, **fields)


def run(scheme, doc: dict, options: Options = QUICK, backend: str = "numpy"):
    return verify_kernel(load_kernel(scheme, backend), Prediction.from_document(doc), options)


def verdicts(result, check: str) -> set[str]:
    return {f.verdict for f in result.findings if f.check == check}


# ---- mutation tests: a wrong claim must be caught ------------------------------------

def test_over_claimed_order_is_caught():
    # First-order upwind (LeVeque 2002, Finite Volume Methods, sec. 8.6, from memory)
    # claimed second order.
    scheme, doc = document("upwind")
    doc["order"].update(overall=2, at_courant=2, space=2, time=2)
    assert "disagree" in verdicts(run(scheme, doc), "convergence")


def test_under_claimed_order_is_caught():
    # Lax-Wendroff is second order (Lax and Wendroff 1960, from memory), claimed first.
    scheme, doc = document("lax_wendroff")
    doc["order"].update(overall=1, at_courant=1, space=1, time=1)
    assert "disagree" in verdicts(run(scheme, doc), "convergence")


@pytest.mark.parametrize("stem, kind, main, islands", [
    # Lax-Wendroff is stable for c <= 1 exactly (von Neumann; reference_values.STABLE_INTERVAL, LeVeque 2002 [mem])
    ("lax_wendroff", "conditional", (0, "5/4"), ()),         # too wide
    ("lax_wendroff", "conditional", (0, "3/4"), ()),         # too narrow
    ("lax_wendroff", "conditional", (0, 1), ("3/2",)),       # an island that is not there
    ("lax_wendroff", "unconditional", (0, "oo"), ()),        # false unconditional
    ("upwind", "unstable", None, ()),                        # false unstable
    # FTCS grows at every c > 0: |G|^2 = 1 + c^2 sin^2(theta) (common practice, no source)
    ("ftcs", "conditional", (0, 1), ()),
    # QUICKEST is stable on [0, 1] and again at c = 2 (Leonard 1979 [mem]; reference_values.QUICKEST_ISLAND):
    ("quickest", "conditional", (0, 1), ()),                 # the island missed
])
def test_wrong_stable_set_is_caught(stem, kind, main, islands):
    scheme, doc = document(stem)
    set_stability(doc, kind, main, islands)
    result = run(scheme, doc, WITH_STABILITY)
    finding = next(f for f in result.findings if f.check == "stability")
    assert finding.verdict == "disagree", (finding.predicted, finding.measured)


def test_a_missed_island_is_named_in_the_finding():
    scheme, doc = document("quickest")
    set_stability(doc, "conditional", (0, 1))
    finding = next(f for f in run(scheme, doc, WITH_STABILITY).findings if f.check == "stability")
    assert "stable at c = 2 where growth is predicted" in finding.measured


def test_too_wide_stable_interval_of_a_limited_scheme_is_caught():
    # van Leer limited Lax-Wendroff: every linear scheme standing for it is unstable past
    # c = 1 (LW and upwind, LeVeque 2002 [mem]); claimed stable up to 2.
    scheme, doc = document("lw_vanleer")
    for part in [doc["stability"], *doc["stability"]["schemes"]]:
        part.update(courant_max=2.0, courant_max_exact="2")
    finding = next(f for f in run(scheme, doc, WITH_STABILITY).findings if f.check == "stability")
    assert finding.verdict == "disagree"


@pytest.mark.parametrize("claim", ["tvd", "monotone"])
def test_false_tvd_or_monotone_claim_is_caught(claim):
    # Lax-Wendroff oscillates at a jump (Godunov 1959: a linear second-order scheme is not
    # monotone; common practice): claimed TVD, or monotone, for every c in [0, 1].
    scheme, doc = document("lax_wendroff")
    doc[claim].update(holds=True, **courant_set((0, 1)))
    result = run(scheme, doc)
    checks = ("tv",) if claim == "tvd" else ("extrema", "bounds", "tv")
    for check in checks:
        assert "disagree" in verdicts(result, check), check


def test_false_tvd_claim_for_a_limiter_outside_sweby_region_is_caught():
    # lw_overreach is TVD only on [1/3, 2/3] and at c = 1 (Sweby 1984 [mem]; reference_values.OVERREACH_TVD);
    # at c = 0.8 total variation grows. Claimed TVD on [0, 1].
    scheme, doc = document("lw_overreach", 0.8)
    doc["tvd"].update(holds=True, **courant_set((0, 1)))
    result = run(scheme, doc, Options(courant=0.8, cells=(50, 100), conservation_steps=20,
                                      stability=False))
    assert "disagree" in verdicts(result, "tv")


def test_false_conservation_claim_is_caught():
    # A clamp sets values into range without a matching flux: the total drifts (measured on
    # the same kernel in test_harness_core.py); claimed conservative.
    scheme, doc = document("lw_clip")
    doc["conservative"] = True
    assert "disagree" in verdicts(run(scheme, doc), "conservation")


def test_false_clamp_range_is_caught():
    # The kernel clamps to [0, 1]; the analysis claims [0.25, 0.75] (and the profiles are
    # mapped onto that range), so the clamp's promise is broken by Lax-Wendroff's wiggles.
    scheme, doc = document("lw_clip")
    doc["bounds"].update(low=0.25, low_exact="1/4", high=0.75, high_exact="3/4")
    assert "disagree" in verdicts(run(scheme, doc), "bounds")


def test_false_fct_bound_is_caught():
    # lw_fct is bounded where its low flux (upwind) is monotone, c <= 1 (Zalesak 1979 [mem]).
    # At c = 1.5 FCT leaves the bounds; claimed bounded for [0, 2].
    scheme, doc = document("lw_fct", 1.5)
    doc["bounded"].update(holds=True, courant_max=2.0, courant_max_exact="2")
    doc["bounds"]["bounded_for"].update(courant_max=2.0, courant_max_exact="2")
    result = run(scheme, doc, Options(courant=1.5, cells=(50, 100), conservation_steps=20,
                                      stability=False))
    assert {"disagree"} & (verdicts(result, "bounds") | verdicts(result, "extrema"))


def test_unmutated_documents_agree():
    # the control: the same runs on the analysis's own claims agree
    for stem in ("upwind", "lax_wendroff", "lw_clip"):
        scheme, doc = document(stem)
        result = run(scheme, doc)
        assert result.agree, [(f.check, f.predicted, f.measured) for f in result.disagreements]


# ---- claims are read strictly --------------------------------------------------------

@pytest.mark.parametrize("path", [
    ("stability",), ("tvd",), ("tvd", "holds"), ("monotone", "islands"),
    ("order", "at_courant"), ("conservative",), ("stability", "schemes"), ("bounded", "holds"),
    ("stability", "courant_max_exact"), ("limiters",),
])
def test_a_missing_verdict_fails_loudly(path):
    _, doc = document("lw_vanleer")
    holder = doc
    for key in path[:-1]:
        holder = holder[key]
    del holder[path[-1]]
    with pytest.raises(DocumentError, match=path[-1]):
        read_claims(doc)


@pytest.mark.parametrize("path, value", [
    (("tvd", "holds"), "yes"), (("conservative",), 1), (("order", "overall"), 2.5),
    (("stability", "kind"), "stable-ish"), (("schema",), 2),
])
def test_a_verdict_of_the_wrong_type_fails_loudly(path, value):
    _, doc = document("upwind")
    holder = doc
    for key in path[:-1]:
        holder = holder[key]
    holder[path[-1]] = value
    with pytest.raises(DocumentError):
        read_claims(doc)


def test_verify_stops_on_a_renamed_verdict(capsys, monkeypatch):
    real = verify_command.analysis_document

    def renamed(scheme, courant):
        doc = copy.deepcopy(real(scheme, courant))
        doc["total_variation"] = doc.pop("tvd")
        return doc
    monkeypatch.setattr(verify_command, "analysis_document", renamed)
    assert main(["verify", str(EXAMPLES / "upwind.loom")]) == 3
    assert "'tvd' is missing" in capsys.readouterr().err


# ---- no claim where the analysis claims nothing ----------------------------------------

def test_unstable_scheme_makes_no_convergence_claim():
    scheme, doc = document("ftcs")
    result = run(scheme, doc)
    conv = [f for f in result.findings if f.check == "convergence"]
    assert conv and all(f.verdict == "no claim" for f in conv)
    assert result.agree   # nothing claimed is contradicted


def test_undecided_verdicts_make_no_claim():
    # FCT's total variation is undecided in the analysis; its order is made undecided here
    scheme, doc = document("lw_fct")
    doc["order"].update(overall=None, at_courant=None, space=None, time=None)
    result = run(scheme, doc)
    assert verdicts(result, "tv") == {"no claim"}
    assert verdicts(result, "convergence") == {"no claim"}
    assert "where it claims nothing" in verification_text(result)


# ---- a NaN from finite data is a kernel fault ------------------------------------------

def _upwind_with_a_hole(qm1, q0, q1, c):
    # upwind, except that it divides 0 by 0 wherever two neighbours are equal
    with np.errstate(all="ignore"):
        return q0 * ((q1 - q0) / (q1 - q0))


def test_nan_from_finite_data_is_a_kernel_fault():
    scheme, doc = document("upwind")
    kernel = HandKernel("holey_upwind", _upwind_with_a_hole)
    result = verify_kernel(kernel, Prediction.from_document(doc),
                           Options(cells=(50, 100), conservation_steps=20, stability=False))
    faults = [f for f in result.findings if f.verdict == "fault"]
    # the square wave and the mixed profile have flat stretches: 0/0 at the first step
    assert {f.check for f in faults} >= {"bounds", "extrema", "tv"}
    assert all("kernel fault" in f.measured for f in faults)
    assert all(sh.diverged_at is None and sh.fault_at == 1 for sh in result.shapes)
    assert not result.agree
    doc_out = verification_json(result)
    assert doc_out["kernel_faults"] and doc_out["agree"] is False
    assert "KERNEL FAULT" in verification_text(result)


def test_divergence_is_not_a_fault():
    # FTCS grows until it passes the divergence limit: diverged, never a fault
    scheme, doc = document("ftcs", 0.9)
    result = run(scheme, doc, Options(courant=0.9, cells=(50, 100), stability=False))
    assert any(sh.diverged_at is not None for sh in result.shapes) or \
        any(conv.diverged for conv in result.convergence)
    assert not any(f.verdict == "fault" for f in result.findings)


# ---- the stability probe covers the whole predicted set ----------------------------------

# A scheme of our own: the cell update interpolates the upwind values at nodes 0..3 by the
# cubic through them (Lagrange in c), so it shifts exactly at c = 1, 2 and 3. Stable on
# [1, 2] (interpolation between the middle nodes) and at c = 3; at c = 1/2 it grows.
SHIFT3 = """scheme shift3 {
  time euler
  flux = u * ((c^2/6 - c + 11/6) * q[0] + (-c^2/3 + 3*c/2 - 7/6) * q[-1] + (c^2/6 - c/2 + 1/3) * q[-2])
}
"""


def lagrange_gain(c: float, n: int = 256) -> float:
    """max |G| over the modes of n cells, G = sum_k L_k(c) exp(-i k theta), computed with
    numpy from the Lagrange basis (independent of fluxloom)."""
    nodes = np.arange(4)
    theta = 2 * np.pi * np.arange(1, n // 2 + 1) / n
    g = np.zeros_like(theta, dtype=complex)
    for k in nodes:
        others = nodes[nodes != k]
        weight = np.prod([(c - m) / (k - m) for m in others])
        g += weight * np.exp(-1j * k * theta)
    return float(np.abs(g).max())


def test_growth_below_the_stable_set_is_found():
    scheme = scheme_from_text(SHIFT3)
    doc = analysis_document(scheme, 1.5)
    kernel = load_kernel(scheme, "numpy")
    pred = Prediction.from_document(doc)
    sweep = harness.stability_sweep(kernel, pred.probe_courants(spectral=True), linear=True)
    # the probe's gains are numpy's |G| (the kernel is measured, not the analysis)
    for probe in sweep.probes[::7]:
        assert probe.growth == pytest.approx(lagrange_gain(probe.courant), rel=1e-9)
    half = sweep.probe_at(0.5)
    # max |G| at c = 1/2 is 1.0887 over all theta, a little less on the grid's modes
    assert half.grows and half.growth == pytest.approx(lagrange_gain(0.5), rel=1e-9)
    assert 1.088 < half.growth <= 1.0886622
    # measured: [1, 2] and the point 3
    assert len(sweep.measured) == 2
    (lo, hi), (p, q) = sweep.measured
    assert abs(lo - 1) < 0.01 and abs(hi - 2) < 0.01 and abs(p - 3) < 0.01 and abs(q - 3) < 0.01


def test_stable_set_without_small_courant_numbers_agrees_and_a_wrong_one_does_not():
    scheme = scheme_from_text(SHIFT3)
    options = Options(courant=1.5, cells=(50, 100), conservation_steps=20)
    doc = copy.deepcopy(analysis_document(scheme, 1.5))
    right = run(scheme, doc, options)
    assert verdicts(right, "stability") == {"agree"}
    set_stability(doc, "conditional", (0, 2), ("3",))    # claims small c stable: wrong
    wrong = next(f for f in run(scheme, doc, options).findings if f.check == "stability")
    assert wrong.verdict == "disagree" and "grew at c = 0.01562" in wrong.measured
    assert 0.5 in wrong.values["grew_where_stable"]


ISLAND_ONLY = """scheme island_only {
  time euler
  flux = u * (q[0] + (1 - c) * (q[1] - q[0]))
}
"""


def test_unstable_except_an_island_keeps_the_island():
    # g = c q[0] + (1 - c) q[1]: G = 1 - c(1 - 1/z)(c + (1 - c) z), |G| > 1 for every
    # c != 1 somewhere in theta, and G = 1/z at c = 1 (checked with numpy below).
    theta = np.linspace(1e-3, np.pi, 2001)
    z = np.exp(1j * theta)
    for c in (0.25, 0.9, 1.1, 1.75):
        assert np.abs(1 - c * (1 - 1 / z) * (c + (1 - c) * z)).max() > 1 + 1e-6
    assert np.allclose(np.abs(1 - (1 - 1 / z)), 1)
    scheme = scheme_from_text(ISLAND_ONLY)
    options = Options(courant=1.0, cells=(50, 100), conservation_steps=20)
    result = run(scheme, copy.deepcopy(analysis_document(scheme, 1.0)), options)
    finding = next(f for f in result.findings if f.check == "stability")
    assert finding.predicted.startswith("unstable, stable only for c = 1")
    assert finding.verdict == "agree" and "c = 1.000" in finding.measured
    assert result.agree, [(f.check, f.measured) for f in result.disagreements]


# ---- the work verify takes is bounded ---------------------------------------------------

def test_a_tiny_courant_number_is_refused_before_any_work(capsys):
    assert main(["verify", str(EXAMPLES / "upwind.loom"), "--courant", "1e-6"]) == 2
    err = capsys.readouterr().err
    assert "capped at" in err and "smallest Courant number" in err and "Traceback" not in err


def test_a_huge_courant_number_is_the_instability_it_is(capsys):
    status = main(["verify", str(EXAMPLES / "lax_wendroff.loom"), "--courant", "1e300",
                   "--json"])
    doc = json.loads(capsys.readouterr().out)
    assert status == 0
    assert all(r["diverged_at"] == 1 and r["fault_at"] is None for r in doc["convergence"])
    assert {f["verdict"] for f in doc["findings"] if f["check"] == "convergence"} == {"no claim"}


def test_rational_courant_numbers_are_taken(capsys):
    status = main(["verify", str(EXAMPLES / "upwind.loom"), "--courant", "3/5", "--json"])
    doc = json.loads(capsys.readouterr().out)
    assert status == 0 and doc["courant"] == pytest.approx(0.6, rel=1e-15)
