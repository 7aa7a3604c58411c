"""verify --boundary: walls pass no flux, a wall is the mirror image of a periodic domain,
fully upwind stencils leave no reflection at an outflow; each held against computations
outside the kernels (own numpy upwind steppers) and fed wrong fills, which must disagree."""
from __future__ import annotations

import json

import numpy as np
import pytest
from conftest import EXAMPLE_FILES, EXAMPLES

from fluxloom.compiler import load_scheme
from fluxloom.runtime import boundary_cases as cases
from fluxloom.runtime.boundaries import FAULT_VARIABLE
from fluxloom.runtime.cli import main
from fluxloom.runtime.edge_sweeps import EdgeSweep

COURANT = 0.5
UNSTABLE = {"ftcs"}   # forward-time centred space: unstable for advection at every c > 0
                      # (common practice, no source); its growth swamps relative drift


def _conservative(scheme) -> bool:
    """`clip` clamps after the step and so changes the total (the analysis says the same)."""
    return scheme.clip is None


@pytest.mark.parametrize("path", EXAMPLE_FILES, ids=[p.stem for p in EXAMPLE_FILES])
def test_a_wall_passes_no_flux_in_1d(path):
    """Every example: two tides against the walls of a basin keep the total to round-off
    and equal the periodic run of the mirrored domain (an independent path: periodic fills,
    velocities negated in the mirror)."""
    scheme = load_scheme(path)
    run = cases.basin_1d(EdgeSweep(scheme, "c"), COURANT)
    assert run.image_mismatch <= 1e-12
    if scheme.name in UNSTABLE:
        assert run.diverged_at is not None
    elif _conservative(scheme):
        assert run.diverged_at is None and run.mass_drift <= 1e-12


TWO_D = ["upwind", "lw_fct", "weno5_rk3", "centred4_ssp10", "lw_vanleer"]


@pytest.mark.parametrize("stem", TWO_D)
def test_a_wall_passes_no_flux_in_2d(stem):
    scheme = load_scheme(EXAMPLES / f"{stem}.loom")
    for method in ("strang", "lie"):
        run = cases.basin_2d(EdgeSweep(scheme, "c"), COURANT, method, n=16)
        assert run.mass_drift <= 1e-12 and run.image_mismatch <= 1e-12


@pytest.mark.slow
@pytest.mark.parametrize("path", EXAMPLE_FILES, ids=[p.stem for p in EXAMPLE_FILES])
def test_a_wall_passes_no_flux_in_2d_every_example(path):
    scheme = load_scheme(path)
    run = cases.basin_2d(EdgeSweep(scheme, "c"), COURANT, "alternating", n=12)
    assert run.image_mismatch <= 1e-12
    if _conservative(scheme) and scheme.name not in UNSTABLE:
        assert run.mass_drift <= 1e-12


def _own_upwind(q, u_faces, c, left, right):
    """First-order upwind in numpy (common practice, no source): flux = u+ q_left + u- q_right
    with the given ghost values; u_faces n + 1 values, dt/dx = c."""
    padded = np.concatenate(([left(q)], q, [right(q)]))
    flux = np.maximum(u_faces, 0) * padded[:-1] + np.minimum(u_faces, 0) * padded[1:]
    return q - c * (flux[1:] - flux[:-1])


