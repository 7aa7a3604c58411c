"""Measure a kernel on a periodic domain: convergence, boundedness, total variation,
conservation and stability.

Everything here measures; nothing here predicts. runtime/rules.py holds each
measurement against the analysis. A run that blows up (growth past
DIVERGENCE_FACTOR times the initial maximum, or an overflow to Inf/NaN at a
Courant number where one step can overflow) stops at that step and says so: it
diverged. A NaN or Inf from finite data where one step cannot overflow is a
kernel fault, reported as such (`fault_at`), never as divergence.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from fluxloom.compiler import LoomError

from .kernel import fill_periodic, periodic_faces
from .norms import NORMS, Errors, errors, fitted_order, pair_orders
from .profiles import Profile, face_positions

DIVERGENCE_FACTOR = 1e6
CONVERGENCE_CELLS = tuple(25 * 2 ** k for k in range(6))  # 25 .. 800
ROUND_OFF_FLOOR = 200.0  # errors below this many eps * sqrt(steps) are round-off, not order
MAX_STEPS = 100_000      # steps of one run: caps the work of tiny Courant numbers
MAX_CELLS = 1_000_000    # cells of one run
OVERFLOW_DEGREE = 8      # one step multiplies values by at most ~(1 + 4c)^8 (RK4 on a
OVERFLOW_REACH = 4       # three-point face is degree 4 in c; twice that for slack)


# ---- stepping ----------------------------------------------------------------

@dataclass(frozen=True)
class Run:
    q: np.ndarray              # interior after the last completed step
    steps: int                 # steps completed
    diverged_at: int | None    # the step that grew past the limit (or overflowed)
    fault_at: int | None = None  # the step that made NaN/Inf from finite data: a kernel fault

    @property
    def stopped_at(self) -> int | None:
        return self.diverged_at if self.diverged_at is not None else self.fault_at


def check_run_size(cells: int, courant: float, what: str = "--courant") -> None:
    """Refuse runs whose work would be unbounded: one revolution on `cells` cells at
    `courant` takes cells / courant steps."""
    if cells > MAX_CELLS:
        raise LoomError(f"{cells} cells is more than the {MAX_CELLS} a measuring run takes",
                        file=what)
    steps = revolution_steps(cells, courant)
    if steps > MAX_STEPS:
        raise LoomError(f"c = {courant:g} needs {steps} steps for one revolution on {cells} "
                        f"cells; a measuring run is capped at {MAX_STEPS} steps, so the smallest "
                        f"Courant number measured on {cells} cells is {cells / MAX_STEPS:g}",
                        file=what)


def overflow_possible(scale: float, courant: float, dtype) -> bool:
    """Whether one step from data of size `scale` may overflow at this Courant number.

    A step multiplies values by at most a polynomial in c of modest degree, so below
    this bound an Inf or NaN cannot come from the arithmetic of a correct kernel."""
    top = math.log10(float(np.finfo(dtype).max))
    size = math.log10(max(scale, float(np.finfo(dtype).tiny)))
    return size + OVERFLOW_DEGREE * math.log10(1 + OVERFLOW_REACH * courant) >= top - 1


def constant_velocity(n: int, velocity: float) -> np.ndarray:
    return np.full(n + 1, float(velocity))


def varying_velocity(n: int) -> np.ndarray:
    """A smooth periodic face velocity that changes sign twice: 1/2 + sin(2 pi x)."""
    return 0.5 + np.sin(2 * np.pi * face_positions(n))


def advance(kernel, q0: np.ndarray, u_face: np.ndarray, dt_dx: float, steps: int,
            watch: Callable[[int, np.ndarray], None] | None = None) -> Run:
    """Step q0 `steps` times on a periodic domain; `watch(step, q)` sees every new state."""
    halo, n = kernel.halo, q0.size
    current = np.zeros(n + 2 * halo, dtype=kernel.dtype)
    current[halo:halo + n] = q0
    spare = np.zeros_like(current)
    # FCT kernels read face velocities beyond both ends; extend them once, not every step
    u_face = periodic_faces(np.ascontiguousarray(u_face, dtype=kernel.dtype),
                            getattr(kernel, "face_halo", 0))
    limit = DIVERGENCE_FACTOR * max(float(np.max(np.abs(q0))), np.finfo(float).tiny)
    courant = float(np.max(np.abs(u_face))) * dt_dx if u_face.size else 0.0
    with np.errstate(all="ignore"):  # overflow is a finding, reported below
        for step in range(1, steps + 1):
            fill_periodic(current, halo)
            kernel.step(current, u_face, dt_dx, out=spare)
            interior = spare[halo:halo + n]
            size = float(np.max(np.abs(interior)))
            if not size <= limit:  # also catches NaN
                before = current[halo:halo + n]
                if math.isfinite(size) or overflow_possible(float(np.max(np.abs(before))),
                                                            courant, kernel.dtype):
                    return Run(before.astype(float), step - 1, step)
                return Run(before.astype(float), step - 1, None, step)
            if watch is not None:
                watch(step, interior)
            current, spare = spare, current
    return Run(current[halo:halo + n].astype(float), steps, None)


def round_off(kernel) -> float:
    return float(np.finfo(kernel.dtype).eps)


# ---- convergence ---------------------------------------------------------------

@dataclass(frozen=True)
class ConvergenceRow:
    profile: str
    n: int
    steps: int
    courant: float
    errors: Errors | None      # None when the run diverged or the kernel faulted
    diverged_at: int | None
    final: np.ndarray = field(repr=False, compare=False, default=None)   # the last state
    exact: np.ndarray = field(repr=False, compare=False, default=None)
    resolved: bool = True      # the error stands clear of accumulated round-off
    fault_at: int | None = None  # NaN/Inf from finite data (a kernel fault)


@dataclass(frozen=True)
class Convergence:
    profile: str
    rows: tuple[ConvergenceRow, ...]
    pair_orders: dict[str, list[float]]   # per norm, one per successive pair of grids
    fitted: dict[str, float]              # per norm, least-squares slope

    @property
    def finest_order(self) -> dict[str, float]:
        """Orders from the finest pair of grids whose errors both stand clear of round-off."""
        usable = [i for i in range(len(self.rows) - 1)
                  if self.rows[i].resolved and self.rows[i + 1].resolved]
        if not usable:
            return {norm: float("nan") for norm in self.pair_orders}
        return {norm: orders[usable[-1]] for norm, orders in self.pair_orders.items()}

    @property
    def diverged(self) -> list[ConvergenceRow]:
        return [row for row in self.rows if row.diverged_at is not None]

    @property
    def faults(self) -> list[ConvergenceRow]:
        return [row for row in self.rows if row.fault_at is not None]


def revolution_steps(n: int, courant: float) -> int:
    """Steps for one full revolution at (as nearly as an integer count allows) Courant `courant`;
    one step when a single step at `courant` already goes round (courant >= n)."""
    return max(1, math.ceil(n / courant - 1e-9))


def run_courant(n: int, courant: float) -> float:
    """The Courant number a revolution run uses: n / steps, or `courant` itself when one
    step goes round at least once (a huge Courant number is run as it is)."""
    steps = revolution_steps(n, courant)
    return courant if steps == 1 else n / steps


def convergence(kernel, profile: Profile, courant: float, velocity: float = 1.0,
                cells=CONVERGENCE_CELLS) -> Convergence:
    """Carry `profile` once round the domain on each grid and compare with the exact solution."""
    rows = []
    for n in cells:
        steps = revolution_steps(n, courant)
        used = run_courant(n, courant)
        dt_dx = used / abs(velocity)            # velocity * steps * dt_dx / n = one period
        q0 = profile.cell_averages(n)
        run = advance(kernel, q0, constant_velocity(n, velocity), dt_dx, steps)
        exact = profile.cell_averages(n, shift=math.fmod(velocity * steps * dt_dx / n, 1.0))
        errs = errors(run.q, exact) if run.stopped_at is None else None
        # round-off accumulates like a random walk over the steps
        floor = ROUND_OFF_FLOOR * round_off(kernel) * math.sqrt(steps)
        rows.append(ConvergenceRow(profile.name, n, steps, used, errs, run.diverged_at,
                                   run.q, exact, errs is not None and errs.l1 > floor,
                                   run.fault_at))
    ns = [row.n for row in rows]
    per_norm = {norm: [row.errors.get(norm) if row.errors else float("nan") for row in rows]
                for norm in NORMS}
    return Convergence(profile.name, tuple(rows),
                       {norm: pair_orders(ns, e) for norm, e in per_norm.items()},
                       {norm: fitted_order(ns, e) for norm, e in per_norm.items()})


# ---- shape: bounds, extrema, total variation --------------------------------------

def total_variation(q: np.ndarray) -> float:
    """Periodic total variation."""
    return float(np.abs(np.diff(q, append=q[:1])).sum())


def outside_local_range(old: np.ndarray, new: np.ndarray, reach: int, tol: float) -> int:
    """Cells whose new value leaves the range of the old values within `reach` cells.

    A step creates a new extremum where it does this: the value cannot have come
    from any mix of the cells the step could read (a local maximum principle)."""
    padded = np.concatenate([old[-reach:], old, old[:reach]]) if reach else old
    windows = np.lib.stride_tricks.sliding_window_view(padded, 2 * reach + 1)
    above = new > windows.max(axis=1) + tol
    below = new < windows.min(axis=1) - tol
    return int(np.count_nonzero(above | below))


@dataclass(frozen=True)
class Shape:
    profile: str
    n: int
    steps: int
    courant: float
    velocity: float
    initial_bounds: tuple[float, float]
    seen_bounds: tuple[float, float]      # min and max over every step
    bounded: bool                          # seen within the initial bounds (to round-off)
    first_out_of_bounds: int | None
    new_extrema: int                       # most cells in one step outside their local range
    first_new_extremum: int | None
    tv_growth_steps: int                   # steps in which total variation grew
    tv_increase: float                     # largest one-step growth, relative to the initial TV
    first_tv_growth: int | None
    mass_drift: float
    diverged_at: int | None
    final: np.ndarray = field(repr=False, compare=False, default=None)
    exact: np.ndarray = field(repr=False, compare=False, default=None)  # at the final step
    fault_at: int | None = None

    @property
    def stopped_at(self) -> int | None:
        return self.diverged_at if self.diverged_at is not None else self.fault_at


class _ShapeWatch:
    """Follows bounds, new extrema and total variation step by step."""

    def __init__(self, q0: np.ndarray, eps: float, reach: int):
        scale = max(float(np.max(np.abs(q0))), 1e-300)
        self.tol = 1e3 * eps * scale
        self.reach = reach
        self.previous = q0.astype(float)
        self.low, self.high = float(q0.min()), float(q0.max())
        self.seen_low, self.seen_high = self.low, self.high
        self.tv0 = self.tv = total_variation(q0)
        self.tv_tol = 1e3 * eps * max(self.tv0, scale)
        self.first_out = self.first_extremum = self.first_tv = None
        self.new_extrema = self.tv_steps = 0
        self.tv_increase = 0.0

    def __call__(self, step: int, q: np.ndarray) -> None:
        low, high = float(q.min()), float(q.max())
        self.seen_low, self.seen_high = min(self.seen_low, low), max(self.seen_high, high)
        if self.first_out is None and (low < self.low - self.tol or high > self.high + self.tol):
            self.first_out = step
        created = outside_local_range(self.previous, q, self.reach, self.tol)
        if created and self.first_extremum is None:
            self.first_extremum = step
        self.new_extrema = max(self.new_extrema, created)
        self.previous = q.astype(float)
        tv = total_variation(q)
        if tv > self.tv + self.tv_tol:
            self.tv_steps += 1
            self.tv_increase = max(self.tv_increase, (tv - self.tv) / max(self.tv0, 1e-300))
            if self.first_tv is None:
                self.first_tv = step
        self.tv = tv


def shape(kernel, profile: Profile, courant: float, velocity: float = 1.0, n: int = 100,
          steps: int | None = None) -> Shape:
    """Carry a (typically discontinuous) profile and watch its shape every step."""
    steps = revolution_steps(n, courant) if steps is None else steps
    q0 = profile.cell_averages(n)
    # a whole step (all its stages) reads up to stages * halo cells either side
    watch = _ShapeWatch(q0, round_off(kernel), kernel.halo * getattr(kernel, "stages", 1))
    run = advance(kernel, q0, constant_velocity(n, velocity), courant / abs(velocity),
                  steps, watch)
    return Shape(profile.name, n, run.steps, courant, velocity, (watch.low, watch.high),
                 (watch.seen_low, watch.seen_high),
                 watch.first_out is None, watch.first_out,
                 watch.new_extrema, watch.first_extremum,
                 watch.tv_steps, watch.tv_increase, watch.first_tv,
                 relative_drift(q0, run.q), run.diverged_at, run.q,
                 profile.cell_averages(n, shift=math.fmod(velocity * run.steps * courant
                                                          / abs(velocity) / n, 1.0)),
                 run.fault_at)


# ---- conservation ------------------------------------------------------------------

def relative_drift(q0: np.ndarray, q: np.ndarray) -> float:
    """Change of the total relative to the total amount of |q| present."""
    scale = max(float(np.abs(q0).sum()), float(np.abs(q).sum()), 1e-300)
    return float(abs(q.sum() - q0.sum()) / scale)


@dataclass(frozen=True)
class Conservation:
    velocity: str          # "+1", "-1" or "varying"
    profile: str
    n: int
    steps: int
    mass_drift: float
    diverged_at: int | None
    fault_at: int | None = None


def conservation(kernel, profile: Profile, courant: float, velocity: str = "varying",
                 n: int = 100, steps: int = 200) -> Conservation:
    """Relative drift of the total after `steps` steps; with "varying" the face velocity
    changes along the domain and changes sign (Courant number `courant` at its peak)."""
    u_face = varying_velocity(n) if velocity == "varying" else constant_velocity(n, float(velocity))
    dt_dx = courant / float(np.max(np.abs(u_face)))
    q0 = profile.cell_averages(n)
    run = advance(kernel, q0, u_face, dt_dx, steps)
    return Conservation(velocity, profile.name, n, run.steps, relative_drift(q0, run.q),
                        run.diverged_at, run.fault_at)


# ---- symmetry under a change of velocity sign ---------------------------------------

@dataclass(frozen=True)
class Mirror:
    mismatch: float            # largest difference relative to the profile's scale (nan: unknown)
    diverged_at: int | None    # both runs stopped at this step (they diverged alike)
    fault_at: int | None = None


def mirror_run(kernel, profile: Profile, courant: float, n: int = 64, steps: int = 40) -> Mirror:
    """Carry a profile right, and its mirror image left; the results should mirror."""
    q0 = profile.cell_averages(n)
    right = advance(kernel, q0, constant_velocity(n, 1.0), courant, steps)
    left = advance(kernel, q0[::-1].copy(), constant_velocity(n, -1.0), courant, steps)
    fault = right.fault_at if right.fault_at is not None else left.fault_at
    if fault is not None:
        return Mirror(float("nan"), None, fault)
    if right.diverged_at is not None or left.diverged_at is not None:
        alike = right.diverged_at == left.diverged_at
        return Mirror(0.0 if alike else float("nan"), right.diverged_at or left.diverged_at)
    scale = max(float(np.max(np.abs(q0))), 1e-300)
    return Mirror(float(np.max(np.abs(right.q - left.q[::-1]))) / scale, None)


def mirror_mismatch(kernel, profile: Profile, courant: float, n: int = 64,
                    steps: int = 40) -> float:
    """The largest difference between a run and its mirror image, relative to the scale."""
    return mirror_run(kernel, profile, courant, n, steps).mismatch


# ---- stability sweep ------------------------------------------------------------

@dataclass(frozen=True)
class Probe:
    courant: float
    growth: float            # linear: max |G| over the grid's modes; else l2 growth, 2nd half
    diverged_at: int | None
    grows: bool
    fault: bool = False      # the kernel made NaN/Inf from finite data here


@dataclass(frozen=True)
class Stability:
    method: str                  # "spectral" (linear schemes) or "growth" (nonlinear)
    probes: tuple[Probe, ...]    # sorted by Courant number
    measured: tuple[tuple[float, float], ...]  # runs of stable probes, edges bisected
    measured_max: float | None   # upper edge of the stable run at the smallest c tried
    unstable_everywhere: bool    # grew at every Courant number tried
    stable_everywhere: bool      # grew at none of them
    tried_min: float
    tried_max: float
    resolution: float

    @property
    def faults(self) -> tuple[Probe, ...]:
        return tuple(p for p in self.probes if p.fault)

    def probe_at(self, c: float) -> Probe | None:
        return next((p for p in self.probes if p.courant == c), None)


GROWTH_FACTOR = 2.0    # over the second half of a growth probe
TOTAL_GROWTH = 100.0   # over the whole probe
SPECTRAL_TOL = 1e4     # |G| above 1 by more than this many eps is growth, not round-off
SPECTRAL_RESOLUTION = 0.001
GROWTH_RESOLUTION = 0.005


def spectral_probe(kernel, courant: float, velocity: float = 1.0, n: int = 256,
                   centre: float = 0.0, amplitude: float = 1.0, seed: int = 2024) -> Probe:
    """One step of random data through a kernel that is linear (about `centre`): the
    ratio of Fourier coefficients after and before is the amplification factor of
    each of the grid's modes, measured on the kernel itself.

    A clamped scheme is probed with a small amplitude about the middle of its range,
    so the clamp stays idle and the scheme underneath is what is measured."""
    rng = np.random.default_rng(seed)
    noise = rng.standard_normal(n)
    noise -= noise.mean()
    q0 = centre + amplitude * noise
    run = advance(kernel, q0, constant_velocity(n, velocity), courant / abs(velocity), 1)
    if run.fault_at is not None:
        return Probe(courant, math.nan, None, False, True)
    if run.diverged_at is not None:
        return Probe(courant, math.inf, run.diverged_at, True)
    before = np.fft.rfft(q0 - centre)[1:]     # the mean is conserved, not amplified
    after = np.fft.rfft(run.q - centre)[1:]
    gain = float(np.max(np.abs(after / before)))
    return Probe(courant, gain, None, gain > 1 + SPECTRAL_TOL * round_off(kernel))


def growth_probe(kernel, courant: float, velocity: float = 1.0, n: int = 64,
                 steps: int = 1000, centre: float = 0.0, amplitude: float = 1.0,
                 seed: int = 2024) -> Probe:
    """Random zero-mean data, `steps` steps at `courant`: does the l2 norm keep growing?

    The first half lets damped modes die out, so the second half sees the least
    stable mode; one growing by a factor GROWTH_FACTOR (or a blow-up) means unstable.
    Deviations are measured from `centre` (a clamped scheme is probed with a small
    amplitude about the middle of its range, so the clamp does not hide growth)."""
    rng = np.random.default_rng(seed)
    noise = rng.standard_normal(n)
    q0 = centre + amplitude * (noise - noise.mean())
    u_face = constant_velocity(n, velocity)
    dt_dx = courant / abs(velocity)
    half = advance(kernel, q0, u_face, dt_dx, steps // 2)
    if half.fault_at is not None:
        return Probe(courant, math.nan, None, False, True)
    if half.diverged_at is not None:
        return Probe(courant, math.inf, half.diverged_at, True)
    rest = advance(kernel, half.q, u_face, dt_dx, steps - steps // 2)
    if rest.fault_at is not None:
        return Probe(courant, math.nan, None, False, True)
    if rest.diverged_at is not None:
        return Probe(courant, math.inf, half.steps + rest.diverged_at, True)
    start = float(np.linalg.norm(q0 - centre))
    before = float(np.linalg.norm(half.q - centre))
    after = float(np.linalg.norm(rest.q - centre))
    growth = after / before if before > 0 else (math.inf if after > 0 else 1.0)
    # a clamp can stop a blow-up in the first half: then the overall growth shows it
    overall = after / start
    return Probe(courant, growth, None, growth > GROWTH_FACTOR or overall > TOTAL_GROWTH)


def stability_sweep(kernel, courants, velocity: float = 1.0, linear: bool = False,
                    clip: tuple[float, float] | None = None,
                    amplitude: float | None = None) -> Stability:
    """Probe every Courant number in `courants`, then bisect each change between
    neighbouring ones (stable to growing or back) to locate the edges.

    The caller picks the Courant numbers (runtime/prediction.py covers the predicted
    set, its complement and its islands). Linear schemes (`linear`, possibly under a
    `clip`) are probed spectrally, others by growth over many steps. `amplitude` sets
    the size of the random data: a nonlinear face linearised at a constant state acts
    as its linearisation on data small enough (its weights at their ideal values), so
    it is probed there."""
    # a clamped scheme is probed well inside its range, where the clamp stays idle
    centre, size = ((clip[0] + clip[1]) / 2, (clip[1] - clip[0]) * 1e-3) if clip else (0.0, 1.0)
    amplitude = size if amplitude is None else amplitude
    if linear:
        def measure(c):
            return spectral_probe(kernel, c, velocity, centre=centre, amplitude=amplitude)
        method, resolution = "spectral", SPECTRAL_RESOLUTION
    else:
        def measure(c):
            return growth_probe(kernel, c, velocity, centre=centre, amplitude=amplitude)
        method, resolution = "growth", GROWTH_RESOLUTION
    grid = sorted({float(c) for c in courants if c > 0})
    if not grid:
        raise ValueError("stability_sweep needs at least one positive Courant number")
    probes = {c: measure(c) for c in grid}
    # bisect every change between neighbours (faults are not a side of an edge)
    for low, high in zip(grid, grid[1:]):
        a, b = probes[low], probes[high]
        if a.fault or b.fault or a.grows == b.grows:
            continue
        while high - low > resolution:
            mid = (low + high) / 2
            probes[mid] = result = measure(mid)
            if result.fault:
                break
            if result.grows == a.grows:
                low = mid
            else:
                high = mid
    ordered = tuple(probes[c] for c in sorted(probes))
    measured = _stable_runs(ordered, resolution)
    first_stable = not ordered[0].grows and not ordered[0].fault
    measured_max = measured[0][1] if measured and first_stable else None
    judged = [p for p in ordered if not p.fault]
    return Stability(method, ordered, measured, measured_max,
                     bool(judged) and all(p.grows for p in judged),
                     bool(judged) and not any(p.grows for p in judged),
                     grid[0], grid[-1], resolution)


def _stable_runs(probes, resolution: float) -> tuple[tuple[float, float], ...]:
    """Runs of consecutive stable probes as (low, high); each end halfway to the
    neighbouring growing probe when that is within the resolution (a bisected edge)."""
    runs = []
    start = None
    for i, p in enumerate(probes):
        stable = not p.grows and not p.fault
        if stable and start is None:
            start = i
        if start is not None and (not stable or i == len(probes) - 1):
            end = i if stable else i - 1
            lo, hi = probes[start].courant, probes[end].courant
            if start > 0 and lo - probes[start - 1].courant <= resolution:
                lo = (lo + probes[start - 1].courant) / 2
            if end < len(probes) - 1 and probes[end + 1].courant - hi <= resolution:
                hi = (hi + probes[end + 1].courant) / 2
            runs.append((0.0 if start == 0 else lo, hi))
            start = None
    return tuple(runs)
