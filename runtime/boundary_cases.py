"""`verify --boundary wall|open`: a pulse through an inflow/outflow channel and a
wall-bounded basin, in 1-D and (with --dims 2 or 3) 2-D or 3-D, run through the generated
sweep with edges (`BoundarySweep`: NAME_sweep_edges, every stage's ghost cells filled inside
it) and the boundary helpers generated for the back end being verified. One builder per
case (`basin`, `channel`) serves every dimension; 2-D and 3-D runs advance by split sweeps.
The cases take any sweep with `EdgeSweep`'s interface (the tests run them through both).

Measured (runs) and judged (findings, agree / disagree / no claim as in rules.py):

- wall (`basin`, `basin_2d`, `basin_3d`): a tidal current that reverses (uniform,
  nonzero up to the walls: the faces helper zeroes the wall faces) sloshes a pulse
  against the walls for two tides. *Conservation*: no flux crosses a wall, so the total
  stays to round-off (relative drift <= 1e-12 in double, 1e-5 in float) wherever the
  analysis claims the scheme conservative. *Mirror image*: in the upwind frame every
  scheme treats a mirrored field with mirrored velocities as the mirror image, so a wall
  with a mirrored halo is exactly the periodic run of the domain reflected across the
  wall (twice as long per axis, velocities negated in the reflection); the two must
  agree to round-off. This holds for every scheme, so it is always claimed. With
  --dims 3 also `box_3d`: the pulse carried round the closed box by the deformational
  flow of the 3-D split cases (divergence-free, zero normal velocity on every wall face
  by itself), one period, the same two findings.
- open (`channel_right`, `channel_left`, `channel_2d`, `channel_3d`): a pulse on a
  background carried out through a zero-gradient outflow, prescribed background at the
  inflow, walls on the other axes, compared with the same run in a channel four times
  as long (the same inflow, its outflow far downstream: the pulse never reaches it).
  *Outflow reflection*: the largest difference at the end, when the pulse has left the
  channel, relative to the pulse's amplitude (`exit_difference`: the largest at any
  step, while the pulse passes the outflow). A scheme whose faces read no cell downwind
  of the face (every stencil offset <= 0: upwind, upwind_rk3) never reads the outflow's
  ghost cells, so its channel is the long channel's to round-off at every step:
  claimed (exit difference and reflection <= 1e-13; 1e-5 in float). Schemes that read
  downwind cells feel the outflow's copied ghost cells: measured and reported, no
  claim. `remaining` is the largest departure from the background left in the channel
  at the end, when the pulse has left it, beside the long channel's own
  (`reference_remaining`: the scheme's numerical tail).

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
CELLS_3D = 16
CELLS = {1: CELLS_1D, 2: CELLS_2D, 3: CELLS_3D}
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
    channels = (math.ceil(TRAVEL * n / ((1.0 if dims == 1 else SLOWEST) * courant))
                for dims, n in CELLS.items())
    return _check_steps(max(*channels, math.ceil(TIDES * CELLS_1D / courant)))


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


# ---- shared by the cases -----------------------------------------------------------------

def _centres(n: int) -> np.ndarray:
    return (np.arange(n) + 0.5) / n


def _pulse(n: int, dims: int, centre: tuple[float, ...], width: float) -> np.ndarray:
    """The bell on n^dims cells of the unit line, square or cube, round `centre`."""
    coords = np.meshgrid(*(_centres(n),) * dims, indexing="ij")
    if dims == 1:
        return _bell(coords[0], centre[0], width)
    distance = np.hypot(coords[0] - centre[0], coords[1] - centre[1])
    for axis in range(2, dims):
        distance = np.hypot(distance, coords[axis] - centre[axis])
    return _bell(distance, 0.0, width)


def _advance(sweep: EdgeSweep, q: np.ndarray, faces, courant: float, edges, method: str,
             step: int) -> np.ndarray:
    """One step: the sweep itself on a line, split sweeps (`method`) in 2-D and 3-D."""
    if q.ndim == 1:
        return sweep(0, q, faces[0], courant, edges)
    return split_step(lambda axis, arr, fraction: sweep(axis, arr, faces[axis],
                                                        fraction * courant, edges),
                      q, method, step)


def _box(h: int, extents) -> tuple[slice, ...]:
    """The interior of a padded array whose interior starts at `h` on every axis."""
    return tuple(slice(h, h + m) for m in extents)


# ---- open: the channel ----------------------------------------------------------------------

SLOWEST = 0.75
CHANNEL_PULSE = {1: ((0.25,), 0.3), 2: ((0.25, 0.5), 0.5), 3: ((0.25, 0.5, 0.5), 0.5)}
"""Per dimension: the pulse's centre (flow from left to right) and its width."""
CHANNEL_TEXT = {
    1: "a cosine-squared pulse on a background leaves a channel through a zero-gradient "
       "outflow; background prescribed at the inflow",
    2: "a 2-D pulse leaves a channel (walls along its sides) in a shear flow, {method} "
       "splitting",
    3: "a 3-D pulse leaves a square duct (walls on its four sides) in a shear flow, {method} "
       "splitting",
}


