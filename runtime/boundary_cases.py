"""`verify --boundary wall|open`: a pulse through an inflow/outflow channel and a
wall-bounded basin, in 1-D and (with --dims 2) 2-D, run through the generated sweep with
edges (`BoundarySweep`: NAME_sweep_edges, every stage's ghost cells filled inside it) and
the boundary helpers generated for the back end being verified. The cases take any
sweep with `EdgeSweep`'s interface (the tests run them through both).

Measured (runs) and judged (findings, agree / disagree / no claim as in rules.py):

- wall (`basin`, `basin_2d`): a tidal current that reverses (uniform, nonzero up to the
  walls: the faces helper zeroes the wall faces) sloshes a pulse against the walls for
  two tides. *Conservation*: no flux crosses a wall, so the total stays to round-off
  (relative drift <= 1e-12 in double, 1e-5 in float) wherever the analysis claims the
  scheme conservative. *Mirror image*: in the upwind frame every scheme treats a
  mirrored field with mirrored velocities as the mirror image, so a wall with a
  mirrored halo is exactly the periodic run of the domain reflected across the wall
  (twice as long, velocities negated in the reflection); the two must agree to
  round-off. This holds for every scheme, so it is always claimed.
- open (`channel_right`, `channel_left`, `channel_2d`): a pulse on a background carried
  out through a zero-gradient outflow, prescribed background at the inflow, compared
  with the same run in a channel four times as long (the same inflow, its outflow far
  downstream). *Outflow reflection*: the largest difference at the end, when the pulse
  has left the channel, relative to the pulse's amplitude (`exit_difference`: the
  largest at any step, while the pulse passes the outflow). A scheme whose faces read no cell downwind of the
  face (every stencil offset <= 0: upwind, upwind_rk3) never reads the outflow's
  ghost cells, so its channel is the long channel's to round-off at every step:
  claimed (exit difference and reflection <= 1e-13; 1e-5 in float). Schemes that read
  downwind cells feel the outflow's copied ghost cells: measured and reported, no claim. `remaining` is the largest departure from the
  background left in the channel at the end, when the pulse has left it, beside the
  long channel's own (`reference_remaining`: the scheme's numerical tail).

A run that grows past DIVERGENCE_FACTOR times its initial maximum or leaves the finite
numbers stops there; that disagrees where the analysis claims stability at c.
"""
from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np

from fluxloom.compiler import LoomError

from .boundaries import Edge, injected_fault
from .boundary_sweep import BoundarySweep
from .edge_sweeps import EdgeSweep, extend_faces
from .harness import DIVERGENCE_FACTOR
from .measurements import mass_tolerance
from .prediction import Prediction
from .rules import AGREE, DISAGREE, NO_CLAIM, Finding, fmt
from .splitting import split_step

KINDS = ("wall", "open")
CELLS_1D = 100
CELLS_2D = 24
BACKGROUND, AMPLITUDE = 0.2, 0.8
TRAVEL = 1.3                 # channel lengths the pulse travels: its tail leaves by 1.15
TIDES = 2
DOWNSTREAM = 3              # the long channel: channel lengths beyond the channel's outflow
MAX_BOUNDARY_STEPS = 20_000


def reflection_tolerance(precision: str) -> float:
    return 1e-13 if precision == "double" else 1e-5


def image_tolerance(precision: str) -> float:
    return 1e-12 if precision == "double" else 1e-5


@dataclass(frozen=True)
class BoundaryRun:
    name: str
    kind: str                 # wall | open
    dims: int
    n: int                    # cells along the flow (and across, in 2-D)
    steps: int
    courant: float
    description: str
    mass_drift: float | None = None         # wall: largest relative drift of the total
    image_mismatch: float | None = None     # wall: largest |run - mirrored periodic run| / max|q0|
    exit_difference: float | None = None    # open: largest |run - long channel| / amplitude, any step
    reflection: float | None = None         # open: the same at the end, when the pulse has left
    remaining: float | None = None          # open: largest |q - background| / amplitude, at the end
    reference_remaining: float | None = None
    min: float | None = None
    max: float | None = None
    diverged_at: int | None = None

    def to_json(self) -> dict:
        return dataclasses.asdict(self)


