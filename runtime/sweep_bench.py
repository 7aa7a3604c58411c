"""`fluxloom bench FILE --dims 2`: the generated NAME_sweep on a 2-D array, measured.

On an n x n array (4096 by default, the scheme's halo) with a solid-body rotation's face velocities
(every sweep sees both signs): each axis's generated sweep against the hand-written plain
C sweeps of the same scheme (benchmarks/handwritten_sweep.c, only where the scheme is the
van Leer limited Lax-Wendroff scheme) and a 2-D streaming copy of the array; the sweeps
on T threads against one; K tracers in one call against K calls; float against double.
Times are the best of `repeats` runs (wall clock; the machine may be shared, which the
report says). Nothing here is a test: speed is only measured.
"""
from __future__ import annotations

import time
from dataclasses import dataclass
from importlib import resources

import numpy as np

from fluxloom.benchmarks import counterpart
from fluxloom.compiler.ir import Scheme
from fluxloom.compiler.emit.plan import exported_symbol

from . import build

OPT = "-O2"
TARGETS = {"vs_handwritten": 2.0, "vs_copy": 0.35, "threads": 1.6, "tracers": 1.3,
           "float": 1.5}


@dataclass(frozen=True)
class Target:
    what: str
    value: float | None
    target: float

    @property
    def met(self) -> bool | None:
        return None if self.value is None else self.value >= self.target


def _threads_setter():
    """A function setting OpenMP's thread count in this process (the kernel's runtime)."""
    source = "#include <omp.h>\nvoid fluxloom_set_threads(int n) { omp_set_num_threads(n); }\n"
    _, lib = build.compile_source("set_threads", source, "void fluxloom_set_threads(int n);",
                                  f"{OPT} {build.OPENMP_FLAG}")
    return lib.fluxloom_set_threads


def _handwritten():
    folder = resources.files("fluxloom.benchmarks")
    header = folder.joinpath("handwritten_sweep.h").read_text(encoding="utf-8")
    source = folder.joinpath("handwritten_sweep.c").read_text(encoding="utf-8")
    source = source.replace('#include "handwritten_sweep.h"', header, 1)
    declarations = header.replace("#include <stddef.h>\n", "").replace("restrict ", "")
    return build.compile_source("handwritten_sweep", source, declarations,
                                f"{OPT} {build.OPENMP_FLAG}")


def best_seconds(call, repeats: int) -> float:
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        call()
        best = min(best, time.perf_counter() - start)
    return best


def rotation_faces(n: int, dtype) -> tuple[np.ndarray, np.ndarray]:
    """Face velocities of solid-body rotation about the centre, |u| <= 1 (both signs)."""
    centres = (np.arange(n) + 0.5) / n - 0.5
    u_x = np.broadcast_to(-2 * centres[:, None], (n, n + 1)).astype(dtype)    # x: axis 1
    u_y = np.broadcast_to(2 * centres[None, :], (n + 1, n)).astype(dtype)     # y: axis 0
    return np.ascontiguousarray(u_y), np.ascontiguousarray(u_x)


def _with_face_halo(faces: np.ndarray, axis: int, face_halo: int) -> np.ndarray:
    """Faces extended periodically by face_halo per side along `axis` (flux correction)."""
    if not face_halo:
        return faces
    moved = np.moveaxis(faces, axis, -1)
    n = moved.shape[-1] - 1
    left = moved[..., np.arange(-face_halo, 0) % n]
    right = moved[..., np.arange(1, face_halo + 1) % n]
    return np.ascontiguousarray(np.moveaxis(np.concatenate((left, moved, right), -1), -1, axis))


