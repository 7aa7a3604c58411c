"""`verify --dims 3`: the 3-D flows and fields against independent computations (the
velocity formula evaluated pointwise, analytic cell averages), the cases through the
generated sweeps (C against numpy), and the findings held against `check --dims 3`'s
claims and against wrong claims (they must disagree)."""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from fluxloom.compiler import load_scheme
from fluxloom.compiler.analysis import analyse
from fluxloom.compiler.analysis.splitting import split_document
from fluxloom.runtime.cli import main
from fluxloom.runtime.kernel import load_kernel
from fluxloom.runtime.multidim import findings as split_findings
from fluxloom.runtime.multidim.cases import CASES_3D, run_case
from fluxloom.runtime.multidim.fields import WAVE_3D
from fluxloom.runtime.multidim.findings import verify_split
from fluxloom.runtime.multidim.flows3d import DEFORMATION, DIAGONAL, divergence_3d
from fluxloom.runtime.prediction import Prediction
from fluxloom.runtime.sweeps import KernelSweep

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
SMALL = (8, 16)


def _document(stem: str, method: str = "strang") -> dict:
    return split_document(analyse(load_scheme(EXAMPLES / f"{stem}.loom")), 3, method)


def _verdicts(sv, check: str) -> dict:
    return {f.context.split(",")[0]: f.verdict for f in sv.findings if f.check == check}


def _deformation_velocity(x, y, z):
    # LeVeque 1996 (SIAM J. Numer. Anal. 33:627), the 3-D deformational flow, formula from
    # memory [mem]: evaluated pointwise here, independent of the vector potential the
    # harness integrates.
    s = np.sin
    p = np.pi
    return (2 * s(p * x) ** 2 * s(2 * p * y) * s(2 * p * z),
            -s(2 * p * x) * s(p * y) ** 2 * s(2 * p * z),
            -s(2 * p * x) * s(2 * p * y) * s(p * z) ** 2)


def test_deformation_faces_are_divergence_free_and_converge_to_the_flow():
    errors = []
    for n in (8, 16, 32):
        faces = DEFORMATION.face_velocities(n)
        assert np.max(np.abs(divergence_3d(*faces))) < 1e-12 * n
        centre, corner = (np.arange(n) + 0.5) / n, np.arange(n + 1) / n
        worst = 0.0
        for axis, face in enumerate(faces):
            coords = [centre] * 3
            coords[axis] = corner
            exact = _deformation_velocity(*np.meshgrid(*coords, indexing="ij"))[axis]
            worst = max(worst, float(np.max(np.abs(face - exact))))
        errors.append(worst)
    # the face mean differs from the face-centre value by O(h^2) (midpoint rule)
    assert np.log2(errors[0] / errors[1]) > 1.7 and np.log2(errors[1] / errors[2]) > 1.9
    assert DIAGONAL.max_speed(8) == 1.0
    assert np.max(np.abs(divergence_3d(*DIAGONAL.face_velocities(8)))) == 0.0


def test_wave_cell_averages_are_the_exact_integrals():
    n = 16   # 4-point Gauss-Legendre per axis: error O(h^8), about 1e-12 here
    edges = np.arange(n + 1) / n
    # the mean of sin(2 pi x) over a cell: (cos 2 pi a - cos 2 pi b) / (2 pi (b - a))
    mean = (np.cos(2 * np.pi * edges[:-1]) - np.cos(2 * np.pi * edges[1:])) * n / (2 * np.pi)
    exact = 0.5 + 0.5 * np.einsum("i,j,k->ijk", mean, mean, mean)
    np.testing.assert_allclose(WAVE_3D.cell_averages(n), exact, rtol=0, atol=1e-11)


def test_c_and_numpy_sweeps_agree_on_every_3d_case():
    scheme = load_scheme(EXAMPLES / "lw_vanleer.loom")
    kernels = [load_kernel(scheme, backend) for backend in ("c", "numpy")]
    for case in CASES_3D:
        by_c, by_numpy = (run_case(KernelSweep(k), case, 8, 0.5, "strang") for k in kernels)
        assert by_c.steps == by_numpy.steps > 0
        np.testing.assert_allclose(by_c.final, by_numpy.final, rtol=0, atol=1e-13)
        assert by_c.mass_drift <= 1e-12 and by_numpy.mass_drift <= 1e-12


@pytest.mark.slow
def test_verify_dims_3_json_matches_check_dims_3(capsys, tmp_path):
    path = str(EXAMPLES / "lax_wendroff.loom")
    assert main(["check", path, "--dims", "3", "--split", "alternating", "--json"]) == 0
    claims = json.loads(capsys.readouterr().out)["split"]
    assert claims["dims"] == 3 and len(claims["stability"]["directions"]) == 3
    status = main(["verify", path, "--backend", "c", "--dims", "3", "--split", "alternating",
                   "--json", "--report", str(tmp_path)])
    doc = json.loads(capsys.readouterr().out)
    assert status == 0 and doc["agree"] is True
    assert doc["split"]["dims"] == 3 and doc["split"]["grids"] == [8, 16, 32]
    assert len(doc["cases"]) == 9
    for case in doc["cases"]:
        assert {"name", "n", "l1", "l2", "linf", "min", "max", "mass_drift"} <= set(case)
        assert case["mass_drift"] <= 1e-12
    orders = {f["context"].split(",")[0]: f for f in doc["findings"]
              if f["check"] == "convergence" and f["context"].startswith("3-D")}
    # the claims verify judged are check's: overall under the uniform flow, variable under
    # the deformational one
    assert orders["3-D diagonal_wave"]["predicted_order"] == claims["order"]["overall"]
    assert (orders["3-D deformation_wave"]["predicted_order"]
            == claims["order"]["variable_coefficients"])
    assert {f["verdict"] for f in orders.values()} == {"agree"}
    assert {"lax_wendroff-3d-alternating.md",
            "lax_wendroff-3d-alternating-deformation_wave.png"} <= {p.name for p in
                                                                  tmp_path.iterdir()}