def _bell(x: np.ndarray, centre: float, width: float) -> np.ndarray:
    """Background plus a cosine-squared bell (scenario of our own)."""
    inside = np.abs(x - centre) < width / 2
    return BACKGROUND + AMPLITUDE * np.where(inside, np.cos(np.pi * (x - centre) / width) ** 2,
                                             0.0)


def _check_steps(steps: int) -> int:
    if steps > MAX_BOUNDARY_STEPS:
        raise LoomError(f"the boundary cases would take {steps} steps at this Courant number "
                        f"(at most {MAX_BOUNDARY_STEPS}); use a larger --courant",
                        file="--courant")
    return steps


def boundary_steps(courant: float) -> int:
    """The most steps any boundary case takes at this Courant number (checked before work)."""
    return _check_steps(max(math.ceil(TRAVEL * CELLS_1D / courant),
                            math.ceil(TRAVEL * CELLS_2D / (SLOWEST * courant)),
                            math.ceil(TIDES * CELLS_1D / courant)))


class _Watch:
    """Stops a run that diverges (growth past DIVERGENCE_FACTOR, or non-finite values)."""

    def __init__(self, q0: np.ndarray):
        self.limit = DIVERGENCE_FACTOR * max(float(np.max(np.abs(q0))), 1e-300)
        self.low, self.high = float(np.min(q0)), float(np.max(q0))

    def bad(self, q: np.ndarray) -> bool:
        with np.errstate(all="ignore"):
            top = float(np.max(np.abs(q)))
        if not math.isfinite(top) or top > self.limit:
            return True
        self.low, self.high = min(self.low, float(np.min(q))), max(self.high, float(np.max(q)))
        return False


# ---- open: the channel ----------------------------------------------------------------------

def channel_1d(sweep: EdgeSweep, courant: float, direction: int = 1,
               n: int = CELLS_1D) -> BoundaryRun:
    """A pulse carried out of a channel at speed 1 (direction +1: left to right)."""
    name = "channel_right" if direction > 0 else "channel_left"
    x = (np.arange(n) + 0.5) / n
    q0 = _bell(x, 0.25 if direction > 0 else 0.75, 0.3)
    steps = _check_steps(math.ceil(TRAVEL * n / courant))
    inflow, outflow = Edge("inflow", BACKGROUND), Edge("outflow")
    edges = ((inflow, outflow),) if direction > 0 else ((outflow, inflow),)
    u = np.full(n + 1, float(direction), sweep.dtype)
    faces = extend_faces(sweep.fills, u, 0, sweep.face_halo, edges)
    q = sweep.padded(q0.astype(sweep.dtype))
    # the long channel: the same inflow, its outflow DOWNSTREAM channel lengths further on
    first = 0 if direction > 0 else DOWNSTREAM * n
    total = (1 + DOWNSTREAM) * n
    long0 = np.full(total, BACKGROUND)
    long0[first:first + n] = q0
    long_edges = edges
    long_faces = extend_faces(sweep.fills, np.full(total + 1, float(direction), sweep.dtype), 0,
                              sweep.face_halo, long_edges)
    reference = sweep.padded(long0.astype(sweep.dtype))
    h = sweep.halo
    watch, exit_difference, stopped = _Watch(q0), 0.0, None
    for step in range(1, steps + 1):
        sweep(0, q, faces, courant, edges)
        sweep(0, reference, long_faces, courant, long_edges)
        inside = q[h:h + n]
        if watch.bad(inside) or watch.bad(reference[h:h + total]):
            stopped = step
            break
        exit_difference = max(exit_difference,
                              float(np.max(np.abs(inside - reference[h + first:h + first + n]))))
    inside = q[h:h + n]
    return BoundaryRun(
        name, "open", 1, n, steps, courant,
        "a cosine-squared pulse on a background leaves a channel through a zero-gradient "
        "outflow; background prescribed at the inflow",
        exit_difference=exit_difference / AMPLITUDE,
        reflection=float(np.max(np.abs(inside - reference[h + first:h + first + n]))) / AMPLITUDE,
        remaining=float(np.max(np.abs(inside - BACKGROUND))) / AMPLITUDE,
        reference_remaining=float(np.max(np.abs(reference[h + first:h + first + n]
                                                - BACKGROUND))) / AMPLITUDE,
        min=watch.low, max=watch.high, diverged_at=stopped)