def _channel_flow(n: int, dims: int) -> np.ndarray | float:
    """Along-channel speed across it (axes 1 and up): SLOWEST at the walls, 1 in the middle
    (1 everywhere on a line)."""
    if dims == 1:
        return 1.0
    across = np.meshgrid(*(_centres(n),) * (dims - 1), indexing="ij")
    profile = np.sin(np.pi * across[0])
    for coord in across[1:]:
        profile = profile * np.sin(np.pi * coord)
    return SLOWEST + (1 - SLOWEST) * profile


def _channel_name(dims: int, direction: int) -> str:
    if dims == 1:
        return "channel_right" if direction > 0 else "channel_left"
    return f"channel_{dims}d" + ("" if direction > 0 else "_left")


def channel(sweep: EdgeSweep, courant: float, dims: int = 1, method: str = "strang",
            direction: int = 1, n: int | None = None) -> BoundaryRun:
    """A pulse carried out of a channel along axis 0 (direction +1: left to right), walls on
    the other axes, against the same run in a channel 1 + DOWNSTREAM times as long."""
    n = CELLS[dims] if n is None else n
    centre, width = CHANNEL_PULSE[dims]
    if direction < 0:
        centre = (1 - centre[0],) + centre[1:]
    q0 = _pulse(n, dims, centre, width)
    slowest = 1.0 if dims == 1 else SLOWEST
    steps = _check_steps(math.ceil(TRAVEL * n / (slowest * courant)))
    inflow, outflow = Edge("inflow", BACKGROUND), Edge("outflow")
    ends = (inflow, outflow) if direction > 0 else (outflow, inflow)
    edges = (ends,) + ((Edge("wall"), Edge("wall")),) * (dims - 1)
    speed = direction * _channel_flow(n, dims)

    def faces(cells: int):
        extents = (cells,) + (n,) * (dims - 1)
        u = [np.broadcast_to(speed, (cells + 1,) + extents[1:]).astype(sweep.dtype)]
        u += [np.zeros(extents[:b] + (n + 1,) + extents[b + 1:], sweep.dtype)
              for b in range(1, dims)]
        return [extend_faces(sweep.fills, u[a], a, sweep.face_halo, edges)
                for a in range(dims)]

    q = sweep.padded(q0.astype(sweep.dtype))
    # the long channel: the same inflow, its outflow DOWNSTREAM channel lengths further on
    first = 0 if direction > 0 else DOWNSTREAM * n
    total = (1 + DOWNSTREAM) * n
    long0 = np.full((total,) + (n,) * (dims - 1), BACKGROUND)
    long0[first:first + n] = q0
    reference = sweep.padded(long0.astype(sweep.dtype))
    short_faces, long_faces = faces(n), faces(total)
    h = sweep.halo
    box = _box(h, q0.shape)
    beside = (slice(h + first, h + first + n),) + box[1:]
    watch, exit_difference, stopped = _Watch(q0), 0.0, None
    for step in range(1, steps + 1):
        q = _advance(sweep, q, short_faces, courant, edges, method, step - 1)
        reference = _advance(sweep, reference, long_faces, courant, edges, method, step - 1)
        inside = q[box]
        if watch.bad(inside) or watch.bad(reference[_box(h, long0.shape)]):
            stopped = step
            break
        exit_difference = max(exit_difference, float(np.max(np.abs(inside - reference[beside]))))
    inside, alongside = q[box], reference[beside]
    return BoundaryRun(
        _channel_name(dims, direction), "open", dims, n, steps, courant,
        CHANNEL_TEXT[dims].format(method=method),
        exit_difference=exit_difference / AMPLITUDE,
        reflection=float(np.max(np.abs(inside - alongside))) / AMPLITUDE,
        remaining=float(np.max(np.abs(inside - BACKGROUND))) / AMPLITUDE,
        reference_remaining=float(np.max(np.abs(alongside - BACKGROUND))) / AMPLITUDE,
        min=watch.low, max=watch.high, diverged_at=stopped)


