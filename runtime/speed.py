"""Kernel speed in cell-updates per second, and the numpy kernel's extra memory.

Measured for `fluxloom bench`: the generated C kernel (at each optimisation level),
the generated numpy module, the hand-written C and numpy kernels of the same scheme
when fluxloom.benchmarks has one, and two streaming references: a sweep that reads
the step's inputs (the state and the face velocities) and writes its output once
each, the memory-bandwidth ceiling of any one-sweep step and the reference of the
speed target; and a plain copy of the state, for comparison with machine figures.
All in one process, one after another, on the same arrays and velocity field.
"""
from __future__ import annotations

import time
import tracemalloc
from dataclasses import dataclass, field

import numpy as np

from fluxloom.benchmarks import c_source, counterpart
from fluxloom.compiler.emit.plan import exported_symbol
from fluxloom.compiler.ir import Scheme

from . import build
from .kernel import numpy_module, periodic_faces

OPT_LEVELS = ("-O2", "-O3", "-O2 -march=native", "-O3 -march=native")
"""Flag sets compared; models are usually built for the machine they run on, and the
limiter's divisions only vectorise wide with the host's instruction set."""
VELOCITY_FIELDS = ("smooth", "constant", "random")
COURANT = 0.8
"""Largest |u| dt/dx of every run: inside the stable range of the bundled schemes."""


def velocity_field(kind: str, n: int, seed: int = 0) -> np.ndarray:
    """n + 1 periodic face velocities (u_face[n] == u_face[0]).

    smooth: two full cosine waves, so the sign changes at four places (what models see);
    constant: one sign everywhere, varying in size; random: independent signs per face.
    """
    x = np.arange(n + 1) / n
    if kind == "smooth":
        u = np.cos(2 * np.pi * 2 * x + 0.1)
    elif kind == "constant":
        u = 0.6 + 0.3 * np.sin(2 * np.pi * x)
    elif kind == "random":
        u = np.random.default_rng(seed).uniform(-1.0, 1.0, n + 1)
    else:
        raise ValueError(f"unknown velocity field {kind!r}")
    u[-1] = u[0]
    return u


def sign_changes(u: np.ndarray) -> int:
    forward = u[:-1] >= 0
    return int(np.count_nonzero(forward[1:] != forward[:-1]))


def profile(n: int) -> np.ndarray:
    """A smooth wave and a square pulse side by side: limiters see both."""
    x = (np.arange(n) + 0.5) / n
    return 0.5 + 0.25 * np.sin(2 * np.pi * x) + 0.25 * ((x > 0.6) & (x < 0.8))


# ---- one measured kernel -------------------------------------------------------------

def seconds_per_step(step, steps: int, repeats: int) -> float:
    """Best over `repeats` of the mean time of `steps` calls (after one warm-up call)."""
    step()
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        for _ in range(steps):
            step()
        best = min(best, (time.perf_counter() - start) / steps)
    return best


def peak_extra_arrays(step, n: int, itemsize: int) -> float:
    """Peak memory numpy allocates during one call, in arrays of n values."""
    step()
    tracemalloc.start()
    try:
        tracemalloc.reset_peak()
        step()
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    return peak / (n * itemsize)


class Domain:
    """Two ping-pong arrays with halos, the face velocities and the workspace."""

    def __init__(self, n: int, halo: int, face_halo: int, u_face: np.ndarray, work_size: int,
                 dt_dx: float):
        self.n, self.halo, self.dt_dx = n, halo, dt_dx
        self.arrays = [np.empty(n + 2 * halo), np.empty(n + 2 * halo)]
        for a in self.arrays:
            a[halo:halo + n] = profile(n)
            a[:halo] = a[n:n + halo]
            a[halo + n:] = a[halo:2 * halo]
        self.u_face = np.ascontiguousarray(periodic_faces(u_face, face_halo))
        self.work = np.zeros(max(work_size, 1))
        self.turn = 0

    def pair(self):
        """(source, target), swapped on every call."""
        self.turn ^= 1
        return self.arrays[self.turn], self.arrays[self.turn ^ 1]


def _c_caller(ffi, function, domain: Domain):
    """One step of a C kernel with the (n, q_in, q_out, u_face, dt_dx, work) signature."""
    pointers = [ffi.from_buffer("double[]", a) for a in domain.arrays]
    u = ffi.from_buffer("double[]", domain.u_face)
    work = ffi.from_buffer("double[]", domain.work)
    n, dt_dx = domain.n, domain.dt_dx
    turn = [0]

    def step():
        turn[0] ^= 1
        source, target = pointers[turn[0]], pointers[turn[0] ^ 1]
        function(n, source, target, u, dt_dx, work)
    return step


# ---- the hand-written C, compiled like generated kernels ------------------------------

def handwritten_c(opt: str):
    """(ffi, lib) of benchmarks/handwritten.c built with the generated kernels' flags."""
    declarations, source = c_source()
    return build.compile_source("handwritten", source, declarations, opt)


# ---- the whole measurement ----------------------------------------------------------------

@dataclass(frozen=True)
class FieldResult:
    """Cell-updates per second for one velocity field; C entries per optimisation level."""

    field: str
    sign_changes: int
    generated_c: dict[str, float]
    handwritten_c: dict[str, float]
    stream: dict[str, float]       # the plain copy of the state
    sweep: dict[str, float]        # reads state and face velocities, writes the output
    generated_numpy: float
    handwritten_numpy: float | None


@dataclass(frozen=True)
class BenchResult:
    scheme: str
    cells: int
    steps: int
    counterpart: str | None
    fields: tuple[FieldResult, ...]
    numpy_memory: dict[str, float] = field(default_factory=dict)  # peak extra, in domain arrays


