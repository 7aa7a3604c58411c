"""verify --dims 3 --boundary: a closed box (walls on six faces) and a square duct with an
inflow and an outflow, run through the generated sweep with edges and split sweeps; held
against own numpy upwind steppers, the stage-by-stage reference path (runtime/edge_sweeps.py),
the periodic run of the mirrored box, and fed wrong predictions and wrong fills, which must
disagree."""
from __future__ import annotations

import json

import numpy as np
import pytest
from conftest import EXAMPLE_FILES, EXAMPLES

from fluxloom.compiler import load_scheme
from fluxloom.runtime import boundary_cases as cases
from fluxloom.runtime.boundaries import FAULT_VARIABLE
from fluxloom.runtime.boundary_sweep import BoundarySweep
from fluxloom.runtime.cli import main
from fluxloom.runtime.edge_sweeps import EdgeSweep
from fluxloom.runtime.prediction import Prediction, split_analysis_document

COURANT = 0.5
N = 8                     # cells per side in these tests: a run takes well under a second in C
UNSTABLE = {"ftcs"}       # forward-time centred space: unstable for advection at every c > 0
                          # (common practice, no source)
OWN_ORDER = {"lie": ((0, 1.0), (1, 1.0), (2, 1.0)),
             "strang": ((0, 0.5), (1, 0.5), (2, 1.0), (1, 0.5), (0, 0.5)),
             "strang_2d": ((0, 0.5), (1, 1.0), (0, 0.5))}
"""Sweeps of one split step, written out here (not read from the splitting tables):
Lie x, y, z; Strang x/2, y/2, z, y/2, x/2 and in 2-D x/2, y, x/2 (common practice, no
source)."""


class Recorder:
    """Any sweep with EdgeSweep's interface, keeping the last array it advanced per shape
    (the sweeps work in place, so after a run it holds the final fields)."""

    def __init__(self, sweep):
        self.sweep, self.last = sweep, {}

    def __getattr__(self, name):
        return getattr(self.sweep, name)

    def __call__(self, axis, q, *args):
        self.last[q.shape] = q
        return self.sweep(axis, q, *args)

    def final(self, n: int, dims: int = 3) -> np.ndarray:
        shape = (n + 2 * self.sweep.halo,) * dims
        return self.sweep.interior(self.last[shape]).astype(float)


def _own_upwind_sweep(q, u, nu, low, high, axis):
    """First-order upwind along `axis` (common practice, no source): flux = u+ q_left +
    u- q_right with ghost values `low` and `high` outside the ends; u has n + 1 faces."""
    moved = np.moveaxis(q, axis, 0)
    face = np.moveaxis(u, axis, 0)
    padded = np.concatenate((np.full((1,) + moved.shape[1:], low), moved,
                             np.full((1,) + moved.shape[1:], high)))
    flux = np.maximum(face, 0) * padded[:-1] + np.minimum(face, 0) * padded[1:]
    return np.moveaxis(moved - nu * (flux[1:] - flux[:-1]), 0, axis)


def _faces(n, axis, value, cells=None, dims=3):
    shape = [n] * dims
    if cells is not None:
        shape[0] = cells
    shape[axis] += 1
    return np.full(shape, value)


def _report(run):
    return {f: getattr(run, f) for f in ("mass_drift", "image_mismatch", "exit_difference",
                                         "reflection", "remaining", "reference_remaining",
                                         "min", "max", "diverged_at")}


# ---- against an own numpy upwind stepper --------------------------------------------------

def _own_flow(run, dims, flow):
    """(dt/dx, faces of step k) of the basin's flow, rebuilt here from its definition:
    the tide's speeds, or the split cases' deformational flow over one period."""
    if flow == "tide":
        def faces(k):
            return [_faces(N, a, cases.BASIN_CURRENT[a] * cases._tide(k, run.steps), dims=dims)
                    for a in range(dims)]
        return COURANT, faces
    from fluxloom.runtime.multidim.flows import SWIRL
    from fluxloom.runtime.multidim.flows3d import DEFORMATION

    circulation = {2: SWIRL, 3: DEFORMATION}[dims]
    dt = circulation.period / run.steps
    base = circulation.face_velocities(N)

    def faces(k):
        return [f * circulation.time_factor((k + 0.5) * dt) for f in base]
    return dt * N, faces


