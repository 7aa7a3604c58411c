"""The native Fortran target's NAME_sweep: compiled strictly, it agrees with the C sweep on
every example (both precisions, rank 1-3, every axis, several tracers, per-cell dt/dx and
thicknesses where the scheme takes them), and a Fortran host written for the Fortran
interface's sweep runs unchanged on it but for its `use` line.

The C sweep is held against the reference line sweep and numpy elsewhere
(tests/test_sweep_kernels.py); the host program's results are held here against the numpy
back end's sweep, an implementation that shares no code with either compiled one.
"""
from __future__ import annotations

import shutil
import subprocess

import cffi
import numpy as np
import pytest
from conftest import EXAMPLES
from test_sweep_fortran import PROGRAM

from fluxloom.compiler import load_scheme
from fluxloom.compiler.emit.c import c_declarations
from fluxloom.compiler.emit.fortran_kernel import sweep_features
from fluxloom.compiler.emit.plan import exported_symbol, plan_kernel
from fluxloom.compiler.emit.targets import target
from fluxloom.runtime.array_sweep import c_sweep_runner
from fluxloom.runtime.kernel import Kernel, load_kernel

STRICT = ("-std=f2008", "-O2", "-Wall", "-Wextra", "-Werror", "-fPIC", "-shared")
ULPS = 4   # a few units in the last place (the sweeps follow the same operations)
SHAPES = ((13,), (6, 9), (4, 5, 7))


def gfortran() -> str:
    found = shutil.which("gfortran")
    assert found, "gfortran is required (the project's set-up installs it: .ci/install)"
    return found


def strict_sweep_kernel(tmp_path, scheme, precision) -> tuple[Kernel, object, object]:
    """The module built with the strict flags, its sweep loaded as Kernel.sweep; also
    (ffi, lib) for calls that bypass the Python checks."""
    (name, text), = target("fortran").files(scheme, precision).items()
    source = tmp_path / f"{precision}_{name}"
    source.write_text(text)
    assert max(len(line) for line in text.splitlines()) <= 132
    library = tmp_path / f"{precision}_{scheme.name}.so"
    done = subprocess.run([gfortran(), *STRICT, f"-J{tmp_path}", str(source), "-o",
                           str(library)], capture_output=True, text=True)
    assert done.returncode == 0 and not done.stderr, done.stderr
    ffi = cffi.FFI()
    ffi.cdef(c_declarations(scheme, precision))
    lib = ffi.dlopen(str(library))
    c_kernel = load_kernel(scheme, "c", precision)
    kernel = Kernel(scheme.name, "fortran", precision, c_kernel.halo, c_kernel.face_halo,
                    c_kernel.stages, None, None,
                    c_sweep_runner(ffi, lib, scheme.name, precision, edges=False),
                    *sweep_features(plan_kernel(scheme)))
    return kernel, ffi, lib


def ulps_apart(a, b) -> float:
    scale = np.spacing(np.maximum(np.abs(b), np.finfo(b.dtype).tiny))
    return float(np.max(np.abs(a - b) / scale))


def compare_sweeps(fortran: Kernel, c_kernel: Kernel, rng) -> None:
    dtype, halo = c_kernel.dtype, c_kernel.halo
    for shape in SHAPES:
        for axis in range(len(shape)):
            halos = tuple(halo + (d % 2) for d in range(len(shape)))   # wider than needed
            extents = tuple(n + 2 * h for n, h in zip(shape, halos))
            q = rng.uniform(-1.0, 2.0, (2,) + extents).astype(dtype)   # two tracers
            faces = list(shape)
            faces[axis] += 1
            u = rng.uniform(-1.0, 1.0, faces).astype(dtype)
            u[rng.random(faces) < 0.15] = 0.0
            runs = [dict(dt_dx=0.45)]
            if fortran.sweep_widths:
                runs.append(dict(dt_dx=rng.uniform(0.2, 0.5, shape[axis] + 2).astype(dtype)))
            if fortran.sweep_thickness:
                h_old = rng.uniform(0.5, 1.5, extents).astype(dtype)
                runs.append(dict(dt_dx=runs[-1]["dt_dx"], h_old=h_old,
                                 h_new=(h_old * rng.uniform(0.9, 1.1, extents)).astype(dtype)))
            for args in runs:
                by_fortran = fortran.sweep(q, u, axis=axis, halo=halos, **args)
                by_c = c_kernel.sweep(q, u, axis=axis, halo=halos, **args)
                assert ulps_apart(by_fortran, by_c) <= ULPS, (shape, axis, sorted(args))


@pytest.mark.slow
@pytest.mark.parametrize("precision", ["double", "float"])
def test_every_example_sweeps_like_the_c_kernel(tmp_path, precision):
    rng = np.random.default_rng(21)
    for path in sorted(EXAMPLES.glob("*.loom")):
        scheme = load_scheme(path)
        fortran, _, _ = strict_sweep_kernel(tmp_path, scheme, precision)
        compare_sweeps(fortran, load_kernel(scheme, "c", precision), rng)