class _Sweeps:
    """The generated sweep of one precision (NAME_sweep_edges with periodic ends and a
    workspace for `threads` threads), called through cffi without argument checks."""

    def __init__(self, scheme: Scheme, precision: str, n: int, tracers: int, threads: int = 1):
        self.ffi, self.lib = build.compile_c(scheme, precision, OPT, openmp=True)
        self.name = scheme.name
        self.dtype = np.float32 if precision == "float" else np.float64
        self.ctype = "float[]" if precision == "float" else "double[]"
        self.n, self.tracers = n, tracers
        self.halo_cells = int(getattr(self.lib, f"{self.name}_HALO"))   # the scheme's own
        extent = n + 2 * self.halo_cells
        rng = np.random.default_rng(0)
        self.q = rng.random((tracers, extent, extent)).astype(self.dtype)
        self.out = np.empty_like(self.q)
        face_halo = int(getattr(self.lib, f"{self.name}_FACE_HALO"))
        self.faces = tuple(_with_face_halo(f, axis, face_halo)   # per axis (0 = y, 1 = x)
                           for axis, f in enumerate(rotation_faces(n, self.dtype)))
        self.dt_dx = np.array([0.5], self.dtype)
        self.shape = self.ffi.new("size_t[]", [n, n])
        self.halo = self.ffi.new("size_t[]", [self.halo_cells, self.halo_cells])
        # one line workspace per thread, so that multi-stage sweeps use every thread too
        line_work = int(getattr(self.lib, exported_symbol(self.name, "sweep_workspace_size",
                                                          precision))(n))
        self.work_reals = line_work * max(threads, 1)
        self.work = np.empty(max(1, self.work_reals), self.dtype)
        self.periodic = int(getattr(self.lib, f"{self.name}_EDGE_PERIODIC"))
        self.sweep = getattr(self.lib, exported_symbol(self.name, "sweep_edges", precision))

    def _ptr(self, array):
        return self.ffi.from_buffer(self.ctype, array)

    def call(self, axis: int, tracers: int | None = None, tracer: int = 0):
        """One sweep of `tracers` tracers (all, by default) starting at tracer `tracer`."""
        count = self.tracers if tracers is None else tracers
        q, out = self.q[tracer:tracer + count], self.out[tracer:tracer + count]
        pointers = (self._ptr(q), self._ptr(out), self._ptr(self.faces[axis]),
                    self._ptr(self.dt_dx), self._ptr(self.work))

        def run():
            status = self.sweep(2, self.shape, self.halo, axis, count, pointers[0], pointers[1],
                                pointers[2], pointers[3], 0, self.ffi.NULL, self.ffi.NULL,
                                self.periodic, self.periodic, self.ffi.NULL, self.ffi.NULL,
                                pointers[4], self.work_reals)
            assert status == 0
        return run