@pytest.mark.parametrize("backend, method, flow, dims", [
    ("c", "strang", "tide", 3), ("numpy", "lie", "tide", 3),
    ("numpy", "lie", "circulation", 3), ("c", "strang", "circulation", 3),
    ("c", "strang", "circulation", 2)])
def test_box_matches_an_own_upwind_stepper(backend, method, flow, dims):
    """The closed box through the generated sweep with edges equals numpy upwind with the
    wall faces' velocity zero, to 1e-13; the own stepper's total stays too. The tide runs
    into the walls (the faces helper zeroes them); the circulation has zero normal
    velocity on every wall face itself."""
    recorder = Recorder(BoundarySweep(load_scheme(EXAMPLES / "upwind.loom"), backend))
    run = cases.basin(recorder, COURANT, dims, method, n=N, flow=flow)
    dt_dx, faces_of = _own_flow(run, dims, flow)
    order = OWN_ORDER[method if dims == 3 else f"{method}_{dims}d"]
    q = cases._pulse(N, dims, *cases.BASIN_PULSE[dims])
    total, highest = q.sum(), q.max()
    for step in range(run.steps):
        faces = faces_of(step)
        for axis, fraction in order:
            u = faces[axis].copy()
            ends = np.moveaxis(u, axis, 0)
            ends[0] = ends[-1] = 0.0                          # closed: no flux at the walls
            q = _own_upwind_sweep(q, u, fraction * dt_dx, 1e300, 1e300, axis)
        highest = max(highest, q.max())
    assert np.isfinite(q).all()                              # the walls' ghosts: never used
    assert np.max(np.abs(recorder.final(N, dims) - q)) <= 1e-13 * np.max(np.abs(q))
    assert abs(q.sum() - total) / total <= 1e-12
    assert run.mass_drift <= 1e-12 and run.image_mismatch <= 1e-12
    assert run.max == pytest.approx(highest, rel=1e-13)


@pytest.mark.parametrize("backend, method", [("c", "lie"), ("numpy", "strang")])
def test_duct_matches_an_own_upwind_stepper(backend, method):
    """The duct against numpy upwind with the background at the inflow and a ghost of 1e300
    at the outflow (never read): the same field, and, run again in a duct four times as long,
    the same cells: nothing comes back from the outflow."""
    recorder = Recorder(BoundarySweep(load_scheme(EXAMPLES / "upwind.loom"), backend))
    run = cases.channel_3d(recorder, COURANT, method, n=N)
    q0 = cases._pulse(N, 3, *cases.CHANNEL_PULSE[3])
    y = (np.arange(N) + 0.5) / N
    speed = cases.SLOWEST + (1 - cases.SLOWEST) * np.outer(np.sin(np.pi * y), np.sin(np.pi * y))
    long = np.full((4 * N, N, N), cases.BACKGROUND)
    long[:N] = q0
    fields = [q0, long]
    for _ in range(run.steps):
        for i, q in enumerate(fields):
            cells = q.shape[0]
            for axis, fraction in OWN_ORDER[method]:
                u = (np.broadcast_to(speed, (cells + 1, N, N)) if axis == 0 else
                     _faces(N, axis, 0.0, cells))
                low = cases.BACKGROUND if axis == 0 else 1e300
                q = _own_upwind_sweep(q, u, fraction * COURANT, low, 1e300, axis)
            fields[i] = q
    q, long = fields
    assert np.isfinite(q).all() and np.isfinite(long).all()
    assert np.array_equal(q, long[:N])                      # own stepper: no reflection
    assert np.max(np.abs(recorder.final(N) - q)) <= 1e-13
    assert run.reflection <= 1e-13 and run.exit_difference <= 1e-13
    left = np.max(np.abs(q - cases.BACKGROUND)) / cases.AMPLITUDE
    assert run.remaining == pytest.approx(left, abs=1e-13)
    assert run.reference_remaining == pytest.approx(left, abs=1e-13)


