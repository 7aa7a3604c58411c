"""The 2-D and 3-D cases: a field carried by a flow until the exact solution is the
initial field again, advanced by split sweeps, measured against that exact solution.

Measures only (runtime/multidim/findings.py judges). Per grid: the normalised
l1, l2, linf errors (Williamson et al. 1992; on a uniform grid the area weights
cancel), min and max at the end, min and max seen after any sweep, the relative
mass drift, and where a run stopped: diverged (growth past the harness's limit,
or overflow where a step can overflow) or a kernel fault (NaN/Inf from finite
data where it cannot).

Time step: dt = c dx / max |u| over the faces of every axis and over time
(|g(t)| <= 1), rounded down so that a whole number of steps (even, for
alternating Lie) reaches the final time; a flow that changes in time is taken
at the middle of each step.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from fluxloom.compiler.splittings import splitting

from ..harness import DIVERGENCE_FACTOR, overflow_possible
from ..norms import errors
from ..splitting import split_step
from ..sweeps import BoundSweep, KernelSweep, LineSweep
from .fields import CONSTANT, CONSTANT_3D, HUMP, SLOTTED_CYLINDER, WAVE_3D, Field
from .flows import ROTATION, SWIRL, Flow
from .flows3d import DEFORMATION, DIAGONAL, PotentialFlow, UniformFlow

GRIDS = (16, 32, 64)
"""Cells per side: the smooth case's observed order comes from successive pairs."""
GRIDS_3D = (8, 16, 32)
"""Cells per side in 3-D: 32^3 cells keep a run to seconds in C."""
MAX_STEPS_2D = 20_000
MAX_CELL_STEPS_3D = 2 * 10 ** 9
"""Cells times steps of the slowest 3-D case on its finest grid (work refused beyond)."""


@dataclass(frozen=True)
class Case:
    name: str
    description: str
    flow: Flow | PotentialFlow | UniformFlow
    field: Field
    coefficients: str = "variable"   # the order claim it measures: "variable" or "constant"

    @property
    def smooth(self) -> bool:
        return self.field.smooth and self.field.high > self.field.low

    @property
    def dims(self) -> int:
        return self.field.dims


CASES = (
    Case("rotation_cylinder", "Zalesak's slotted cylinder, one turn of solid-body rotation",
         ROTATION, SLOTTED_CYLINDER),
    Case("swirl_hump", "a smooth hump through the swirling deformational flow (LeVeque "
         "1996), which undoes itself at t = T", SWIRL, HUMP),
    Case("swirl_constant", "a constant field through the swirling flow: how far split sweeps "
         "leave a constant", SWIRL, CONSTANT),
)
SMOOTH_CASE = "swirl_hump"
CASES_3D = (
    Case("diagonal_wave", "a smooth periodic wave carried once across the periodic cube by a "
         "uniform diagonal velocity (constant coefficients)", DIAGONAL, WAVE_3D, "constant"),
    Case("deformation_wave", "a smooth periodic wave through the 3-D deformational flow "
         "(LeVeque 1996), which undoes itself at t = T", DEFORMATION, WAVE_3D),
    Case("deformation_constant", "a constant field through the 3-D deformational flow: how "
         "far split sweeps leave a constant", DEFORMATION, CONSTANT_3D),
)
SMOOTH_CASE_3D = "deformation_wave"
ORDER_CASES = {2: {SMOOTH_CASE}, 3: {"diagonal_wave", SMOOTH_CASE_3D}}
"""Cases whose observed order is judged, per dimension."""


def cases_for(dims: int) -> tuple[Case, ...]:
    return CASES if dims == 2 else CASES_3D


def grids_for(dims: int) -> tuple[int, ...]:
    return GRIDS if dims == 2 else GRIDS_3D


def smooth_case(dims: int) -> str:
    """The case whose pair orders `observed_order` reports."""
    return SMOOTH_CASE if dims == 2 else SMOOTH_CASE_3D


