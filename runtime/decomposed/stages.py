"""A kernel's stage entry point (`NAME_stage`), for either back end.

A host with its own halo exchange calls the kernel stage by stage and refreshes
the halo of each stage's output in between; `StageKernel.stage` is that call for
the generated numpy module and the compiled C kernel alike.

The kernel travels as its generated source (`kernel_sources`, plain JSON): the
ranks of a decomposed run load it from there without generating it again (the
numpy module is executed, the C unit found in the build cache by its hash).
Arguments are checked by the driver that owns the arrays, not here: this sits
in its innermost loop.
"""
from __future__ import annotations

import types
from dataclasses import dataclass
from typing import Callable

import numpy as np

BACKENDS = ("numpy", "c")
DTYPES = {"double": np.dtype(np.float64), "float": np.dtype(np.float32)}
C_TYPES = {"double": "double[]", "float": "float[]"}
# (as in runtime/kernel.py, which the ranks' program does not import: it loads the compiler)


@dataclass(frozen=True)
class StageKernel:
    name: str
    backend: str
    precision: str
    halo: int          # ghost cells per side of every q array
    face_halo: int     # face velocities per side beyond the n + 1 interior faces
    stages: int
    workspace_size: Callable[[int], int]
    run_stage: Callable  # (stage, n, q_start, q_stage, q_out, u_face, dt_dx, work)
    run_lines: Callable | None = None  # stage on many lines at once, see `stage_lines`
    line_axis: int = 0   # the axis along the line in run_lines' arrays (numpy 0, C -1)
    sweeper: object = None  # the same kernel as a runtime.kernel.Kernel (its `sweep`)

    @property
    def dtype(self) -> np.dtype:
        return DTYPES[self.precision]

    def workspace(self, n: int) -> np.ndarray:
        """Workspace for stages of n cells (at least one value, so it can be passed)."""
        return np.zeros(max(int(self.workspace_size(int(n))), 1), self.dtype)

    def stage(self, stage: int, n: int, q_start, q_stage, q_out, u_face, dt_dx: float,
              work) -> None:
        self.run_stage(stage, n, q_start, q_stage, q_out, u_face, dt_dx, work)

    def stage_lines(self, stage: int, n: int, q_start, q_stage, q_out, u_face, dt_dx: float,
                    work, rows=None) -> None:
        """`stage` on many lines: the arrays hold one line per entry of their other axes,
        the line along `line_axis` (numpy: axis 0, any views; C: the last axis of
        C-contiguous arrays, one row per line). work holds one workspace per line, laid
        out the same way; it must persist from stage 0 to the last. C only: `rows`
        picks line k of the q arrays as their row rows[k] (the arrays' last axis is the
        line), so lines along the contiguous axis need no copy; u_face and work keep
        one row per line."""
        self.run_lines(stage, n, q_start, q_stage, q_out, u_face, dt_dx, work, rows)


def kernel_sources(scheme, backend: str = "numpy", precision: str = "double",
                   opt: str | None = None) -> dict:
    """What a process needs to load scheme's kernel without generating it: JSON-able."""
    from ..kernel import KernelError

    if backend not in BACKENDS:
        raise KernelError(f"unknown back end '{backend}'; choose one of {', '.join(BACKENDS)}")
    if precision not in DTYPES:
        raise KernelError(f"unknown precision '{precision}'; choose double or float")
    found = {"name": scheme.name, "backend": backend, "precision": precision,
             "fingerprint": scheme.fingerprint}
    if backend == "numpy":
        from fluxloom.compiler.emit.numpy_ import numpy_source

        return {**found, "source": numpy_source(scheme, precision)}
    from fluxloom.compiler.emit.c import c_declarations, c_sources

    files = c_sources(scheme, precision)
    header, kernel = files[f"{scheme.name}.h"], files[f"{scheme.name}.c"]
    # one translation unit, the header text standing in for its #include (as compile_c does)
    unit = kernel.replace(f'#include "{scheme.name}.h"', header, 1)
    return {**found, "source": unit, "declarations": c_declarations(scheme, precision),
            "opt": opt or "-O2"}