def channel_1d(sweep: EdgeSweep, courant: float, direction: int = 1,
               n: int = CELLS_1D) -> BoundaryRun:
    """A pulse carried out of a channel at speed 1 (direction +1: left to right)."""
    return channel(sweep, courant, 1, direction=direction, n=n)


def channel_2d(sweep: EdgeSweep, courant: float, method: str, n: int = CELLS_2D) -> BoundaryRun:
    """A 2-D pulse carried out of a channel (x: inflow, outflow; y: walls) by a shear flow."""
    return channel(sweep, courant, 2, method, n=n)


def channel_3d(sweep: EdgeSweep, courant: float, method: str, n: int = CELLS_3D) -> BoundaryRun:
    """A 3-D pulse carried out of a square duct (x: inflow, outflow; y, z: walls)."""
    return channel(sweep, courant, 3, method, n=n)


# ---- wall: the basin ---------------------------------------------------------------------

BASIN_PULSE = {1: ((0.7,), 0.4), 2: ((0.7, 0.6), 0.6), 3: ((0.7, 0.6, 0.4), 0.6)}
"""Per dimension: the pulse's centre and width."""
BASIN_CURRENT = (1.0, 0.6, 0.8)
"""The tidal current's speed along each axis (a diagonal current; c is axis 0's Courant
number, the largest)."""
FLOWS = ("tide", "circulation")
"""The basin's flows: a uniform tidal current, nonzero up to the walls (the faces helper
zeroes the wall faces), or a closed circulation (2-D, 3-D: the deformational flows of the
split cases, divergence-free with zero normal velocity on every wall face)."""
BASIN_NAME = {("tide", 1): "basin", ("tide", 2): "basin_2d", ("tide", 3): "basin_3d",
              ("circulation", 2): "box_2d", ("circulation", 3): "box_3d"}
BASIN_TEXT = {
    ("tide", 1): "a pulse sloshed against the walls of a closed basin by a reversing "
                 "current, {tides} tides",
    ("tide", 2): "a 2-D pulse sloshed against the four walls of a closed basin by a "
                 "reversing diagonal current, {tides} tides, {method} splitting",
    ("tide", 3): "a 3-D pulse sloshed against the six walls of a closed box by a "
                 "reversing diagonal current, {tides} tides, {method} splitting",
    ("circulation", 2): "a 2-D pulse carried round a closed square by the swirling flow "
                        "(zero normal velocity on every wall), which reverses and undoes "
                        "itself, {method} splitting",
    ("circulation", 3): "a 3-D pulse carried round a closed box by the deformational flow "
                        "(zero normal velocity on every wall), which reverses and undoes "
                        "itself, {method} splitting",
}


def _tide(step: int, steps: int) -> float:
    """The tidal current at the middle of a step: TIDES periods over the run."""
    return math.cos(2 * math.pi * TIDES * (step + 0.5) / steps)


def _mirrored_faces(base: np.ndarray, axis: int) -> np.ndarray:
    """Faces of a line reflected across its high end: face n + k = -face n - k."""
    moved = np.moveaxis(base, axis, -1)
    image = np.concatenate((moved, -moved[..., -2::-1]), axis=-1)
    return np.moveaxis(image, -1, axis)


def _image_faces(base: np.ndarray, axis: int, dims: int) -> np.ndarray:
    """Faces normal to `axis` of the domain mirrored across its high end on every axis:
    negated where reflected along `axis`, the same across the others; walls' faces zero."""
    walled = np.moveaxis(base.copy(), axis, 0)
    walled[0] = walled[-1] = 0.0
    mirrored = _mirrored_faces(np.moveaxis(walled, 0, axis), axis)
    for other in range(dims):
        if other != axis:
            mirrored = np.concatenate((mirrored, np.flip(mirrored, other)), axis=other)
    return np.ascontiguousarray(mirrored)


def _tidal_current(n: int, dims: int, courant: float, method: str, dtype):
    """(steps, dt/dx, largest Courant number, faces of step k) of the tide."""
    steps = _check_steps(math.ceil(TIDES * n / courant))

    def faces(step: int) -> list[np.ndarray]:
        tide = _tide(step, steps)
        return [np.full((n,) * a + (n + 1,) + (n,) * (dims - 1 - a), BASIN_CURRENT[a] * tide,
                        dtype) for a in range(dims)]
    return steps, courant, courant, faces