@dataclass(frozen=True)
class CaseRun:
    case: str
    n: int
    steps: int                 # steps completed
    courant: float             # the largest |u| dt/dx of any face on either axis
    l1: float | None
    l2: float | None
    linf: float | None
    min: float
    max: float
    sweep_min: float           # after any sweep
    sweep_max: float
    initial_min: float
    initial_max: float
    mass_drift: float          # |sum q - sum q0| / |sum q0|
    diverged_at: int | None = None
    fault_at: int | None = None
    final: np.ndarray = field(repr=False, compare=False, default=None)
    initial: np.ndarray = field(repr=False, compare=False, default=None)

    @property
    def stopped_at(self) -> int | None:
        return self.diverged_at if self.diverged_at is not None else self.fault_at

    @property
    def overshoot(self) -> float:
        """How far the field went past its initial range after any sweep (0 if never)."""
        return max(0.0, self.sweep_max - self.initial_max, self.initial_min - self.sweep_min)

    def to_json(self) -> dict:
        return {"name": self.case, "n": self.n, "l1": self.l1, "l2": self.l2, "linf": self.linf,
                "min": self.min, "max": self.max, "mass_drift": self.mass_drift,
                "steps": self.steps, "courant": self.courant, "sweep_min": self.sweep_min,
                "sweep_max": self.sweep_max, "initial_min": self.initial_min,
                "initial_max": self.initial_max, "overshoot": self.overshoot,
                "diverged_at": self.diverged_at, "fault_at": self.fault_at}


def step_count(flow: Flow, n: int, courant: float, method: str) -> int:
    """Steps to the flow's period at (at most) Courant number `courant`."""
    dt = courant / (n * flow.max_speed(n))
    steps = max(1, math.ceil(flow.period / dt - 1e-9))
    period = splitting(method).period
    return steps + (-steps) % period


def check_case_size(n: int, courant: float, dims: int = 2) -> int:
    """The steps the slowest case takes on n cells per side; refuse unbounded work."""
    from fluxloom.compiler import LoomError

    steps = max(step_count(case.flow, n, courant, "alternating") for case in cases_for(dims))
    if dims == 3 and steps * n ** 3 > MAX_CELL_STEPS_3D:
        raise LoomError(f"c = {courant:g} needs {steps} steps on {n}^3 cells; the 3-D cases "
                        f"are capped at {MAX_CELL_STEPS_3D:.0e} cell steps", file="--courant")
    if steps > MAX_STEPS_2D:
        raise LoomError(f"c = {courant:g} needs {steps} steps on {n} x {n} cells; the 2-D "
                        f"cases are capped at {MAX_STEPS_2D} steps", file="--courant")
    return steps


def run_case(line_sweep: KernelSweep | LineSweep, case: Case, n: int, courant: float, method: str,
             field_override: Field | None = None,
             watch: Callable[[int, np.ndarray], None] | None = None) -> CaseRun:
    """Carry the case's field once round its flow on n^dims cells with split sweeps."""
    kernel = line_sweep.kernel
    source = field_override or case.field
    q0 = source.cell_averages(n).astype(kernel.dtype)
    steps = step_count(case.flow, n, courant, method)
    dt = case.flow.period / steps
    base = [f.astype(kernel.dtype) for f in case.flow.face_velocities(n)]
    used = case.flow.max_speed(n) * dt * n
    scale = max(float(np.max(np.abs(q0))), np.finfo(float).tiny)
    limit = DIVERGENCE_FACTOR * scale
    seen = [float(q0.min()), float(q0.max())]

    def after_sweep(axis, fraction, q):
        seen[0] = min(seen[0], float(q.min()))
        seen[1] = max(seen[1], float(q.max()))

    q, diverged, fault = q0, None, None
    done = 0
    with np.errstate(all="ignore"):
        for k in range(steps):
            g = case.flow.time_factor((k + 0.5) * dt)
            faces = base if g == 1.0 else [(f * g).astype(kernel.dtype) for f in base]
            sweep = BoundSweep(line_sweep, faces, (dt * n,) * len(faces))
            new = split_step(sweep, q, method, k, on_sweep=after_sweep)
            size = float(np.max(np.abs(new)))
            if not size <= limit:                    # also catches NaN
                if math.isfinite(size) or overflow_possible(float(np.max(np.abs(q))), used,
                                                            kernel.dtype):
                    diverged = k + 1
                else:
                    fault = k + 1
                break
            q = new
            done = k + 1
            if watch is not None:
                watch(done, q)
    final = q.astype(float)
    exact = q0.astype(float)
    total0 = float(np.sum(exact))
    drift = abs(float(np.sum(final)) - total0) / abs(total0) if total0 else abs(float(np.sum(final)))
    stopped = diverged is not None or fault is not None
    errs = None if stopped else errors(final.ravel(), exact.ravel())
    errs_values = (None, None, None) if errs is None else (errs.l1, errs.l2, errs.linf)
    return CaseRun(case.name, n, done, used, *errs_values, float(final.min()),
                   float(final.max()), seen[0], seen[1], float(exact.min()), float(exact.max()),
                   drift, diverged, fault, final, exact)
