"""examples/embed: host programs of our own (a spill in a closed tidal basin) that
embed generated kernels from C and from Fortran through the generated bind(C)
module, checked against independent computations."""
from __future__ import annotations

import shutil
import subprocess
import sys

import numpy as np
import pytest
from conftest import EXAMPLES, ROOT

from fluxloom.compiler import load_scheme
from fluxloom.runtime.kernel import load_kernel

EMBED = ROOT / "examples" / "embed"

# The scenario of tidal_basin.c / tidal_basin.f90 (scenario of our own).
CELLS, LENGTH, PEAK, TIDE, COURANT = 200, 10000.0, 0.8, 44712.0, 0.9


def need(tool: str) -> str:
    """A tool the embedding needs; missing is a failure, not a skip (.ci/install sets it up)."""
    found = shutil.which(tool)
    assert found, f"{tool} is required for the embedding example (see .ci/install)"
    return found


@pytest.fixture(scope="module")
def hosts(tmp_path_factory):
    build = tmp_path_factory.mktemp("embed")
    for tool in ("make", "gcc", "gfortran"):
        need(tool)
    done = subprocess.run(["make", "-C", str(EMBED), f"BUILD={build}", f"PYTHON={sys.executable}"],
                          capture_output=True, text=True)
    assert done.returncode == 0, done.stdout + done.stderr
    return build


def run_host(path) -> dict:
    out = subprocess.run([str(path)], capture_output=True, text=True, check=True).stdout
    lines = out.splitlines()
    start = lines.index("profile")
    result = {"scheme": lines[0].split()[1]}
    head = lines[1].split()
    result["steps"] = int(head[head.index("steps") + 1])
    for line in lines[2:start]:
        key, value = line.split()
        result[key] = float(value)
    result["profile"] = np.array([float(line.split()[1]) for line in lines[start + 1:]])
    return result


def scenario(face_halo: int = 0):
    """Grid, time step, initial spill and the face velocities of every step."""
    dx = LENGTH / CELLS
    dt = COURANT * dx / PEAK
    steps = int(TIDE / dt + 0.5)
    x = (np.arange(CELLS) + 0.5) * dx
    spill = ((x >= 3000.0) & (x < 4000.0)).astype(float)
    faces = np.arange(-face_halo, CELLS + face_halo + 1)

    def current(s):
        t = (s + 0.5) * dt
        u = PEAK * np.sin(np.pi * faces * dx / LENGTH) * np.cos(2.0 * np.pi * t / TIDE)
        u[(faces <= 0) | (faces >= CELLS)] = 0.0  # sluice gates: closed ends
        return u

    return dx, dt, steps, spill, current


def test_c_host_with_upwind_matches_a_plain_numpy_upwind(hosts):
    """First-order upwind written directly in numpy (flux = max(u,0) q_left + min(u,0)
    q_right; common practice, no source) gives the C host's profile."""
    got = run_host(hosts / "tidal_basin_upwind")
    dx, dt, steps, q, current = scenario()
    assert got["steps"] == steps
    for s in range(steps):
        u = current(s)
        padded = np.concatenate(([q[0]], q, [q[-1]]))  # mirrored ghosts at the gates
        flux = np.maximum(u, 0) * padded[:-1] + np.minimum(u, 0) * padded[1:]
        q = q - dt / dx * (flux[1:] - flux[:-1])
    assert np.max(np.abs(got["profile"] - q)) < 1e-12
    # Closed basin: the mass stays to round-off (faces telescope; the gates carry no flux).
    assert got["mass_final"] == pytest.approx(got["mass_initial"], rel=1e-13)
    assert got["mass_initial"] == pytest.approx(1000.0)  # 1 kg/m^3 over 1 km


def test_c_host_with_a_limiter_matches_the_numpy_back_end(hosts):
    got = run_host(hosts / "tidal_basin_tidewater")
    kernel = load_kernel(load_scheme(EXAMPLES / "tidewater.loom"), "numpy")
    h = kernel.halo
    dx, dt, steps, spill, current = scenario(kernel.face_halo)
    q = np.zeros(CELLS + 2 * h)
    q[h:h + CELLS] = spill
    for s in range(steps):
        q[:h] = q[2 * h - 1:h - 1:-1]                 # mirror at the gates
        q[h + CELLS:] = q[h + CELLS - 1:CELLS - 1:-1]
        q = kernel.step(q, current(s), dt / dx)
    assert np.max(np.abs(got["profile"] - q[h:h + CELLS])) < 1e-12
    assert got["mass_final"] == pytest.approx(got["mass_initial"], rel=1e-13)
    # The limited scheme keeps the plume sharper than upwind does.
    upwind = run_host(hosts / "tidal_basin_upwind")
    assert got["max"] > upwind["max"] + 0.2


def test_fortran_host_agrees_with_the_c_host(hosts):
    fortran = run_host(hosts / "tidal_basin_f")
    c = run_host(hosts / "tidal_basin_tidewater")
    assert fortran["scheme"] == c["scheme"] == "tidewater"
    assert fortran["steps"] == c["steps"]
    assert np.max(np.abs(fortran["profile"] - c["profile"])) < 1e-13
    assert fortran["mass_final"] == pytest.approx(fortran["mass_initial"], rel=1e-13)


def test_native_fortran_host_agrees_with_the_c_host(hosts):
    """The host built with gfortran alone (native Fortran kernel) against the C host."""
    native = run_host(hosts / "tidal_basin_native")
    c = run_host(hosts / "tidal_basin_tidewater")
    assert native["scheme"] == c["scheme"] == "tidewater"
    assert native["steps"] == c["steps"]
    assert np.max(np.abs(native["profile"] - c["profile"])) < 1e-13
    assert native["mass_final"] == pytest.approx(native["mass_initial"], rel=1e-13)
