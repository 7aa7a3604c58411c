"""OpenMP sweeps, in C and in the native Fortran module: the same bits for every thread
count (no reduction crosses lines), the same bits as the kernel built without OpenMP, and
the same bits in both targets. The reference is the single-threaded build of the same
code (and, through test_sweep_kernels and test_fortran_kernel_sweep, the reference line
sweep, numpy and the C sweep)."""
from __future__ import annotations

import subprocess

import pytest
from conftest import EXAMPLES
from sweep_hosts import python_host

SCRIPT = """
import hashlib, sys
import numpy as np
from fluxloom.compiler import load_scheme
from fluxloom.runtime.kernel import load_kernel
kernel = load_kernel(load_scheme(sys.argv[1]), sys.argv[2], openmp=sys.argv[3] == "1")
rng = np.random.default_rng(4)
h, shape = kernel.halo, (300, 260)
q = rng.random((3,) + tuple(s + 2 * h for s in shape))
digest = hashlib.sha256()
for axis in (0, 1):
    faces = list(shape)
    faces[axis] += 1
    u = rng.standard_normal(faces)
    d = rng.uniform(0.1, 0.4, shape[axis] + 2)
    digest.update(kernel.sweep(q, u, d, axis).tobytes())
    thick = rng.uniform(1, 2, (2,) + q.shape[1:])
    digest.update(kernel.sweep(q, u, d, axis, h_old=thick[0], h_new=thick[1]).tobytes())
print(kernel.threads(), digest.hexdigest())
"""

STAGES_SCRIPT = """
import hashlib, sys
import numpy as np
from fluxloom.compiler import load_scheme
from fluxloom.runtime.boundaries import Edge
from fluxloom.runtime.kernel import load_kernel
kernel = load_kernel(load_scheme(sys.argv[1]), sys.argv[2], openmp=sys.argv[3] == "1")
rng = np.random.default_rng(9)
h, shape = kernel.halo, (70, 60)
q = rng.random((2,) + tuple(s + 2 * h for s in shape))
digest = hashlib.sha256()
for axis in (0, 1):
    faces = list(shape)
    faces[axis] += 1 + 2 * kernel.face_halo
    u = rng.standard_normal(faces)
    for edges in (None, (Edge("wall"), Edge("inflow", 0.4)), (Edge("outflow"), Edge("wall"))):
        digest.update(kernel.sweep(q, u, 0.3, axis, edges=edges).tobytes())
        if kernel.sweep_thickness:
            d = rng.uniform(0.1, 0.3, shape[axis] + 2)
            thick = rng.uniform(1, 2, (2,) + q.shape[1:])
            digest.update(kernel.sweep(q, u, d, axis, h_old=thick[0], h_new=thick[1],
                                       edges=edges).tobytes())
print(kernel.threads(), digest.hexdigest())
"""

RUNS = ((1, True), (2, True), (2, False))
"""(OMP_NUM_THREADS, built with OpenMP): one thread, two threads, no OpenMP."""


def _digests(script: str, stem: str, backend: str) -> list[list[str]]:
    return [python_host(script, (EXAMPLES / f"{stem}.loom", backend, int(openmp)), threads)
            for threads, openmp in RUNS]


def test_openmp_sweeps_are_bit_identical_for_one_and_two_threads():
    digests = set()
    for backend in ("c", "fortran"):
        runs = _digests(SCRIPT, "lw_vanleer", backend)
        assert [used for used, _ in runs] == ["1", "2", "1"]   # the threads were really there
        digests |= {digest for _, digest in runs}
    assert len(digests) == 1                                   # and C gives the same bits


@pytest.mark.parametrize("backend", ["c", "fortran"])
def test_multi_stage_and_fct_sweeps_are_bit_identical_for_one_and_two_threads(backend):
    # lines shared among threads, each with its own line workspace: the same bits as one
    # thread and as the build without OpenMP, with edges and (Runge-Kutta) thicknesses
    for stem in ("vanleer_rk3", "lw_fct"):
        runs = _digests(STAGES_SCRIPT, stem, backend)
        assert [used for used, _ in runs] == ["1", "2", "1"]
        assert runs[0][1] == runs[1][1] == runs[2][1]


def test_build_openmp_writes_a_kernel_that_requires_openmp(tmp_path):
    from fluxloom.runtime.cli import main

    assert main(["build", str(EXAMPLES / "upwind.loom"), "--target", "c", "--openmp",
                 "-o", str(tmp_path)]) == 0
    source = (tmp_path / "upwind.c").read_text()
    assert "#error" in source and "#pragma omp parallel for" in source
    plain = subprocess.run(["gcc", "-std=c99", "-c", "upwind.c", "-o", "plain.o"],
                           cwd=tmp_path, capture_output=True, text=True)
    assert plain.returncode != 0 and "--openmp" in plain.stderr
    subprocess.run(["gcc", "-std=c99", "-fopenmp", "-c", "upwind.c"], cwd=tmp_path, check=True)
