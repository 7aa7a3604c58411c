"""`fluxloom verify`: exit status, the JSON schema, reports, and bad input."""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from fluxloom.runtime.cli import main
from fluxloom.runtime.commands import verify as verify_command

import reference_values as ref

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"


def run_json(capsys, *args):
    status = main(["verify", *map(str, args), "--json"])
    return status, json.loads(capsys.readouterr().out)


def test_upwind_agrees_and_exits_0(capsys):
    status = main(["verify", str(EXAMPLES / "upwind.loom")])
    out = capsys.readouterr().out
    assert status == 0
    assert "findings agree with the analysis" in out
    assert "predicted:" in out and "measured:" in out


def test_json_schema(capsys):
    status, doc = run_json(capsys, EXAMPLES / "lax_wendroff.loom")
    assert status == 0 and doc["agree"] is True
    for key in ("convergence", "observed_order", "predicted_order", "bounded", "new_extrema",
                "tv_increase", "mass_drift", "stability", "agree", "findings"):
        assert key in doc
    row = doc["convergence"][0]
    assert {"profile", "n", "l1", "l2", "linf"} <= set(row)
    assert [r["n"] for r in doc["convergence"] if r["profile"] == "sine"] == [25, 50, 100, 200, 400, 800]
    assert set(doc["observed_order"]) == {"l1", "l2", "linf"}
    assert {"predicted_max", "measured_max"} <= set(doc["stability"])
    assert all(f["verdict"] in ("agree", "disagree", "no claim", "fault") for f in doc["findings"])
    assert {f["check"] for f in doc["findings"]} >= {"convergence", "bounds", "extrema", "tv",
                                                     "conservation", "stability", "symmetry"}


@pytest.mark.parametrize("stem, order", [("upwind", 1), ("lax_wendroff", 2)])
def test_measured_orders_on_generated_kernels(capsys, stem, order):
    # First-order upwind and second-order Lax-Wendroff: LeVeque 2002, Finite Volume Methods
    # for Hyperbolic Problems, sec. 8.6 (citation from memory).
    status, doc = run_json(capsys, EXAMPLES / f"{stem}.loom")
    assert doc["predicted_order"] == order
    assert abs(doc["observed_order"]["l1"] - order) < 0.1


def test_lax_wendroff_stability_limit_measured(capsys):
    # reference_values.STABLE_INTERVAL: Lax-Wendroff stable for c <= 1 ([mem], derived).
    status, doc = run_json(capsys, EXAMPLES / "lax_wendroff.loom", "--backend", "c")
    assert doc["backend"] == "c"
    limit = ref.STABLE_INTERVAL["lax_wendroff"].value[1]
    assert doc["stability"]["measured_max"] == pytest.approx(limit, abs=0.02)


def test_ftcs_is_found_unstable_everywhere_and_that_agrees(capsys):
    # von Neumann: |G|^2 = 1 + c^2 sin^2(theta) (common practice, no source).
    status, doc = run_json(capsys, EXAMPLES / "ftcs.loom")
    assert status == 0
    assert doc["stability"]["unstable_everywhere"] is True
    assert doc["stability"]["measured_max"] is None
    diverged = [r for r in doc["convergence"] if r["diverged_at"] is not None]
    assert diverged and all(r["l1"] is None for r in diverged)


def test_overreaching_limiter_caught_at_c_08(capsys):
    # Outside Sweby's region: TVD only for 1/3 <= c <= 2/3 (reference_values.OVERREACH_TVD;
    # Sweby 1984, from memory). At c = 0.8 the square wave's total variation grows.
    status, doc = run_json(capsys, EXAMPLES / "lw_overreach.loom", "--courant", "0.8")
    assert status == 0
    assert doc["tv_increase"] > 1e-3
    tv = [f for f in doc["findings"] if f["check"] == "tv"]
    # the analysis claims nothing at c = 0.8, so the growth is reported, not judged
    assert all(f["verdict"] == "no claim" and "c = 1" in f["predicted"] for f in tv)


@pytest.mark.parametrize("velocity", ["-1", "varying"])
def test_velocity_options(capsys, velocity):
    status, doc = run_json(capsys, EXAMPLES / "upwind.loom", "--velocity", velocity)
    assert status == 0 and doc["velocity"] == velocity
    assert doc["mass_drift"] <= 1e-12
    if velocity == "varying":
        assert "varying" in doc["mass_drift_by_velocity"]