def test_basin_matches_an_own_upwind_stepper():
    scheme = load_scheme(EXAMPLES / "upwind.loom")
    sweep = EdgeSweep(scheme, "numpy")
    n = cases.CELLS_1D
    run = cases.basin_1d(sweep, COURANT)
    x = (np.arange(n) + 0.5) / n
    q = cases._bell(x, 0.7, 0.4)
    highest = q.max()
    for step in range(run.steps):
        u = np.full(n + 1, cases._tide(step, run.steps))
        u[0] = u[-1] = 0.0                                   # closed ends
        q = _own_upwind(q, u, COURANT, lambda a: a[0], lambda a: a[-1])
        highest = max(highest, q.max())
    assert run.max == pytest.approx(highest, rel=1e-12)     # the pile-up against the wall
    # the harness's own run, replayed: same final field as the own stepper
    again = EdgeSweep(scheme, "numpy")
    field = again.padded(cases._bell(x, 0.7, 0.4))
    walls = ((cases.Edge("wall"), cases.Edge("wall")),)
    for step in range(run.steps):
        u = np.full(n + 1, cases._tide(step, run.steps))
        again(0, field, cases.extend_faces(again.fills, u, 0, 0, walls), COURANT, walls)
    assert np.max(np.abs(again.interior(field) - q)) < 1e-13


def test_channel_matches_an_own_upwind_stepper():
    """The channel's outflow against numpy upwind with the background at the inflow and no
    ghost read at the outflow: the same field, and the harness says no reflection."""
    scheme = load_scheme(EXAMPLES / "upwind.loom")
    n = cases.CELLS_1D
    run = cases.channel_1d(EdgeSweep(scheme, "numpy"), COURANT, +1)
    q = cases._bell((np.arange(n) + 0.5) / n, 0.25, 0.3)
    for _ in range(run.steps):
        q = _own_upwind(q, np.ones(n + 1), COURANT, lambda a: cases.BACKGROUND, lambda a: 1e300)
    assert np.isfinite(q).all()          # the outflow ghost (1e300) is never read
    assert run.remaining == pytest.approx(np.max(np.abs(q - cases.BACKGROUND)) / cases.AMPLITUDE,
                                          rel=1e-9)
    assert run.reflection == 0.0 and run.exit_difference == 0.0


@pytest.mark.parametrize("stem", ["upwind", "upwind_rk3", "beam_warming"])
def test_fully_upwind_stencils_leave_no_reflection(stem):
    scheme = load_scheme(EXAMPLES / f"{stem}.loom")
    assert max(scheme.offsets) <= 0
    sweep = EdgeSweep(scheme, "c")
    for run in (cases.channel_1d(sweep, COURANT, +1), cases.channel_1d(sweep, COURANT, -1),
                cases.channel_2d(sweep, COURANT, "strang", n=16)):
        assert run.exit_difference <= 1e-13 and run.reflection <= 1e-13


def test_a_downwind_read_feels_the_outflow():
    """Lax-Wendroff reads q[1]: the copied ghost changes the exit (measured, no claim)."""
    scheme = load_scheme(EXAMPLES / "lax_wendroff.loom")
    run = cases.channel_1d(EdgeSweep(scheme, "c"), COURANT, +1)
    assert run.exit_difference > 1e-3
    finding = cases._reflection(run, scheme.offsets, "double")
    assert finding.verdict == "no claim"


# ---- the command -------------------------------------------------------------------------------

def _verify(capsys, stem, *args):
    status = main(["verify", str(EXAMPLES / f"{stem}.loom"), "--backend", "c", "--json", *args])
    return status, json.loads(capsys.readouterr().out)


def _boundary_findings(doc):
    return {(f["check"], f["case"]): f["verdict"] for f in doc["findings"]
            if f.get("case") in {r["name"] for r in doc["boundary"]["runs"]}}


def test_verify_open_json(capsys):
    status, doc = _verify(capsys, "upwind", "--boundary", "open")
    assert status == 0 and doc["agree"] is True
    assert doc["boundary"]["kind"] == "open" and doc["boundary"]["injected_fault"] is None
    names = [r["name"] for r in doc["boundary"]["runs"]]
    assert names == ["channel_right", "channel_left"]
    for run in doc["boundary"]["runs"]:
        assert {"reflection", "exit_difference", "remaining", "reference_remaining", "steps",
                "n", "courant"} <= set(run)
    assert set(_boundary_findings(doc).values()) == {"agree"}