SLOWEST = 0.75


def _channel_flow(y: np.ndarray) -> np.ndarray:
    """Along-channel speed across it: SLOWEST at the walls, 1 in the middle."""
    return SLOWEST + (1 - SLOWEST) * np.sin(np.pi * y)


def channel_2d(sweep: EdgeSweep, courant: float, method: str, n: int = CELLS_2D) -> BoundaryRun:
    """A 2-D pulse carried out of a channel (x: inflow, outflow; y: walls) by a shear flow."""
    x = (np.arange(n) + 0.5) / n
    X, Y = np.meshgrid(x, x, indexing="ij")
    q0 = BACKGROUND + (_bell(np.hypot(X - 0.25, Y - 0.5), 0.0, 0.5) - BACKGROUND)
    steps = _check_steps(math.ceil(TRAVEL * n / (SLOWEST * courant)))
    wall = (Edge("wall"), Edge("wall"))
    edges = ((Edge("inflow", BACKGROUND), Edge("outflow")), wall)
    total = (1 + DOWNSTREAM) * n
    long_edges = edges
    speed = _channel_flow(x)

    def faces(cells: int, with_edges):
        u = np.broadcast_to(speed, (cells + 1, n)).astype(sweep.dtype)
        v = np.zeros((cells, n + 1), sweep.dtype)
        return (extend_faces(sweep.fills, u, 0, sweep.face_halo, with_edges),
                extend_faces(sweep.fills, v, 1, sweep.face_halo, with_edges))

    q = sweep.padded(q0.astype(sweep.dtype))
    long0 = np.full((total, n), BACKGROUND)
    first = 0
    long0[first:first + n] = q0
    reference = sweep.padded(long0.astype(sweep.dtype))
    short_faces, long_faces = faces(n, edges), faces(total, long_edges)
    h = sweep.halo
    watch, exit_difference, stopped = _Watch(q0), 0.0, None
    for step in range(1, steps + 1):
        q = split_step(lambda axis, a, fraction: sweep(axis, a, short_faces[axis],
                                                       fraction * courant, edges), q, method,
                       step - 1)
        reference = split_step(lambda axis, a, fraction: sweep(axis, a, long_faces[axis],
                                                               fraction * courant, long_edges),
                               reference, method, step - 1)
        inside = q[h:h + n, h:h + n]
        if watch.bad(inside) or watch.bad(reference[h:h + total, h:h + n]):
            stopped = step
            break
        exit_difference = max(exit_difference, float(np.max(np.abs(
            inside - reference[h + first:h + first + n, h:h + n]))))
    inside = q[h:h + n, h:h + n]
    alongside = reference[h + first:h + first + n, h:h + n]
    return BoundaryRun(
        "channel_2d", "open", 2, n, steps, courant,
        f"a 2-D pulse leaves a channel (walls along its sides) in a shear flow, {method} "
        "splitting",
        exit_difference=exit_difference / AMPLITUDE,
        reflection=float(np.max(np.abs(inside - alongside))) / AMPLITUDE,
        remaining=float(np.max(np.abs(inside - BACKGROUND))) / AMPLITUDE,
        reference_remaining=float(np.max(np.abs(alongside - BACKGROUND))) / AMPLITUDE,
        min=watch.low, max=watch.high, diverged_at=stopped)


# ---- wall: the basin ---------------------------------------------------------------------

def _tide(step: int, steps: int) -> float:
    """The tidal current at the middle of a step: TIDES periods over the run."""
    return math.cos(2 * math.pi * TIDES * (step + 0.5) / steps)


def _mirrored_faces(base: np.ndarray, axis: int) -> np.ndarray:
    """Faces of a line reflected across its high end: face n + k = -face n - k."""
    moved = np.moveaxis(base, axis, -1)
    image = np.concatenate((moved, -moved[..., -2::-1]), axis=-1)
    return np.moveaxis(image, -1, axis)