def _circulation(n: int, dims: int, courant: float, method: str, dtype):
    """The same for the closed circulation: one period of the flow at (at most) c."""
    from .multidim.cases import step_count
    from .multidim.flows import SWIRL
    from .multidim.flows3d import DEFORMATION

    flow = {2: SWIRL, 3: DEFORMATION}[dims]
    steps = _check_steps(step_count(flow, n, courant, method))
    dt = flow.period / steps
    base = flow.face_velocities(n)

    def faces(step: int) -> list[np.ndarray]:
        g = flow.time_factor((step + 0.5) * dt)
        return [(f * g).astype(dtype) for f in base]
    return steps, dt * n, flow.max_speed(n) * dt * n, faces


def basin(sweep: EdgeSweep, courant: float, dims: int = 1, method: str = "strang",
          n: int | None = None, flow: str = "tide") -> BoundaryRun:
    """A pulse carried by `flow` in a closed basin (walls on every axis), with the periodic
    run of the domain mirrored across its walls beside it."""
    n = CELLS[dims] if n is None else n
    q0 = _pulse(n, dims, *BASIN_PULSE[dims])
    current = _tidal_current if flow == "tide" else _circulation
    steps, dt_dx, used, faces_of = current(n, dims, courant, method, sweep.dtype)
    walls = ((Edge("wall"), Edge("wall")),) * dims
    periodic = ((Edge("periodic"), Edge("periodic")),) * dims
    q = sweep.padded(q0.astype(sweep.dtype))
    full = q0
    for axis in range(dims):
        full = np.concatenate((full, np.flip(full, axis)), axis=axis)
    image = sweep.padded(full.astype(sweep.dtype))
    h, total, scale = sweep.halo, float(np.sum(q0)), float(np.max(np.abs(q0)))
    box = _box(h, q0.shape)
    watch, drift, mismatch, stopped = _Watch(q0), 0.0, 0.0, None
    for step in range(1, steps + 1):
        base = faces_of(step - 1)
        faces = [extend_faces(sweep.fills, base[a], a, sweep.face_halo, walls)
                 for a in range(dims)]
        image_faces = [extend_faces(sweep.fills, _image_faces(base[a], a, dims), a,
                                    sweep.face_halo, periodic) for a in range(dims)]
        q = _advance(sweep, q, faces, dt_dx, walls, method, step - 1)
        image = _advance(sweep, image, image_faces, dt_dx, periodic, method, step - 1)
        inside = q[box]
        if watch.bad(inside) or watch.bad(image[_box(h, full.shape)]):
            stopped = step
            break
        drift = max(drift, abs(float(np.sum(inside, dtype=np.float64)) - total) / abs(total))
        mismatch = max(mismatch, float(np.max(np.abs(inside - image[box]))) / scale)
    return BoundaryRun(
        BASIN_NAME[flow, dims], "wall", dims, n, steps, used,
        BASIN_TEXT[flow, dims].format(tides=TIDES, method=method),
        mass_drift=drift, image_mismatch=mismatch, min=watch.low, max=watch.high,
        diverged_at=stopped)


def basin_1d(sweep: EdgeSweep, courant: float, n: int = CELLS_1D) -> BoundaryRun:
    return basin(sweep, courant, 1, n=n)


def basin_2d(sweep: EdgeSweep, courant: float, method: str, n: int = CELLS_2D) -> BoundaryRun:
    return basin(sweep, courant, 2, method, n)


def basin_3d(sweep: EdgeSweep, courant: float, method: str, n: int = CELLS_3D) -> BoundaryRun:
    return basin(sweep, courant, 3, method, n)


def box_3d(sweep: EdgeSweep, courant: float, method: str, n: int = CELLS_3D) -> BoundaryRun:
    return basin(sweep, courant, 3, method, n, flow="circulation")

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
                     dims: int = 1, method: str = "strang",
                     progress=None) -> tuple[BoundaryRun, ...]:
    say = progress or (lambda message: None)
    sweep = BoundarySweep(scheme, backend, precision)
    runs = []
    if kind == "wall":
        say("boundary: wall-bounded basin")
        runs.append(basin(sweep, courant))
        if dims > 1:
            runs.append(basin(sweep, courant, dims, method))
        if dims == 3:
            runs.append(basin(sweep, courant, dims, method, flow="circulation"))
    else:
        say("boundary: inflow/outflow channel")
        runs.append(channel(sweep, courant, direction=+1))
        runs.append(channel(sweep, courant, direction=-1))
        if dims > 1:
            runs.append(channel(sweep, courant, dims, method))
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