@pytest.mark.parametrize("stem", ["lw_vanleer", "kappa_rk3", "lw_fct"])
def test_the_loaded_fortran_target_sweeps_like_the_c_kernel(stem):
    """load_kernel(scheme, 'fortran') through the registry's loader: one single-stage, one
    multi-stage and one flux-corrected scheme (the sweep's three paths)."""
    scheme = load_scheme(EXAMPLES / f"{stem}.loom")
    compare_sweeps(load_kernel(scheme, "fortran"), load_kernel(scheme, "c"),
                   np.random.default_rng(5))


@pytest.mark.parametrize("stem, per_cell, thickness, status", [
    ("lw_vanleer", 1, True, 0),
    ("kappa_rk3", 1, False, 0),
    ("kappa_rk3", 0, True, 2),   # thicknesses need a single-stage scheme
    ("lw_fct", 1, False, 2),     # per-cell dt/dx needs a scheme without flux correction
])
def test_the_fortran_sweep_refuses_what_the_c_sweep_refuses(tmp_path, stem, per_cell,
                                                            thickness, status):
    scheme = load_scheme(EXAMPLES / f"{stem}.loom")
    _, ffi, lib = strict_sweep_kernel(tmp_path, scheme, "double")
    halo, n = int(getattr(lib, f"{scheme.name}_HALO")), 6
    face_halo = int(getattr(lib, f"{scheme.name}_FACE_HALO"))
    q = np.ones(n + 2 * halo)
    out = np.zeros_like(q)
    u = np.full(n + 1 + 2 * face_halo, 0.5)
    dt_dx = np.full(n + 2, 0.3)
    h = np.ones_like(q)
    work = np.zeros(max(int(getattr(lib, exported_symbol(scheme.name, "sweep_workspace_size",
                                                          "double"))(n)), 1))
    sweep = getattr(lib, exported_symbol(scheme.name, "sweep", "double"))
    buf = lambda a: ffi.from_buffer("double[]", a)   # noqa: E731
    thick = (buf(h), buf(h)) if thickness else (ffi.NULL, ffi.NULL)
    args = (buf(q), buf(out), buf(u), buf(dt_dx), per_cell, *thick, buf(work))
    shape, halos = ffi.new("size_t[]", [n]), ffi.new("size_t[]", [halo])
    assert sweep(1, shape, halos, 0, 1, *args) == status
    if status == 0:   # a constant stays constant under a uniform velocity
        np.testing.assert_allclose(out[halo:halo + n], 1.0, rtol=0, atol=1e-15)
    assert sweep(4, shape, halos, 0, 1, *args) == 1          # rank out of range
    assert sweep(1, shape, halos, 1, 1, *args) == 1          # axis out of range
    if halo:
        assert sweep(1, shape, ffi.new("size_t[]", [halo - 1]), 0, 1, *args) == 1


def test_a_host_written_for_the_interface_runs_on_the_native_module(tmp_path):
    """The interface test's host program with only its `use` line changed: no C compiler,
    and the same numbers as the numpy back end's sweep."""
    scheme = load_scheme(EXAMPLES / "lw_vanleer.loom")
    (name, text), = target("fortran").files(scheme, "double").items()
    (tmp_path / name).write_text(text)
    assert "use lw_vanleer_mod\n" in PROGRAM
    (tmp_path / "main.f90").write_text(PROGRAM.replace("use lw_vanleer_mod\n",
                                                       "use lw_vanleer_kernel\n"))
    subprocess.run([gfortran(), "-std=f2008", "-O2", name, "main.f90", "-o", "check"],
                   cwd=tmp_path, check=True, capture_output=True, text=True)
    lines = subprocess.run([str(tmp_path / "check")], check=True, capture_output=True,
                           text=True).stdout.split()
    nx, ny, h = 7, 5, 2
    i = np.arange(1 - h, nx + h + 1)[None, :]
    j = np.arange(1 - h, ny + h + 1)[:, None]
    q = np.sin(0.7 * i) + np.cos(1.3 * j) + 0.01 * i * j            # q[j, i]: C order
    ux = np.cos(0.9 * np.arange(0, nx + 1)[None, :] - 0.4 * np.arange(1, ny + 1)[:, None])
    uy = np.sin(0.5 * np.arange(1, nx + 1)[None, :] + 0.8 * np.arange(0, ny + 1)[:, None])
    dx = 0.2 + 0.01 * np.arange(0, nx + 2)
    kernel = load_kernel(scheme, "numpy")
    want_x = kernel.sweep(q, ux, dx, 1)[h:h + ny, h:h + nx]
    want_y = kernel.sweep(q, uy, 0.3, 0)[h:h + ny, h:h + nx]
    assert lines[0] == "0" and lines[1 + nx * ny] == "0"
    got_x = np.array(lines[1:1 + nx * ny], float).reshape(ny, nx)
    got_y = np.array(lines[2 + nx * ny:], float).reshape(ny, nx)
    np.testing.assert_allclose(got_x, want_x, rtol=1e-15, atol=1e-15)
    np.testing.assert_allclose(got_y, want_y, rtol=1e-15, atol=1e-15)
