"""examples/embed: the tidal-basin host split among MPI processes (tidal_basin_mpi.c,
built with the MPI compiler wrapper) against the serial host, bit for bit, on 2, 3
and 4 processes; and the serial host's stage-by-stage run against the numpy back end
with the same gate halos, an independent second computation."""
from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from conftest import EXAMPLES, require_mpi_or_skip
from test_embed import CELLS, EMBED, run_host, scenario

from fluxloom.compiler import load_scheme
from fluxloom.runtime.decomposed.launch import find_mpiexec
from fluxloom.runtime.decomposed.stages import load_stage_kernel

require_mpi_or_skip()  # the only guard: MPI itself is absent (a failure under CI)


def mpicc() -> str:
    here = os.path.dirname(sys.executable)
    found = shutil.which("mpicc", path=os.pathsep.join([here, os.environ.get("PATH", "")]))
    assert found, "mpicc is required with MPI (the mpich wheel installs it beside mpiexec)"
    return found


@pytest.fixture(scope="module")
def mpi_hosts(tmp_path_factory):
    build = tmp_path_factory.mktemp("embed_mpi")
    done = subprocess.run(["make", "-C", str(EMBED), f"BUILD={build}", f"PYTHON={sys.executable}",
                           f"MPICC={mpicc()}", "mpi"], capture_output=True, text=True)
    assert done.returncode == 0, done.stdout + done.stderr
    return build


def run_mpi_host(path, ranks: int) -> dict:
    done = subprocess.run([find_mpiexec(), "-n", str(ranks), str(path)], capture_output=True,
                          text=True, stdin=subprocess.DEVNULL, timeout=600, check=True)
    return run_host_output(done.stdout)


def run_host_output(text: str) -> dict:
    lines = text.splitlines()
    start = lines.index("profile")
    result = {"scheme": lines[0].split()[1]}
    for line in lines[2:start]:
        key, value = line.split()
        result[key] = float(value)
    result["profile"] = np.array([float(line.split()[1]) for line in lines[start + 1:]])
    return result


@pytest.mark.parametrize("scheme, ranks", [("vanleer_rk3", 2), ("vanleer_rk3", 4), ("lw_fct", 3)])
def test_mpi_host_matches_the_serial_host_bit_for_bit(mpi_hosts, scheme, ranks):
    serial = run_host(mpi_hosts / f"tidal_basin_{scheme}")
    split = run_mpi_host(mpi_hosts / f"tidal_basin_mpi_{scheme}", ranks)
    assert split["scheme"] == serial["scheme"] == scheme and split["ranks"] == ranks
    # printed with 17 significant digits: equal text is equal doubles
    assert np.array_equal(split["profile"], serial["profile"])
    for key in ("mass_initial", "mass_final", "min", "max"):
        assert split[key] == serial[key], key
    assert split["mass_final"] == pytest.approx(split["mass_initial"], rel=1e-13)


def test_serial_runge_kutta_host_matches_the_numpy_back_end(mpi_hosts):
    """Stage by stage with the gates mirrored before every stage, in numpy."""
    got = run_host(mpi_hosts / "tidal_basin_vanleer_rk3")
    kernel = load_stage_kernel(load_scheme(EXAMPLES / "vanleer_rk3.loom"), "numpy")
    h = kernel.halo
    dx, dt, steps, spill, current = scenario(kernel.face_halo)
    assert got["steps"] == steps
    q = np.zeros(CELLS + 2 * h)
    q[h:h + CELLS] = spill
    following, stage_buffers = np.zeros_like(q), [np.zeros_like(q), np.zeros_like(q)]
    work = kernel.workspace(CELLS)
    for s in range(steps):
        u = current(s)
        source = q
        for k in range(kernel.stages):
            target = following if k == kernel.stages - 1 else stage_buffers[k % 2]
            source[:h] = source[2 * h - 1:h - 1:-1]              # mirror at the gates
            source[h + CELLS:] = source[h + CELLS - 1:CELLS - 1:-1]
            kernel.stage(k, CELLS, q, source, target, u, dt / dx, work)
            source = target
        q, following = following, q
    assert np.max(np.abs(got["profile"] - q[h:h + CELLS])) < 1e-12


@pytest.mark.parametrize("scheme, ranks", [("vanleer_rk3", 3), ("lw_fct", 2)])
def test_python_driver_with_walls_matches_the_serial_c_host(mpi_hosts, scheme, ranks):
    """The decomposed driver on a non-periodic axis, gates filled by its edge hook, with
    the C back end: the serial C host's numbers bit for bit."""
    program = Path(__file__).with_name("mpi_basin_program.py")
    done = subprocess.run([find_mpiexec(), "-n", str(ranks), sys.executable, str(program),
                           str(EXAMPLES / f"{scheme}.loom"), "c"], capture_output=True, text=True,
                          stdin=subprocess.DEVNULL, timeout=600)
    assert done.returncode == 0, done.stderr[-3000:]
    got = json.loads(done.stdout.strip().splitlines()[-1])
    serial = run_host(mpi_hosts / f"tidal_basin_{scheme}")
    assert np.array_equal(np.array(got["profile"]), serial["profile"])
