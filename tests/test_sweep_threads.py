"""OpenMP sweeps: the same bits for every thread count (no reduction crosses lines), and
the same bits as the kernel built without OpenMP. The reference is the single-threaded
build of the same C (and, through test_sweep_kernels, the reference line sweep)."""
from __future__ import annotations

import os
import subprocess
import sys

from conftest import EXAMPLES

SCRIPT = """
import hashlib, sys
import numpy as np
from fluxloom.compiler import load_scheme
from fluxloom.runtime.kernel import load_kernel
kernel = load_kernel(load_scheme(sys.argv[1]), "c", openmp=sys.argv[2] == "1")
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


def _run(threads: int, openmp: bool, stem: str = "lw_vanleer") -> tuple[str, str]:
    env = dict(os.environ, OMP_NUM_THREADS=str(threads))
    done = subprocess.run([sys.executable, "-c", SCRIPT, str(EXAMPLES / f"{stem}.loom"),
                           "1" if openmp else "0"], env=env, capture_output=True, text=True,
                          check=True)
    used, digest = done.stdout.split()
    return used, digest


def test_openmp_sweeps_are_bit_identical_for_one_and_two_threads():
    one, two, plain = _run(1, True), _run(2, True), _run(2, False)
    assert (one[0], two[0], plain[0]) == ("1", "2", "1")   # the threads were really there
    assert one[1] == two[1] == plain[1]


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


STAGES_SCRIPT = """
import hashlib, sys
import numpy as np
from fluxloom.compiler import load_scheme
from fluxloom.runtime.boundaries import Edge
from fluxloom.runtime.kernel import load_kernel
kernel = load_kernel(load_scheme(sys.argv[1]), "c", openmp=sys.argv[2] == "1")
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


def test_multi_stage_and_fct_sweeps_are_bit_identical_for_one_and_two_threads():
    # lines shared among threads, each with its own line workspace: the same bits as one
    # thread and as the build without OpenMP, with edges and (Runge-Kutta) thicknesses
    for stem in ("vanleer_rk3", "lw_fct"):
        runs = []
        for threads, openmp in ((1, True), (2, True), (2, False)):
            env = dict(os.environ, OMP_NUM_THREADS=str(threads))
            done = subprocess.run([sys.executable, "-c", STAGES_SCRIPT,
                                   str(EXAMPLES / f"{stem}.loom"), "1" if openmp else "0"],
                                  env=env, capture_output=True, text=True, check=True)
            runs.append(done.stdout.split())
        assert [used for used, _ in runs] == ["1", "2", "1"]
        assert runs[0][1] == runs[1][1] == runs[2][1]
