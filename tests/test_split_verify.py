"""`check --dims` and `verify --dims 2`: the JSON keys and text of split schemes, bad
options, and verify's 2-D findings fed wrong claims or wrong kernels (they must disagree)."""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from fluxloom.compiler import load_scheme
from fluxloom.compiler.analysis import analyse
from fluxloom.compiler.analysis.splitting import split_document
from fluxloom.runtime.cli import main
from fluxloom.runtime.commands import verify as verify_command
from fluxloom.runtime.kernel import load_kernel
from fluxloom.runtime.multidim import findings as split_findings
from fluxloom.runtime.multidim.findings import verify_split
from fluxloom.runtime.prediction import Prediction
from fluxloom.runtime.sweeps import KernelSweep

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
SMOOTH = ("swirl_hump",)


def _document(stem: str, method: str = "strang") -> dict:
    return split_document(analyse(load_scheme(EXAMPLES / f"{stem}.loom")), 2, method)


def _verdicts(sv, check: str) -> dict:
    return {f.context.split(",")[0]: f.verdict for f in sv.findings if f.check == check}


# ---- check --dims ----------------------------------------------------------------------

def test_check_json_keeps_the_usual_keys_and_adds_split(capsys):
    assert main(["check", str(EXAMPLES / "lax_wendroff.loom"), "--json"]) == 0
    plain = json.loads(capsys.readouterr().out)
    assert main(["check", str(EXAMPLES / "lax_wendroff.loom"), "--json", "--dims", "2",
                 "--split", "strang"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert set(plain) <= set(doc) and "split" not in plain
    split = doc["split"]
    assert split["dims"] == 2 and split["method"] == "strang"
    assert doc["order"]["overall"] == 2 == split["order"]["overall"]
    # Lax-Wendroff's face sees only its own velocity: first order where it varies
    assert doc["order"]["variable_coefficients"] == 1 == split["order"]["variable_coefficients"]
    x, y = split["stability"]["directions"]
    # Lax-Wendroff is stable for |c| <= 1 (REFERENCE.md); Strang's x sweeps take dt/2
    assert (x["courant_max"], x["fraction_exact"]) == (2.0, "1/2")
    assert (y["courant_max"], y["fraction_exact"]) == (1.0, "1")
    assert "[A_x, [A_x, A_y]]" in split["splitting_error"]["text"]


def test_check_text_words_the_split_scheme(capsys):
    assert main(["check", str(EXAMPLES / "quickest.loom"), "--dims", "2", "--split", "lie"]) == 0
    out = capsys.readouterr().out
    assert "split 2-D, lie: x, y" in out
    assert "stable for c_x in [0, 1] or c_x = 2; c_y in [0, 1] or c_y = 2" in out
    assert "3 with constant coefficients (the sweeps commute); 1 with variable coefficients" in out
    assert "dt^2 (-1/2 [A_x, A_y])" in out


@pytest.mark.parametrize("args, message", [
    (["--split", "lie"], "give --dims 2 or 3"),
    (["--dims", "4"], "--dims 4: choose 1, 2 or 3"),
    (["--dims", "0"], "--dims 0"),
])
def test_check_refuses_bad_dims(capsys, args, message):
    assert main(["check", str(EXAMPLES / "upwind.loom"), *args]) == 2
    assert message in capsys.readouterr().err


# ---- verify --dims 2: options -------------------------------------------------------------

@pytest.mark.parametrize("args, message", [
    (["--dims", "2", "--grid", "stretched"], "--grid stretched with --dims 2"),
    (["--dims", "3", "--grid", "perturbed"], "--grid perturbed with --dims 3"),
    (["--split", "strang"], "give --dims 2 or 3"),
])
def test_verify_refuses_what_is_not_built(capsys, args, message):
    assert main(["verify", str(EXAMPLES / "upwind.loom"), *args]) == 2
    err = capsys.readouterr().err
    assert message in err and "Traceback" not in err


@pytest.mark.slow
def test_verify_dims_2_json_and_report(capsys, tmp_path):
    status = main(["verify", str(EXAMPLES / "upwind.loom"), "--dims", "2", "--split", "lie",
                   "--json", "--report", str(tmp_path)])
    doc = json.loads(capsys.readouterr().out)
    assert status == 0 and doc["agree"] is True
    assert {"convergence", "observed_order", "findings", "stability"} <= set(doc)  # the usual
    assert doc["split"]["method"] == "lie" and doc["split"]["grids"] == [16, 32, 64]
    assert len(doc["cases"]) == 9
    for case in doc["cases"]:
        assert {"name", "n", "l1", "l2", "linf", "min", "max", "mass_drift"} <= set(case)
        assert case["mass_drift"] <= 1e-12
    written = {p.name for p in tmp_path.iterdir()}
    assert {"upwind-2d-lie.md", "upwind-2d-lie-swirl_hump.png",
            "upwind-2d-lie-convergence.png"} <= written


@pytest.mark.slow
def test_verify_dims_2_disagrees_with_a_wrong_split_order(capsys, monkeypatch):
    # The tempting claim min(2, 1-D order) = 2 for Lax-Wendroff under Strang splitting: its
    # face misses the -dt/2 u u_x q part of the flux where the velocity varies, and the swirl
    # shows first order.
    def wrong(scheme, courant, dims, method):
        doc = split_document(analyse(scheme, courant), dims, method)
        doc["split"]["order"]["variable_coefficients"] = 2
        doc["order"]["variable_coefficients"] = 2
        return doc
    monkeypatch.setattr(verify_command, "split_analysis_document", wrong)
    status = main(["verify", str(EXAMPLES / "lax_wendroff.loom"), "--backend", "c", "--dims",
                   "2", "--json"])
    doc = json.loads(capsys.readouterr().out)
    assert status == 1
    bad = [f for f in doc["findings"] if f["verdict"] == "disagree"]
    assert [f["check"] for f in bad] == ["convergence"] and "2-D" in bad[0]["context"]


# ---- verify --dims 2: the rules, fed wrong claims and wrong kernels --------------------------

@pytest.mark.parametrize("stem, claimed", [("kappa_rk3", 2), ("fromm", 1), ("vanleer_rk3", 2)])
def test_split_order_claims_agree_with_the_swirl(stem, claimed):
    # Strang splitting is second order with variable coefficients (Strang 1968, from memory);
    # a single-step face is first order where the velocity varies along the sweep [derived;
    # measured against characteristics in tests/test_split_analysis.py]
    kernel = load_kernel(load_scheme(EXAMPLES / f"{stem}.loom"), "c")
    doc = _document(stem)
    assert doc["split"]["order"]["variable_coefficients"] == claimed
    sv = verify_split(kernel, Prediction.from_document(doc), "strang", 0.5, cases=SMOOTH)
    assert _verdicts(sv, "convergence") == {"2-D swirl_hump": "agree"}


def test_lie_splitting_is_not_second_order():
    kernel = load_kernel(load_scheme(EXAMPLES / "centred_rk4.loom"), "c")
    doc = _document("centred_rk4", "lie")
    assert doc["split"]["order"]["variable_coefficients"] == 1
    sv = verify_split(kernel, Prediction.from_document(doc), "lie", 0.5, cases=SMOOTH)
    assert _verdicts(sv, "convergence") == {"2-D swirl_hump": "agree"}
    doc["split"]["order"]["variable_coefficients"] = 2
    judged = split_findings.judge_split(sv.runs, sv.orders, Prediction.from_document(doc), "lie",
                                        "double")
    assert {f.verdict for f in judged if f.check == "convergence"} == {"disagree"}


class _LeakySweep(KernelSweep):
    """A sweep that loses a little mass: a kernel bug conservation must catch."""

    def __call__(self, axis, q, u_face, dt_dx):
        return super().__call__(axis, q, u_face, dt_dx) * (1 - 1e-9)


def test_a_sweep_that_loses_mass_is_caught(monkeypatch):
    kernel = load_kernel(load_scheme(EXAMPLES / "upwind.loom"), "c")
    prediction = Prediction.from_document(_document("upwind", "lie"))
    fair = verify_split(kernel, prediction, "lie", 0.5, grids=(16, 32))
    assert set(_verdicts(fair, "conservation").values()) == {"agree"}
    monkeypatch.setattr(split_findings, "KernelSweep", _LeakySweep)
    leaky = verify_split(kernel, prediction, "lie", 0.5, grids=(16, 32))
    assert set(_verdicts(leaky, "conservation").values()) == {"disagree"}


def test_bounds_in_rotation_agree_for_a_monotone_scheme_and_catch_a_false_claim():
    # Upwind is monotone for 0 <= c <= 1 (Godunov 1959, from memory): in solid-body rotation
    # each sweep has a velocity constant along its lines, so the bound carries over.
    upwind = Prediction.from_document(_document("upwind"))
    sv = verify_split(load_kernel(load_scheme(EXAMPLES / "upwind.loom"), "c"), upwind,
                      "strang", 0.5, grids=(16, 32))
    verdicts = _verdicts(sv, "bounds")
    assert verdicts["2-D rotation_cylinder"] == "agree"
    assert verdicts["2-D swirl_hump"] == "no claim"        # reported, not judged
    # Lax-Wendroff's kernel held against upwind's claims: its overshoot is caught
    sv = verify_split(load_kernel(load_scheme(EXAMPLES / "lax_wendroff.loom"), "c"), upwind,
                      "strang", 0.5, grids=(16, 32))
    assert _verdicts(sv, "bounds")["2-D rotation_cylinder"] == "disagree"


def test_divergence_under_a_stability_claim_disagrees():
    # FTCS is unstable for every c > 0 (|G|^2 = 1 + c^2 sin^2(theta), REFERENCE.md)
    ftcs = load_kernel(load_scheme(EXAMPLES / "ftcs.loom"), "c")
    own = verify_split(ftcs, Prediction.from_document(_document("ftcs")), "strang", 0.9,
                       grids=(16, 32))
    assert "disagree" not in {f.verdict for f in own.findings}
    assert any(r.diverged_at is not None for r in own.runs)
    claimed = verify_split(ftcs, Prediction.from_document(_document("upwind")), "strang", 0.9,
                           grids=(16, 32))
    assert "disagree" in set(_verdicts(claimed, "conservation").values())


def test_float_kernels_keep_mass_to_their_precision():
    kernel = load_kernel(load_scheme(EXAMPLES / "lw_vanleer.loom"), "c", precision="float")
    sv = verify_split(kernel, Prediction.from_document(_document("lw_vanleer")), "strang", 0.5,
                      grids=(16, 32))
    assert set(_verdicts(sv, "conservation").values()) == {"agree"}
    assert all(0 < r.mass_drift <= 1e-5 or r.case == "swirl_constant" for r in sv.runs)
    assert all(np.isfinite(r.l1) for r in sv.runs)