def test_verify_wall_json(capsys):
    status, doc = _verify(capsys, "lw_vanleer", "--boundary", "wall")
    assert status == 0
    assert _boundary_findings(doc) == {("conservation", "basin"): "agree",
                                       ("wall image", "basin"): "agree"}
    (run,) = doc["boundary"]["runs"]
    assert run["mass_drift"] <= 1e-12 and run["image_mismatch"] <= 1e-12


@pytest.mark.parametrize("fault, stem, check", [
    ("wall-mirror", "fromm", "wall image"),        # reads q[-1]: sees a shifted mirror
    ("wall-unfilled", "lw_vanleer", "wall image"),
    ("wall-leak", "lax_wendroff", "conservation"),
])
def test_verify_disagrees_with_a_wrong_fill(capsys, monkeypatch, fault, stem, check):
    monkeypatch.setenv(FAULT_VARIABLE, fault)
    status, doc = _verify(capsys, stem, "--boundary", "wall")
    assert status == 1 and doc["agree"] is False
    assert doc["boundary"]["injected_fault"] == fault
    assert _boundary_findings(doc)[(check, "basin")] == "disagree"


def test_verify_2d_wall_through_the_split_harness():
    """--dims 2's boundary runs (the library call behind the command), with a broken mirror
    too; the splitting of the 2-D harness drives the sweeps."""
    scheme = load_scheme(EXAMPLES / "fromm.loom")
    from fluxloom.runtime.commands.verify import split_analysis_document
    from fluxloom.runtime.prediction import Prediction

    prediction = Prediction.from_document(split_analysis_document(scheme, COURANT, 2, "strang"))
    bv = cases.verify_boundary(scheme, prediction, "wall", "c", "double", COURANT, 2, "strang")
    assert [r.name for r in bv.runs] == ["basin", "basin_2d"]
    assert all(f.verdict == "agree" for f in bv.findings)


def test_verify_2d_wall_disagrees_with_a_broken_mirror(monkeypatch):
    monkeypatch.setenv(FAULT_VARIABLE, "wall-mirror")
    scheme = load_scheme(EXAMPLES / "fromm.loom")
    sweep = EdgeSweep(scheme, "c")
    run = cases.basin_2d(sweep, COURANT, "strang", n=16)
    finding = cases._image(run, "double")
    assert finding.verdict == "disagree"


def test_bad_fault_name_is_refused(capsys, monkeypatch):
    monkeypatch.setenv(FAULT_VARIABLE, "nonsense")
    assert main(["verify", str(EXAMPLES / "upwind.loom"), "--boundary", "wall"]) == 2
    err = capsys.readouterr().err
    assert FAULT_VARIABLE in err and "Traceback" not in err


@pytest.mark.slow
def test_verify_dims_2_open_text(capsys):
    status = main(["verify", str(EXAMPLES / "upwind.loom"), "--backend", "c", "--dims", "2",
                   "--boundary", "open"])
    out = capsys.readouterr().out
    assert status == 0
    assert "Inflow/outflow channel" in out and "channel_2d" in out


def test_a_wall_passes_no_flux_under_a_clip_that_never_acts(monkeypatch):
    """`clip` changes the total only where it clamps: a small pulse that a TVD scheme keeps
    inside [0, 1] shows the walls pass nothing (Lax-Wendroff's and FTCS's oscillations do
    reach the clamp, so lw_clip and ftcs_clip are held to the image only)."""
    monkeypatch.setattr(cases, "BACKGROUND", 0.04)
    monkeypatch.setattr(cases, "AMPLITUDE", 0.16)
    sweep = EdgeSweep(load_scheme(EXAMPLES / "vanleer_clip.loom"), "c")
    for run in (cases.basin_1d(sweep, COURANT), cases.basin_2d(sweep, COURANT, "strang", n=16)):
        assert 0.0 <= run.min and run.max < 1.0
        assert run.mass_drift <= 1e-12 and run.image_mismatch <= 1e-12