def test_a_disagreement_exits_1(capsys, monkeypatch):
    # An analysis that claims too much (upwind of order 2) must be caught.
    real = verify_command.analysis_document

    def overclaiming(scheme, courant):
        doc = dict(real(scheme, courant))
        doc["order"] = {**doc["order"], "overall": 2, "at_courant": 2}
        return doc
    monkeypatch.setattr(verify_command, "analysis_document", overclaiming)
    status = main(["verify", str(EXAMPLES / "upwind.loom")])
    out = capsys.readouterr().out
    assert status == 1
    assert "DISAGREE" in out


def test_report_directory(tmp_path, capsys):
    target = tmp_path / "report"
    assert main(["verify", str(EXAMPLES / "upwind.loom"), "--report", str(target)]) == 0
    names = sorted(p.name for p in target.iterdir())
    assert names == ["upwind-convergence.png", "upwind-profiles.png", "upwind-stability.png",
                     "upwind-verify.json", "upwind-verify.md"]
    assert (target / "upwind-convergence.png").read_bytes().startswith(b"\x89PNG")
    assert "![convergence](upwind-convergence.png)" in (target / "upwind-verify.md").read_text()
    # a second run replaces its own files
    assert main(["verify", str(EXAMPLES / "upwind.loom"), "--report", str(target)]) == 0


def test_report_does_not_overwrite_a_users_file(tmp_path, capsys):
    mine = tmp_path / "upwind-verify.md"
    mine.write_text("my notes\n")
    assert main(["verify", str(EXAMPLES / "upwind.loom"), "--report", str(tmp_path)]) == 2
    assert "not written by fluxloom" in capsys.readouterr().err
    assert mine.read_text() == "my notes\n"
    assert main(["verify", str(EXAMPLES / "upwind.loom"), "--report", str(tmp_path),
                 "--force"]) == 0
    assert "fluxloom" in mine.read_text()


def test_missing_file_is_bad_input(capsys):
    assert main(["verify", "no/such/scheme.loom"]) == 2
    err = capsys.readouterr().err
    assert "error" in err and "Traceback" not in err


def test_unknown_param_is_bad_input(capsys):
    assert main(["verify", str(EXAMPLES / "upwind.loom"), "--set", "kappa=1"]) == 2
    assert "has no param 'kappa'" in capsys.readouterr().err


@pytest.mark.parametrize("value", ["0", "-1", "nan", "fast", "1/0", "1e999999999", "2/-0"])
def test_bad_courant_is_bad_input(capsys, value):
    assert main(["verify", str(EXAMPLES / "upwind.loom"), "--courant", value]) == 2
    err = capsys.readouterr().err
    assert "--courant" in err and "Traceback" not in err


def test_entry_point_runs_as_a_program():
    done = subprocess.run([sys.executable, "-m", "fluxloom.runtime.cli", "verify",
                           str(EXAMPLES / "upwind.loom"), "--json"],
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    assert json.loads(done.stdout)["agree"] is True


@pytest.mark.parametrize("stem, courant", [("upwind", "1"), ("quickest", "2")])
def test_exact_shifts_are_recognised(capsys, stem, courant):
    # At c = 1 upwind moves every value one cell; QUICKEST is stable again at c = 2 exactly
    # (reference_values.QUICKEST_ISLAND: Leonard 1979, from memory) and moves values two
    # cells: no order to fit.
    assert stem != "quickest" or float(courant) == ref.QUICKEST_ISLAND.value
    status, doc = run_json(capsys, EXAMPLES / f"{stem}.loom", "--courant", courant)
    assert status == 0
    convergence = [f for f in doc["findings"] if f["check"] == "convergence"]
    assert all(f.get("exact") for f in convergence)


def test_fromm_at_half_courant_measures_the_order_the_analysis_gives(capsys):
    # Fromm is third order at c = 1/2, where a3 = (u dx^2/12)(1 - c)(1 - 2c) vanishes
    # (reference_values.FROMM_ORDER_AT_HALF: Fromm 1968, from memory): check must say 3
    # there and verify must measure it.
    assert main(["verify", str(EXAMPLES / "fromm.loom"), "--courant", "0.5", "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    order = ref.FROMM_ORDER_AT_HALF.value
    assert doc["predicted_order"] == order
    assert abs(doc["observed_order"]["l1"] - order) < 0.3