def basin_1d(sweep: EdgeSweep, courant: float, n: int = CELLS_1D) -> BoundaryRun:
    x = (np.arange(n) + 0.5) / n
    q0 = _bell(x, 0.7, 0.4)
    steps = _check_steps(math.ceil(TIDES * n / courant))
    walls = ((Edge("wall"), Edge("wall")),)
    periodic = ((Edge("periodic"), Edge("periodic")),)
    q = sweep.padded(q0.astype(sweep.dtype))
    image = sweep.padded(np.concatenate((q0, q0[::-1])).astype(sweep.dtype))
    h, total, scale = sweep.halo, float(np.sum(q0)), float(np.max(np.abs(q0)))
    watch, drift, mismatch, stopped = _Watch(q0), 0.0, 0.0, None
    for step in range(1, steps + 1):
        u = np.full(n + 1, _tide(step - 1, steps), sweep.dtype)
        faces = extend_faces(sweep.fills, u, 0, sweep.face_halo, walls)
        walled = u.copy()
        walled[0] = walled[-1] = 0.0
        image_faces = extend_faces(sweep.fills, _mirrored_faces(walled, 0), 0, sweep.face_halo,
                                   periodic)
        sweep(0, q, faces, courant, walls)
        sweep(0, image, image_faces, courant, periodic)
        inside = q[h:h + n]
        if watch.bad(inside) or watch.bad(image[h:h + 2 * n]):
            stopped = step
            break
        drift = max(drift, abs(float(np.sum(inside, dtype=np.float64)) - total) / abs(total))
        mismatch = max(mismatch, float(np.max(np.abs(inside - image[h:h + n]))) / scale)
    return BoundaryRun(
        "basin", "wall", 1, n, steps, courant,
        f"a pulse sloshed against the walls of a closed basin by a reversing current, "
        f"{TIDES} tides",
        mass_drift=drift, image_mismatch=mismatch, min=watch.low, max=watch.high,
        diverged_at=stopped)


def basin_2d(sweep: EdgeSweep, courant: float, method: str, n: int = CELLS_2D) -> BoundaryRun:
    x = (np.arange(n) + 0.5) / n
    X, Y = np.meshgrid(x, x, indexing="ij")
    q0 = _bell(np.hypot(X - 0.7, Y - 0.6), 0.0, 0.6)
    steps = _check_steps(math.ceil(TIDES * n / courant))
    walls = ((Edge("wall"), Edge("wall")),) * 2
    periodic = ((Edge("periodic"), Edge("periodic")),) * 2
    q = sweep.padded(q0.astype(sweep.dtype))
    full = np.concatenate((q0, q0[::-1]), axis=0)
    image = sweep.padded(np.concatenate((full, full[:, ::-1]), axis=1).astype(sweep.dtype))
    h, total, scale = sweep.halo, float(np.sum(q0)), float(np.max(np.abs(q0)))
    watch, drift, mismatch, stopped = _Watch(q0), 0.0, 0.0, None
    speeds = (1.0, 0.6)   # a diagonal current; c is the larger axis' Courant number
    for step in range(1, steps + 1):
        tide = _tide(step - 1, steps)
        base = (np.full((n + 1, n), speeds[0] * tide, sweep.dtype),
                np.full((n, n + 1), speeds[1] * tide, sweep.dtype))
        faces = [extend_faces(sweep.fills, base[a], a, sweep.face_halo, walls) for a in (0, 1)]
        image_faces = []
        for a in (0, 1):
            walled = np.moveaxis(base[a].copy(), a, 0)
            walled[0] = walled[-1] = 0.0
            walled = np.moveaxis(walled, 0, a)
            mirrored = _mirrored_faces(walled, a)                  # reflected along a: negated
            other = 1 - a
            mirrored = np.concatenate((mirrored, np.flip(mirrored, other)), axis=other)
            image_faces.append(extend_faces(sweep.fills, np.ascontiguousarray(mirrored), a,
                                            sweep.face_halo, periodic))
        q = split_step(lambda axis, arr, fraction: sweep(axis, arr, faces[axis],
                                                         fraction * courant, walls),
                       q, method, step - 1)
        image = split_step(lambda axis, arr, fraction: sweep(axis, arr, image_faces[axis],
                                                             fraction * courant, periodic),
                           image, method, step - 1)
        inside = q[h:h + n, h:h + n]
        if watch.bad(inside) or watch.bad(image[h:h + 2 * n, h:h + 2 * n]):
            stopped = step
            break
        drift = max(drift, abs(float(np.sum(inside, dtype=np.float64)) - total) / abs(total))
        mismatch = max(mismatch, float(np.max(np.abs(inside - image[h:h + n, h:h + n]))) / scale)
    return BoundaryRun(
        "basin_2d", "wall", 2, n, steps, courant,
        f"a 2-D pulse sloshed against the four walls of a closed basin by a reversing "
        f"diagonal current, {TIDES} tides, {method} splitting",
        mass_drift=drift, image_mismatch=mismatch, min=watch.low, max=watch.high,
        diverged_at=stopped)