def stage_kernel(sources: dict) -> StageKernel:
    """The stage entry point of the kernel `kernel_sources` described."""
    name, precision = sources["name"], sources["precision"]
    if sources["backend"] == "numpy":
        module = types.ModuleType(f"fluxloom_stages_{name}_{precision}")
        filename = f"<fluxloom {name} {precision} {sources['fingerprint']}>"
        exec(compile(sources["source"], filename, "exec"), module.__dict__)
        real = DTYPES[precision].type

        def run_stage(stage, n, q_start, q_stage, q_out, u_face, dt_dx, work):
            module.stage(stage, n, q_start, q_stage, q_out, u_face, real(dt_dx), work)

        def run_lines(stage, n, q_start, q_stage, q_out, u_face, dt_dx, work, rows=None):
            module.stage(stage, n, q_start, q_stage, q_out, u_face, real(dt_dx), work)

        # the generated stage slices along axis 0 only, so it runs every line at once
        return StageKernel(name, "numpy", precision, module.HALO, module.FACE_HALO,
                           module.STAGES, module.workspace_size, run_stage, run_lines, 0,
                           _sweeper(name, precision, module, None))

    from ..build import compile_source

    ffi, lib = compile_source(name, sources["source"], sources["declarations"], sources["opt"])
    from fluxloom.compiler.emit.plan import exported_symbol

    c_stage = getattr(lib, exported_symbol(name, "stage", precision))
    ctype = C_TYPES[precision]

    def run_c_stage(stage, n, q_start, q_stage, q_out, u_face, dt_dx, work):
        c_stage(stage, n, ffi.from_buffer(ctype, q_start), ffi.from_buffer(ctype, q_stage),
                ffi.from_buffer(ctype, q_out, require_writable=True),
                ffi.from_buffer(ctype, u_face), dt_dx,
                ffi.from_buffer(ctype, work, require_writable=True))

    def run_c_lines(stage, n, q_start, q_stage, q_out, u_face, dt_dx, work, rows=None):
        # one buffer per array, then a pointer per row: no per-line conversions
        start, current = ffi.from_buffer(ctype, q_start), ffi.from_buffer(ctype, q_stage)
        out = ffi.from_buffer(ctype, q_out, require_writable=True)
        faces = ffi.from_buffer(ctype, u_face)
        registers = ffi.from_buffer(ctype, work, require_writable=True)
        size, face_size, work_size = q_start.shape[-1], u_face.shape[-1], work.shape[-1]
        lines = range(len(u_face)) if rows is None else rows
        for line, row in enumerate(lines):
            at = int(row) * size
            c_stage(stage, n, start + at, current + at, out + at, faces + line * face_size,
                    dt_dx, registers + line * work_size)

    return StageKernel(name, "c", precision, int(getattr(lib, f"{name}_HALO")),
                       int(getattr(lib, f"{name}_FACE_HALO")), int(getattr(lib, f"{name}_STAGES")),
                       getattr(lib, exported_symbol(name, "workspace_size", precision)),
                       run_c_stage, run_c_lines, -1, _sweeper(name, precision, None, (ffi, lib)))


def _sweeper(name: str, precision: str, module, built):
    """The kernel as a runtime.kernel.Kernel, for its generated sweep (`Kernel.sweep`, the
    argument checks of runtime/array_sweep.py) over the same module or library."""
    from ..kernel import Kernel

    if module is not None:
        return Kernel(name, "numpy", precision, module.HALO, module.FACE_HALO, module.STAGES,
                      module.workspace_size, module.step, module.sweep, module.SWEEP_WIDTHS,
                      module.SWEEP_THICKNESS)
    from fluxloom.compiler.emit.plan import exported_symbol

    from ..array_sweep import c_sweep_runner

    ffi, lib = built
    ctype = C_TYPES[precision]
    c_step = getattr(lib, exported_symbol(name, "step", precision))

    def run_step(n, q, out, u_face, dt_dx, work):
        c_step(n, ffi.from_buffer(ctype, q), ffi.from_buffer(ctype, out, require_writable=True),
               ffi.from_buffer(ctype, u_face), dt_dx,
               ffi.NULL if work is None else ffi.from_buffer(ctype, work, require_writable=True))

    return Kernel(name, "c", precision, int(getattr(lib, f"{name}_HALO")),
                  int(getattr(lib, f"{name}_FACE_HALO")), int(getattr(lib, f"{name}_STAGES")),
                  getattr(lib, exported_symbol(name, "workspace_size", precision)), run_step,
                  c_sweep_runner(ffi, lib, name, precision),
                  bool(getattr(lib, f"{name}_SWEEP_WIDTHS")),
                  bool(getattr(lib, f"{name}_SWEEP_THICKNESS")))


def load_stage_kernel(scheme, backend: str = "numpy", precision: str = "double",
                      opt: str | None = None) -> StageKernel:
    """The stage entry point of scheme's kernel (generated, and for C compiled, once)."""
    return stage_kernel(kernel_sources(scheme, backend, precision, opt))