def measure_sweeps(scheme: Scheme, n: int = 4096, threads: int = 2, tracers: int = 10,
                   repeats: int = 3, progress=None) -> dict:
    say = progress or (lambda text: None)
    set_threads = _threads_setter()
    cells = n * n
    found: dict = {"scheme": scheme.name, "n": n, "cells": cells, "threads": threads,
                   "tracers": tracers, "repeats": repeats, "optimisation": OPT,
                   "velocity": "solid-body rotation (both signs in every sweep)",
                   "note": "wall-clock best of the repeats on a machine that may be shared "
                           "with other jobs: the ratios are indicative"}
    say("double precision, one thread")
    double = _Sweeps(scheme, "double", n, max(tracers, 1), threads)
    found["halo"] = double.halo_cells
    set_threads(1)
    seconds = {}
    for axis, label in ((1, "x"), (0, "y")):
        seconds[f"generated_{label}"] = best_seconds(double.call(axis, 1), repeats)
    ffi, lib = _handwritten()
    q, out = double.q[0], double.out[0]
    ptr = lambda a: ffi.from_buffer("double[]", a)    # noqa: E731
    qp, op = ptr(q), ptr(out)
    hand = counterpart(scheme)
    if hand is not None and hand.name == "lw_vanleer":
        say("hand-written sweeps")
        fp = ptr(np.empty(n + 1))
        u_y, u_x = (ptr(f) for f in double.faces)
        seconds["handwritten_x"] = best_seconds(
            lambda: lib.hand_sweep_x(n, n, qp, op, u_x, 0.5, fp), repeats)
        seconds["handwritten_y"] = best_seconds(
            lambda: lib.hand_sweep_y(n, n, qp, op, u_y, 0.5, fp), repeats)
    seconds["copy"] = best_seconds(lambda: lib.stream_copy_2d(q.size, qp, op), repeats)
    # the memory's own scaling, for reading the threads ratio: two reads and a write
    second = ptr(double.q[1] if len(double.q) > 1 else np.ones_like(q))
    seconds["stream_triad"] = best_seconds(
        lambda: lib.stream_triad_2d(q.size, qp, second, op), repeats)
    say(f"{threads} threads")
    set_threads(threads)
    for axis, label in ((1, "x"), (0, "y")):
        seconds[f"threads_{label}"] = best_seconds(double.call(axis, 1), repeats)
    seconds["stream_triad_threads"] = best_seconds(
        lambda: lib.stream_triad_2d(q.size, qp, second, op), repeats)
    set_threads(1)
    say(f"{tracers} tracers in one call and in {tracers} calls")
    for axis, label in ((1, "x"), (0, "y")):
        seconds[f"tracers_one_call_{label}"] = best_seconds(double.call(axis, tracers), repeats)
        calls = [double.call(axis, 1, t) for t in range(tracers)]
        seconds[f"tracers_separate_{label}"] = best_seconds(lambda: [c() for c in calls], repeats)
    del double
    say("float precision, one thread")
    single = _Sweeps(scheme, "float", n, 1)
    for axis, label in ((1, "x"), (0, "y")):
        seconds[f"float_{label}"] = best_seconds(single.call(axis, 1), repeats)
    del single
    found["seconds"] = seconds
    found["cell_updates_per_second"] = {k: cells * (tracers if k.startswith("tracers") else 1) / v
                                        for k, v in seconds.items()
                                        if k != "copy" and not k.startswith("stream_")}
    found["memory_threads"] = seconds["stream_triad"] / seconds["stream_triad_threads"]
    found["targets"] = [t.__dict__ | {"met": t.met} for t in sweep_targets(seconds, threads,
                                                                             tracers)]
    return found


def sweep_targets(seconds: dict, threads: int, tracers: int) -> list[Target]:
    out = []
    for label in ("x", "y"):
        generated = seconds[f"generated_{label}"]
        hand = seconds.get(f"handwritten_{label}")
        out.append(Target(f"{label} sweep: generated vs hand-written plain C (speed-up)",
                          None if hand is None else hand / generated, TARGETS["vs_handwritten"]))
        out.append(Target(f"{label} sweep: generated vs 2-D streaming copy (speed fraction)",
                          seconds["copy"] / generated, TARGETS["vs_copy"]))
        out.append(Target(f"{label} sweep: {threads} threads vs 1",
                          generated / seconds[f"threads_{label}"], TARGETS["threads"]))
        out.append(Target(f"{label} sweep: {tracers} tracers in one call vs {tracers} calls",
                          seconds[f"tracers_separate_{label}"]
                          / seconds[f"tracers_one_call_{label}"], TARGETS["tracers"]))
        out.append(Target(f"{label} sweep: float vs double",
                          generated / seconds[f"float_{label}"], TARGETS["float"]))
    return out


def render_sweeps(found: dict) -> str:
    lines = [f"{found['scheme']}: {found['n']} x {found['n']} array, halo {found['halo']}, {OPT}, "
             f"best of {found['repeats']} runs; {found['velocity']}",
             found["note"], "", "seconds per sweep:"]
    for key, value in found["seconds"].items():
        lines.append(f"  {key:<24} {value:9.4f}")
    lines += ["", "targets (ratio from this run, target):"]
    for t in found["targets"]:
        verdict = {True: "met   ", False: "MISSED", None: "n/a   "}[t["met"]]
        value = "   n/a" if t["value"] is None else f"{t['value']:6.2f}"
        lines.append(f"  {verdict} {value} >= {t['target']:4.2f}  {t['what']}")
    lines += ["", f"for reading the threads ratios: a streaming loop with a sweep's traffic (two "
              f"arrays read, one written) runs {found['memory_threads']:.2f}x as fast on "
              f"{found['threads']} threads as on one here (stream_triad)"]
    return "\n".join(lines) + "\n"