# ---- verification ------------------------------------------------------------------------------

@dataclass(frozen=True)
class BoundaryVerification:
    kind: str
    dims: int
    method: str | None
    backend: str
    precision: str
    fault: str | None
    runs: tuple[BoundaryRun, ...]
    findings: tuple[Finding, ...]
    path: str = BoundarySweep.path

    def to_json(self) -> dict:
        return {"kind": self.kind, "dims": self.dims, "split": self.method,
                "backend": self.backend, "precision": self.precision,
                "path": self.path,
                "injected_fault": self.fault,
                "runs": [r.to_json() for r in self.runs]}


def measure_boundary(scheme, kind: str, backend: str, precision: str, courant: float,
                     dims: int = 1, method: str = "strang", progress=None) -> tuple[BoundaryRun, ...]:
    say = progress or (lambda message: None)
    sweep = BoundarySweep(scheme, backend, precision)
    runs = []
    if kind == "wall":
        say("boundary: wall-bounded basin")
        runs.append(basin_1d(sweep, courant))
        if dims > 1:
            runs.append(basin_2d(sweep, courant, method))
    else:
        say("boundary: inflow/outflow channel")
        runs.append(channel_1d(sweep, courant, +1))
        runs.append(channel_1d(sweep, courant, -1))
        if dims > 1:
            runs.append(channel_2d(sweep, courant, method))
    return tuple(runs)


def verify_boundary(scheme, prediction: Prediction, kind: str, backend: str, precision: str,
                    courant: float, dims: int = 1, method: str | None = None,
                    progress=None) -> BoundaryVerification:
    if kind not in KINDS:
        raise LoomError(f"--boundary {kind}: use one of periodic, {', '.join(KINDS)}",
                        file="--boundary")
    boundary_steps(courant)
    runs = measure_boundary(scheme, kind, backend, precision, courant, dims,
                            method or "strang", progress)
    findings = judge_boundary(runs, prediction, scheme.offsets, precision)
    return BoundaryVerification(kind, dims, method if dims > 1 else None, backend, precision,
                                injected_fault(), runs, findings)


def with_boundary(verification, bv: BoundaryVerification):
    return dataclasses.replace(verification,
                               findings=tuple(verification.findings) + bv.findings)


def judge_boundary(runs, prediction: Prediction, offsets, precision: str) -> tuple[Finding, ...]:
    findings = []
    for run in runs:
        stopped = _stopped(run, prediction)
        if run.kind == "wall":
            findings.append(stopped("conservation") or _conservation(run, prediction, precision))
            findings.append(stopped("wall image") or _image(run, precision))
        else:
            findings.append(stopped("outflow") or _reflection(run, offsets, precision))
    return tuple(findings)


def _context(run: BoundaryRun) -> str:
    return f"{run.name} ({run.dims}-D), c = {fmt(run.courant)}, N = {run.n}, {run.steps} steps"