# ---- the generated sweep against the stage-by-stage reference ----------------------------

@pytest.mark.parametrize("backend, method, n", [("c", "alternating", N), ("c", "strang", N),
                                                ("numpy", "lie", 6)])
def test_generated_sweep_matches_the_stage_by_stage_reference_in_3d(backend, method, n):
    """A three-stage scheme reading downwind cells: the box and the duct through the
    generated sweep (stage ghosts filled inside it) and through EdgeSweep (the 1-D stage
    per line, fills in between; a Python loop, so fewer cells in numpy) give the same
    fields and measurements to round-off."""
    scheme = load_scheme(EXAMPLES / "vanleer_rk3.loom")
    for build in (lambda s: cases.basin_3d(s, COURANT, method, n=n),
                  lambda s: cases.channel_3d(s, COURANT, method, n=n)):
        ours = Recorder(BoundarySweep(scheme, backend))
        theirs = Recorder(EdgeSweep(scheme, backend))
        a, b = _report(build(ours)), _report(build(theirs))
        for name in a:
            assert (a[name] is None) == (b[name] is None), name
            if a[name] is not None:
                assert abs(a[name] - b[name]) <= 1e-12 * max(1.0, abs(b[name])), name
        assert np.max(np.abs(ours.final(n) - theirs.final(n))) <= 1e-13


# ---- walls pass nothing, fully upwind faces reflect nothing -------------------------------

@pytest.mark.parametrize("stem", ["upwind", "lw_fct", "weno5_rk3", "centred4_ssp10",
                                  "lw_vanleer"])
def test_a_wall_passes_no_flux_in_3d(stem):
    sweep = BoundarySweep(load_scheme(EXAMPLES / f"{stem}.loom"), "c")
    for run in (cases.basin_3d(sweep, COURANT, "strang", n=N),
                cases.box_3d(sweep, COURANT, "alternating", n=N)):
        assert run.diverged_at is None
        assert run.mass_drift <= 1e-12 and run.image_mismatch <= 1e-12


@pytest.mark.slow
@pytest.mark.parametrize("path", EXAMPLE_FILES, ids=[p.stem for p in EXAMPLE_FILES])
def test_a_wall_passes_no_flux_in_3d_every_example(path):
    scheme = load_scheme(path)
    sweep = BoundarySweep(scheme, "c")
    for run in (cases.basin_3d(sweep, COURANT, "lie", n=N),
                cases.box_3d(sweep, COURANT, "strang", n=N)):
        assert run.image_mismatch <= 1e-12
        if scheme.clip is None and scheme.name not in UNSTABLE:
            assert run.mass_drift <= 1e-12


@pytest.mark.parametrize("stem", ["upwind_rk3", "beam_warming"])
def test_fully_upwind_stencils_leave_no_reflection_in_3d(stem):
    scheme = load_scheme(EXAMPLES / f"{stem}.loom")
    assert max(scheme.offsets) <= 0
    run = cases.channel_3d(BoundarySweep(scheme, "c"), COURANT, "strang", n=N)
    assert run.exit_difference <= 1e-13 and run.reflection <= 1e-13


# ---- wrong predictions and wrong fills must disagree ---------------------------------------

def _prediction(scheme, method="strang", **wrong):
    doc = split_analysis_document(scheme, COURANT, 3, method)
    doc.update(wrong)
    return Prediction.from_document(doc)


def _verdicts(findings, case):
    return {f.check: f.verdict for f in findings if f.values.get("case") == case}


def test_a_wrong_conservation_claim_disagrees_in_3d():
    """`clip` clamps and changes the total: told the scheme is conservative, the box must
    disagree; told the truth, it makes no claim."""
    scheme = load_scheme(EXAMPLES / "lw_clip.loom")
    run = cases.basin_3d(BoundarySweep(scheme, "c"), COURANT, "strang", n=N)
    assert run.mass_drift > 1e-3
    truth = cases.judge_boundary((run,), _prediction(scheme), scheme.offsets, "double")
    wrong = cases.judge_boundary((run,), _prediction(scheme, conservative=True),
                                 scheme.offsets, "double")
    assert _verdicts(truth, "basin_3d") == {"conservation": "no claim", "wall image": "agree"}
    assert _verdicts(wrong, "basin_3d") == {"conservation": "disagree", "wall image": "agree"}