def measure(scheme: Scheme, cells: int, steps: int, repeats: int = 5,
            fields=VELOCITY_FIELDS, opt_levels=OPT_LEVELS, progress=None) -> BenchResult:
    """Time every kernel of scheme on every velocity field (double precision).

    The kernels take turns within each of the `repeats` rounds and each keeps its
    best round, so a change in machine load hits all of them alike.
    """
    hand = counterpart(scheme)
    module = numpy_module(scheme, "double")
    libraries = {opt: build.compile_c(scheme, "double", opt) for opt in opt_levels}
    results, memory = [], {}
    for kind in fields:
        if progress:
            progress(f"velocity field '{kind}'")
        u = velocity_field(kind, cells)
        dt_dx = COURANT / float(np.max(np.abs(u)))

        def domain(halo, face_halo=0, work=0):
            return Domain(cells, halo, face_halo, u, work, dt_dx)

        runners = {}
        streaming_domain = domain(0)
        for opt, (ffi, lib) in libraries.items():
            d = domain(module.HALO, module.FACE_HALO, lib_workspace(lib, scheme.name, cells))
            runners["generated C", opt] = _c_caller(
                ffi, getattr(lib, exported_symbol(scheme.name, "step", "double")), d)
            hand_ffi, hand_lib = handwritten_c(opt)
            if hand is not None:
                d = domain(hand.halo, 0, cells + 1)
                runners["hand-written C", opt] = _c_caller(
                    hand_ffi, getattr(hand_lib, hand.c_function), d)
            runners["stream", opt], runners["sweep", opt] = _streaming_callers(
                hand_ffi, hand_lib, streaming_domain)
        runners["generated numpy", None] = _numpy_caller(
            module.step, domain(module.HALO, module.FACE_HALO, module.workspace_size(cells)),
            module.workspace_size(cells) > 0)
        if hand is not None:
            e = domain(hand.halo)
            runners["hand-written numpy", None] = _numpy_caller(
                lambda n, a, b, u_face, dt, work: hand.numpy_step(n, a, b, u_face, dt, hand.halo),
                e, False)
        best = dict.fromkeys(runners, float("inf"))
        for _ in range(repeats):
            for key, step in runners.items():
                best[key] = min(best[key], seconds_per_step(step, steps, 1))
        speed = {key: cells / seconds for key, seconds in best.items()}
        memory[f"generated ({kind})"] = peak_extra_arrays(runners["generated numpy", None], cells, 8)
        if hand is not None:
            memory[f"hand-written ({kind})"] = peak_extra_arrays(
                runners["hand-written numpy", None], cells, 8)

        def by_opt(label):
            return {opt: speed[label, opt] for opt in opt_levels if (label, opt) in speed}
        results.append(FieldResult(kind, sign_changes(u), by_opt("generated C"),
                                   by_opt("hand-written C"), by_opt("stream"), by_opt("sweep"),
                                   speed["generated numpy", None],
                                   speed.get(("hand-written numpy", None))))
    return BenchResult(scheme.name, cells, steps, hand.name if hand else None, tuple(results), memory)


def _streaming_callers(ffi, lib, domain: Domain):
    """(copy, sweep): the two streaming references on one domain without halos."""
    source, target = (ffi.from_buffer("double[]", a) for a in domain.arrays)
    u = ffi.from_buffer("double[]", domain.u_face)
    n = domain.n
    return (lambda: lib.stream_copy(n, source, target),
            lambda: lib.stream_sweep(n, source, u, target))


def _numpy_caller(step_function, domain: Domain, with_work: bool):
    work = domain.work if with_work else None

    def step():
        a, b = domain.pair()
        step_function(domain.n, a, b, domain.u_face, domain.dt_dx, work)
    return step


def lib_workspace(lib, name: str, cells: int) -> int:
    return int(getattr(lib, exported_symbol(name, "workspace_size", "double"))(cells))


# ---- targets (issue 4, section 5) ------------------------------------------------------------

MEMORY_LIMIT = 8.0
"""Peak extra memory of the generated numpy kernel, in arrays of the domain's size."""


@dataclass(frozen=True)
class Target:
    what: str
    value: float
    target: float
    binding: bool = True   # False: shown beside a target for comparison, not judged

    @property
    def met(self) -> bool | None:
        return self.value >= self.target if self.binding else None


def targets(result: BenchResult, limited_single_step: bool) -> list[Target]:
    """Each target as a ratio from this one run (the memory one as limit / measured)."""
    found = []
    c_target = 0.9 if result.counterpart == "upwind" else 1.0
    for f in result.fields:
        for opt, speed in f.generated_c.items():
            if opt in f.handwritten_c:
                found.append(Target(f"generated C / hand-written C, {opt}, {f.field} velocity",
                                    speed / f.handwritten_c[opt], c_target))
            if limited_single_step:
                found.append(Target(f"generated C / streaming sweep, {opt}, {f.field} velocity",
                                    speed / f.sweep[opt], 0.35))
                # The plain copy moves 2 of the step's 3 arrays; shown, not judged.
                found.append(Target(f"generated C / streaming copy, {opt}, {f.field} velocity",
                                    speed / f.stream[opt], 0.35, binding=False))
        if f.handwritten_numpy:
            found.append(Target(f"generated numpy / hand-written numpy, {f.field} velocity",
                                f.generated_numpy / f.handwritten_numpy, 1.0))
    generated = [v for k, v in result.numpy_memory.items() if k.startswith("generated")]
    if generated:
        worst = max(generated)
        found.append(Target(f"numpy peak extra memory {worst:.2f} arrays (limit {MEMORY_LIMIT:g}); "
                            "ratio limit / measured", MEMORY_LIMIT / max(worst, 1e-9), 1.0))
    return found