def _stopped(run: BoundaryRun, prediction: Prediction):
    def finding(check: str):
        if run.diverged_at is None:
            return None
        measured = f"diverged at step {run.diverged_at}"
        values = {"case": run.name, "diverged_at": run.diverged_at}
        if prediction.stable_at(run.courant):
            return Finding(check, _context(run), "stable at this Courant number", measured,
                           DISAGREE, values)
        return Finding(check, _context(run), "no claim: not claimed stable at this Courant "
                       "number", measured, NO_CLAIM, values)
    return finding


def _conservation(run: BoundaryRun, prediction: Prediction, precision: str) -> Finding:
    tol = mass_tolerance(precision)
    values = {"case": run.name, "mass_drift": run.mass_drift, "tolerance": tol}
    measured = f"largest relative mass drift {run.mass_drift:.2e}"
    if prediction.conservative is not True:
        return Finding("conservation", _context(run), "no claim (not claimed conservative)",
                       measured, NO_CLAIM, values)
    return Finding("conservation", _context(run),
                   f"no flux through the walls: total kept to round-off (relative drift <= "
                   f"{tol:g})", measured, AGREE if run.mass_drift <= tol else DISAGREE, values)


def _image(run: BoundaryRun, precision: str) -> Finding:
    tol = image_tolerance(precision)
    values = {"case": run.name, "image_mismatch": run.image_mismatch, "tolerance": tol}
    return Finding("wall image", _context(run),
                   f"the periodic run of the domain mirrored across its walls, to round-off "
                   f"(relative difference <= {tol:g})",
                   f"largest relative difference {run.image_mismatch:.2e}",
                   AGREE if run.image_mismatch <= tol else DISAGREE, values)


def _reflection(run: BoundaryRun, offsets, precision: str) -> Finding:
    tol = reflection_tolerance(precision)
    values = {"case": run.name, "reflection": run.reflection,
              "exit_difference": run.exit_difference, "remaining": run.remaining,
              "reference_remaining": run.reference_remaining, "tolerance": tol}
    measured = (f"reflection {run.reflection:.2e} of the pulse after it left (largest "
                f"difference from the long channel at any step {run.exit_difference:.2e}); "
                f"left in the channel {run.remaining:.2e}, in the long channel "
                f"{run.reference_remaining:.2e}")
    if max(offsets) > 0:
        return Finding("outflow", _context(run),
                       f"no claim: the faces read cells downwind of the face (offsets up to "
                       f"{max(offsets)}), so the outflow's ghost cells are read",
                       measured, NO_CLAIM, values)
    worst = max(run.reflection, run.exit_difference)
    return Finding("outflow", _context(run),
                   f"no reflection: the faces read no cell downwind of the face, so the "
                   f"outflow's ghost cells are never read (difference from the long channel "
                   f"<= {tol:g} at every step)", measured,
                   AGREE if worst <= tol else DISAGREE, values)


# ---- output ------------------------------------------------------------------------------

HEADERS = ["case", "dims", "N", "steps", "c", "mass drift", "image", "exit diff", "reflection",
           "remaining", "long channel", "min", "max", "note"]


def boundary_rows(bv: BoundaryVerification) -> list[list]:
    return [[r.name, r.dims, r.n, r.steps, r.courant, r.mass_drift, r.image_mismatch,
             r.exit_difference, r.reflection, r.remaining, r.reference_remaining, r.min, r.max,
             "" if r.diverged_at is None else f"diverged at step {r.diverged_at}"]
            for r in bv.runs]


def boundary_text(bv: BoundaryVerification) -> str:
    from .report import table

    title = {"wall": "Wall-bounded basin (mass drift relative to the total; image: largest "
                     "difference from the periodic run of the mirrored domain, relative to the "
                     "largest value)",
             "open": "Inflow/outflow channel (against the same channel four times as long, "
                     "relative to the pulse: exit diff, the largest difference at any step; "
                     "reflection, the largest at the end, after the pulse has left; remaining, "
                     "the largest departure from the background at the end)"}[bv.kind]
    lines = [title, table(HEADERS, boundary_rows(bv))]
    if bv.fault:
        lines.append(f"injected boundary fault: {bv.fault}")
    return "\n".join(lines) + "\n"


def boundary_json(bv: BoundaryVerification) -> dict:
    from .report import json_safe

    return json_safe({"boundary": bv.to_json()})