def test_a_wrong_upwind_claim_disagrees_at_the_outflow_in_3d():
    """Lax-Wendroff reads q[1]: the duct's outflow changes the exit. Judged as if its faces
    read nothing downwind (offsets (-1, 0), wrong), the outflow finding disagrees."""
    scheme = load_scheme(EXAMPLES / "lax_wendroff.loom")
    run = cases.channel_3d(BoundarySweep(scheme, "c"), COURANT, "lie", n=N)
    assert run.exit_difference > 1e-3
    prediction = _prediction(scheme, "lie")
    assert cases.judge_boundary((run,), prediction, scheme.offsets, "double")[0].verdict \
        == "no claim"
    assert cases.judge_boundary((run,), prediction, (-1, 0), "double")[0].verdict == "disagree"


def test_a_broken_mirror_disagrees_in_3d(monkeypatch):
    monkeypatch.setenv(FAULT_VARIABLE, "wall-mirror")
    run = cases.basin_3d(BoundarySweep(load_scheme(EXAMPLES / "fromm.loom"), "c"), COURANT,
                         "strang", n=N)
    assert cases._image(run, "double").verdict == "disagree"


# ---- the command ---------------------------------------------------------------------------

def _verify(capsys, stem, *args):
    status = main(["verify", str(EXAMPLES / f"{stem}.loom"), "--dims", "3", *args])
    return status, capsys.readouterr().out


def test_verify_dims_3_open_json(capsys):
    status, out = _verify(capsys, "upwind", "--boundary", "open", "--split", "alternating",
                          "--json")
    doc = json.loads(out)
    assert status == 0 and doc["agree"] is True
    assert len(doc["cases"]) == 9                             # the periodic 3-D cases, as before
    for case in doc["cases"]:
        assert {"name", "n", "l1", "l2", "linf", "min", "max", "mass_drift"} <= set(case)
    boundary = doc["boundary"]
    assert (boundary["kind"], boundary["dims"], boundary["split"]) == ("open", 3, "alternating")
    assert [r["name"] for r in boundary["runs"]] == ["channel_right", "channel_left",
                                                     "channel_3d"]
    duct = boundary["runs"][-1]
    assert duct["n"] == cases.CELLS_3D and duct["reflection"] <= 1e-13
    ours = {f["case"]: f["verdict"] for f in doc["findings"] if f.get("check") == "outflow"}
    assert ours == {"channel_right": "agree", "channel_left": "agree", "channel_3d": "agree"}


@pytest.mark.slow
def test_verify_dims_3_wall_text(capsys):
    status, out = _verify(capsys, "lw_vanleer", "--backend", "c", "--boundary", "wall")
    assert status == 0
    assert "3-D cases (strang splitting" in out
    assert "Wall-bounded basin" in out and "basin_3d" in out and "box_3d" in out


def test_verify_dims_3_disagrees_with_a_leaking_wall(capsys, monkeypatch):
    monkeypatch.setenv(FAULT_VARIABLE, "wall-leak")
    status, out = _verify(capsys, "lax_wendroff", "--backend", "c", "--boundary", "wall",
                          "--split", "lie", "--json")
    doc = json.loads(out)
    assert status == 1 and doc["agree"] is False
    assert doc["boundary"]["injected_fault"] == "wall-leak"
    found = {(f["check"], f["case"]): f["verdict"] for f in doc["findings"]
             if f.get("case") in {"basin", "basin_3d", "box_3d"}}
    assert found[("conservation", "basin_3d")] == "disagree"
    # the circulation has zero normal velocity at the walls itself: nothing to leak
    assert found[("conservation", "box_3d")] == "agree"
