"""verify --grid: convergence on stretched and perturbed cells through the sweep's per-cell
dt/dx, held against published facts and against wrong predictions.

Facts: a second-order scheme keeps second order on a smoothly stretched grid when its
coefficients are used in index space (common practice, no source); first-order upwind on
randomly perturbed widths has an O(1) local truncation error yet converges at first order
(supraconvergence: Wendroff and White 1989, Comput. Math. Appl. 18:761; Kreiss, Manteuffel,
Swartz, Wendroff and White 1986, Math. Comp. 47:537; [mem])."""
from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pytest

from fluxloom.compiler import load_scheme
from fluxloom.compiler.analysis import analyse
from fluxloom.runtime.grid_findings import verify_grids, width_aware_advance
from fluxloom.runtime.grids import uniform
from fluxloom.runtime.kernel import load_kernel, run_periodic
from fluxloom.runtime.prediction import Prediction
from fluxloom.runtime.profiles import SINE

from conftest import EXAMPLES

CELLS = (32, 64, 128)


def _prediction(stem: str, order=None) -> Prediction:
    doc = analyse(load_scheme(EXAMPLES / f"{stem}.loom"), 0.5).to_json()
    if order is not None:
        doc["order"]["overall"] = doc["order"]["at_courant"] = order
    return Prediction.from_document(doc)


def test_width_aware_stepper_on_a_uniform_grid_is_the_periodic_step():
    kernel = load_kernel(load_scheme(EXAMPLES / "lw_vanleer.loom"), "c")
    grid = uniform(48)
    q0 = grid.cell_averages(SINE)
    got = width_aware_advance(kernel)(q0, grid, 1.0, 0.5 / 48, 30)
    want = run_periodic(kernel, q0, np.ones(49), 0.5, 30)
    # the grid's widths, differences of i/48, differ from 1/48 in the last bits
    np.testing.assert_allclose(got, want, rtol=0, atol=1e-13)


def test_second_order_kept_on_stretched_grids_and_a_false_claim_is_caught():
    kernel = load_kernel(load_scheme(EXAMPLES / "lax_wendroff.loom"), "c")
    fair = verify_grids(kernel, _prediction("lax_wendroff"), "stretched", 0.5, CELLS)
    assert [r.grid for r in fair.runs] == ["uniform", "stretched (a = 0.2)",
                                           "stretched (a = 0.4)"]
    assert {f.verdict for f in fair.findings} == {"agree"}
    assert all(r.orders["l1"][-1] > 1.8 for r in fair.runs)
    upwind = load_kernel(load_scheme(EXAMPLES / "upwind.loom"), "c")
    wrong = verify_grids(upwind, _prediction("upwind", order=2), "stretched", 0.5, CELLS)
    assert {f.verdict for f in wrong.findings} == {"disagree"}


def test_upwind_supraconverges_on_perturbed_widths_and_is_reported_without_a_claim():
    kernel = load_kernel(load_scheme(EXAMPLES / "upwind.loom"), "numpy")
    found = verify_grids(kernel, _prediction("upwind"), "perturbed", 0.5, CELLS)
    (finding,) = found.findings
    assert finding.verdict == "no claim" and "supraconvergence" in finding.predicted
    assert 0.85 < found.runs[1].orders["l1"][-1] < 1.15
    assert finding.values["order_lost"] == pytest.approx(
        found.runs[0].orders["l1"][-1] - found.runs[1].orders["l1"][-1])


def test_verify_grid_command_json_and_refusals():
    spec = str(EXAMPLES / "upwind.loom")
    done = subprocess.run([sys.executable, "-m", "fluxloom.runtime.cli", "verify", spec, "--grid",
                           "stretched", "--json"], capture_output=True, text=True)
    grids = json.loads(done.stdout)["grids"]
    assert grids["kind"] == "stretched" and len(grids["runs"]) == 3
    refused = subprocess.run([sys.executable, "-m", "fluxloom.runtime.cli", "verify",
                              str(EXAMPLES / "lw_fct.loom"), "--grid", "perturbed"],
                             capture_output=True, text=True)
    assert refused.returncode == 2 and "flux correction" in refused.stderr
