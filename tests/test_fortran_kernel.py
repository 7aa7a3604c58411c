"""The native Fortran kernel target: every example compiles warning-free under
-std=f2008 -Wall -Wextra -Werror and agrees with the C kernel to a few ulps.

The C kernel is the comparison: the agreement tests hold it against the
face-by-face sympy reference (runtime/reference.py), which shares no code with
either emitter. One compile per example and precision: the strict build is the
shared library the comparison loads (cffi's ABI mode over the C header's
declarations, which the Fortran module exports through bind(C)).
"""
from __future__ import annotations

import shutil
import subprocess

import cffi
import numpy as np
import pytest
from conftest import EXAMPLES

from fluxloom.compiler import load_scheme
from fluxloom.compiler.emit.c import c_declarations
from fluxloom.compiler.emit.plan import exported_symbols
from fluxloom.compiler.emit.targets import BACKENDS, target
from fluxloom.runtime.kernel import fill_periodic, load_kernel, periodic_faces

STRICT = ("-std=f2008", "-O2", "-Wall", "-Wextra", "-Werror", "-fPIC", "-shared")
ULPS = 4   # a few units in the last place (the kernels follow the same operations)
EXAMPLE_FILES = sorted(EXAMPLES.glob("*.loom"))


def gfortran() -> str:
    found = shutil.which("gfortran")
    assert found, "gfortran is required (the project's set-up installs it: .ci/install)"
    return found


def strict_library(tmp_path, scheme, precision):
    """The module built with the strict flags into a shared library; (ffi, lib)."""
    (name, text), = target("fortran").files(scheme, precision).items()
    source = tmp_path / f"{precision}_{name}"
    source.write_text(text)
    library = tmp_path / f"{precision}_{scheme.name}.so"
    done = subprocess.run([gfortran(), *STRICT, f"-J{tmp_path}", str(source), "-o",
                           str(library)], capture_output=True, text=True)
    assert done.returncode == 0 and not done.stderr, done.stderr
    ffi = cffi.FFI()
    ffi.cdef(c_declarations(scheme, precision))
    return ffi, ffi.dlopen(str(library))


def ulps_apart(a, b) -> float:
    scale = np.spacing(np.maximum(np.abs(b), np.finfo(b.dtype).tiny))
    return float(np.max(np.abs(a - b) / scale))


def test_the_registry_runs_the_native_fortran_target():
    assert "fortran" in BACKENDS and target("fortran").runs == "shared"


@pytest.mark.slow
@pytest.mark.parametrize("precision", ["double", "float"])
def test_every_example_compiles_strictly_and_agrees_with_the_c_kernel(tmp_path, precision):
    rng = np.random.default_rng(12)
    for path in EXAMPLE_FILES:
        scheme = load_scheme(path)
        c_kernel = load_kernel(scheme, "c", precision)
        ffi, lib = strict_library(tmp_path, scheme, precision)
        dtype, halo, n = c_kernel.dtype, c_kernel.halo, 97
        assert int(getattr(lib, f"{scheme.name}_HALO")) == halo
        q = rng.uniform(-1.0, 2.0, n + 2 * halo).astype(dtype)
        q[halo + 40:halo + 60] = 1.5   # a plateau with fronts for the limiters
        fill_periodic(q, halo)
        u = rng.uniform(-1.0, 1.0, n + 1).astype(dtype)
        u[rng.random(n + 1) < 0.15] = 0.0
        u[-1] = u[0]
        u_face = periodic_faces(u, c_kernel.face_halo)
        ctype = f"{precision}[]"
        symbol = exported_symbols(scheme.name, precision)
        work = np.zeros(max(int(getattr(lib, symbol[f"{scheme.name}_workspace_size"])(n)), 1),
                        dtype)
        by_fortran = q.copy()
        getattr(lib, symbol[f"{scheme.name}_step"])(
            n, ffi.from_buffer(ctype, q), ffi.from_buffer(ctype, by_fortran),
            ffi.from_buffer(ctype, u_face), 0.45, ffi.from_buffer(ctype, work))
        by_c = c_kernel.step(q, u_face, 0.45)
        interior = slice(halo, halo + n)
        assert ulps_apart(by_fortran[interior], by_c[interior]) <= ULPS, scheme.name


def test_the_loaded_fortran_kernel_steps_like_the_c_kernel():
    """load_kernel(scheme, 'fortran') through the registry's loader, several steps."""
    scheme = load_scheme(EXAMPLES / "lw_fct.loom")
    rng = np.random.default_rng(3)
    kernels = [load_kernel(scheme, backend, "double") for backend in ("c", "fortran")]
    halo, n = kernels[0].halo, 50
    u = np.full(n + 1, 0.8)
    u[20:35] = -0.6
    u[-1] = u[0]
    start = rng.uniform(0, 1, n)
    results = []
    for kernel in kernels:
        q = np.zeros(n + 2 * halo)
        q[halo:halo + n] = start
        for _ in range(10):
            fill_periodic(q, halo)
            q = kernel.step(q, u, 0.4)
        results.append(q[halo:halo + n])
    assert ulps_apart(results[1], results[0]) <= ULPS