def test_wrong_3d_order_claims_disagree():
    # Lax-Wendroff's face misses the -dt/2 u u_x q part where the velocity varies: first
    # order with variable coefficients; 2 is the tempting wrong claim. With constant
    # coefficients it is second order (Lax and Wendroff 1960, from memory): 3 is wrong.
    lw = load_kernel(load_scheme(EXAMPLES / "lax_wendroff.loom"), "c")
    doc = _document("lax_wendroff")
    sv = verify_split(lw, Prediction.from_document(doc), "strang", 0.5,
                      cases=("deformation_wave", "diagonal_wave"))
    assert _verdicts(sv, "convergence") == {"3-D deformation_wave": "agree",
                                            "3-D diagonal_wave": "agree"}
    for key, case in (("variable_coefficients", "3-D deformation_wave"),
                      ("overall", "3-D diagonal_wave")):
        wrong = json.loads(json.dumps(doc))
        wrong["split"]["order"][key] += 1
        judged = split_findings.judge_split(sv.runs, sv.orders, Prediction.from_document(wrong),
                                            "strang", "double", 3)
        verdicts = {f.context.split(",")[0]: f.verdict for f in judged
                    if f.check == "convergence"}
        assert verdicts[case] == "disagree", key


def test_a_first_order_scheme_unresolved_on_small_grids_makes_no_order_claim():
    # Upwind's numerical diffusion damps the wave most of the way on 32^3 cells: the
    # harness says the grid does not resolve the field rather than judge a pre-asymptotic
    # order against the claim of 1.
    upwind = load_kernel(load_scheme(EXAMPLES / "upwind.loom"), "c")
    sv = verify_split(upwind, Prediction.from_document(_document("upwind", "lie")), "lie", 0.5,
                      cases=("diagonal_wave",))
    finding, = (f for f in sv.findings if f.check == "convergence")
    assert finding.verdict == "no claim" and "does not resolve" in finding.predicted


def test_3d_divergence_is_judged_by_the_stability_claim():
    # Lax-Wendroff is stable for |c| <= 1, Beam-Warming for 0 <= c <= 2 (REFERENCE.md): at
    # c = 1.5 the uniform flow's Lie sweeps each run at 1.5, and the finest grid diverges.
    lw = load_kernel(load_scheme(EXAMPLES / "lax_wendroff.loom"), "c")
    own = verify_split(lw, Prediction.from_document(_document("lax_wendroff", "lie")), "lie",
                       1.5, cases=("diagonal_wave",))
    assert any(r.diverged_at is not None for r in own.runs)
    assert "disagree" not in {f.verdict for f in own.findings}
    claimed = verify_split(lw, Prediction.from_document(_document("beam_warming", "lie")),
                           "lie", 1.5, cases=("diagonal_wave",))
    assert "disagree" in {f.verdict for f in claimed.findings}


def test_bounds_under_the_uniform_flow_carry_over_and_catch_a_false_claim():
    # Upwind is monotone for 0 <= c <= 1 (Godunov 1959, from memory): under a uniform flow
    # every sweep is a 1-D step with a constant velocity, so the bound carries over.
    upwind = Prediction.from_document(_document("upwind"))
    sv = verify_split(load_kernel(load_scheme(EXAMPLES / "upwind.loom"), "c"), upwind,
                      "strang", 0.5, grids=SMALL, cases=("diagonal_wave",))
    assert _verdicts(sv, "bounds") == {"3-D diagonal_wave": "agree"}
    lw = verify_split(load_kernel(load_scheme(EXAMPLES / "lax_wendroff.loom"), "c"), upwind,
                      "strang", 0.5, grids=SMALL, cases=("diagonal_wave",))
    assert _verdicts(lw, "bounds") == {"3-D diagonal_wave": "disagree"}


def test_a_leaky_3d_sweep_is_caught(monkeypatch):
    class Leaky(KernelSweep):
        def __call__(self, axis, q, u_face, dt_dx):
            return super().__call__(axis, q, u_face, dt_dx) * (1 - 1e-9)

    kernel = load_kernel(load_scheme(EXAMPLES / "upwind.loom"), "numpy")
    prediction = Prediction.from_document(_document("upwind", "lie"))
    monkeypatch.setattr(split_findings, "KernelSweep", Leaky)
    leaky = verify_split(kernel, prediction, "lie", 0.5, grids=SMALL,
                         cases=("deformation_constant",))
    assert _verdicts(leaky, "conservation") == {"3-D deformation_constant": "disagree"}


@pytest.mark.parametrize("args, message", [
    (["--grid", "stretched"], "--grid stretched with --dims 3"),
])
def test_verify_dims_3_refuses_what_is_not_built(capsys, args, message):
    assert main(["verify", str(EXAMPLES / "upwind.loom"), "--dims", "3", *args]) == 2
    err = capsys.readouterr().err
    assert message in err and "Traceback" not in err
