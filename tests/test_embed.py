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
from fluxloom.runtime.boundaries import Edge
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


# ---- the 2-D basin (tidal_basin_2d.c / .f90): walls, an open mouth, three tracers ----------

def run_basin_2d(path, steps=None) -> dict:
    args = [str(path)] + ([str(steps)] if steps is not None else [])
    lines = subprocess.run(args, capture_output=True, text=True, check=True).stdout.splitlines()
    start = lines.index("field")
    result = {"scheme": lines[0].split()[1], "steps": int(lines[1].split()[4])}
    for line in lines[2:start]:
        key, value = line.split()
        result[key] = float(value)
    field = np.zeros((3, 80, 20))
    for line in lines[start + 1:]:
        t, i, j, value = line.split()
        field[int(t), int(i), int(j)] = float(value)
    result["field"] = field
    return result


def basin_2d_reference(steps: int, stem: str = "tidewater") -> np.ndarray:
    """The 2-D host's model rebuilt in numpy around the numpy back end's sweep, with its own
    ghost cells written by slicing (mirror at the walls, the sea's values where the mouth
    flows in, the edge cell where it flows out) and per-cell dt/dx on the stretched grid:
    the same Strang steps; the sweeps are told the edges (walls; along x the lines that
    flow in at the mouth swept together with the sea's values, those that flow out
    together with an outflow), which a multi-stage scheme needs at every stage. Returns
    the fields as (tracer, x, y)."""
    kernel = load_kernel(load_scheme(EXAMPLES / f"{stem}.loom"), "numpy")
    h = kernel.halo
    nx, ny, length, width, tide, stretch = 80, 20, 20000.0, 5000.0, 44712.0, 0.6
    sea = np.array([35.0, 0.0, 1.0])
    s = np.arange(nx + 1) / nx
    xf = length * (s - stretch * np.sin(np.pi * s) / np.pi)
    dx, dy = np.diff(xf), width / ny
    dt = tide / 400
    y = np.arange(ny + 1) * dy

    def psi(x, yy, t):
        head = 1.0 - x / length
        return (0.6 * width / np.pi * np.cos(2 * np.pi * t / tide) * head * head
                * np.sin(np.pi * yy / width)
                + 0.15 * width / np.pi * np.sin(np.pi * x / length) * np.sin(2 * np.pi * yy / width))

    q = np.zeros((3, ny + 2 * h, nx + 2 * h))        # (tracer, y, x) as in the C host
    xc, yc = 0.5 * (xf[:-1] + xf[1:]), (np.arange(ny) + 0.5) * dy
    spill = (xc >= 8000) & (xc < 10000) & (yc[:, None] >= 1500) & (yc[:, None] < 3500)
    q[0, h:-h, h:-h], q[1, h:-h, h:-h], q[2, h:-h, h:-h] = 20.0, spill * 1.0, 5.0
    widths = dx[np.clip(np.arange(-1, nx + 1), 0, nx - 1)]     # cells -1 .. nx
    for step in range(steps):
        t = (step + 0.5) * dt
        u = (psi(xf[None, :], y[1:, None], t) - psi(xf[None, :], y[:-1, None], t)) / dy
        v = -(psi(xf[None, 1:], y[:, None], t) - psi(xf[None, :-1], y[:, None], t)) / dx
        u[:, -1] = 0.0                       # the head
        v[0, :] = v[-1, :] = 0.0             # the shores
        for axis, fraction in ((1, 0.5), (0, 1.0), (1, 0.5)):
            if axis == 1:
                inflow = u[:, 0] >= 0
                q[:, h:h + ny, :h] = np.where(inflow[None, :, None], sea[:, None, None],
                                              q[:, h:h + ny, h:h + 1])
                q[:, :, h + nx:] = q[:, :, h + nx - 1:nx - 1:-1][:, :, :h]
                swept = q.copy()
                for flowing_in in (True, False):
                    rows = np.flatnonzero(inflow == flowing_in)
                    mouth = Edge("inflow", sea[:, None, None]) if flowing_in else Edge("outflow")
                    lines = np.ascontiguousarray(q[:, h + rows, :])
                    done = kernel.sweep(lines, np.ascontiguousarray(u[rows]),
                                        fraction * dt / widths, 1, halo=(0, h),
                                        edges=(mouth, Edge("wall")))
                    swept[:, h + rows, :] = done
                q = swept
            else:
                q[:, :h, :] = q[:, 2 * h - 1:h - 1:-1, :]
                q[:, h + ny:, :] = q[:, h + ny - 1:ny - 1:-1, :][:, :h, :]
                q = kernel.sweep(q, v, fraction * dt / dy, 0, halo=h,
                                 edges=(Edge("wall"), Edge("wall")))
    return np.transpose(q[:, h:-h, h:-h], (0, 2, 1))


def test_2d_basin_c_host_matches_a_numpy_rebuild(hosts):
    steps = 12
    got = run_basin_2d(hosts / "tidal_basin_2d", steps)
    assert got["scheme"] == "tidewater" and got["steps"] == steps
    assert np.max(np.abs(got["field"] - basin_2d_reference(steps))) < 1e-12


def test_2d_basin_c_host_with_ssp_rk3_matches_a_numpy_rebuild(hosts):
    # a multi-stage kernel: the walls, the inflow and the outflow hold at every stage
    # (the sweeps fill them), so the host and the rebuild agree; conservation of what
    # stays inside is the rebuild's business, agreement to round-off is the claim here
    steps = 12
    got = run_basin_2d(hosts / "tidal_basin_2d_rk3", steps)
    assert got["scheme"] == "vanleer_rk3" and got["steps"] == steps
    assert np.max(np.abs(got["field"] - basin_2d_reference(steps, "vanleer_rk3"))) < 1e-12


@pytest.mark.parametrize("fortran_host", ["tidal_basin_2d_f", "tidal_basin_2d_native"])
def test_2d_basin_fortran_host_agrees_with_the_c_host(hosts, fortran_host):
    # tidal_basin_2d_f through tidewater_mod; tidal_basin_2d_native the same program with
    # only its use line switched to the native kernel module (gfortran alone)
    c = run_basin_2d(hosts / "tidal_basin_2d")
    fortran = run_basin_2d(hosts / fortran_host)
    assert c["steps"] == fortran["steps"] == 400
    assert np.max(np.abs(c["field"] - fortran["field"])) < 1e-12
    for t in range(3):
        assert fortran[f"mass{t}_final"] == pytest.approx(c[f"mass{t}_final"], rel=1e-13)
    # The sea's salinity comes in at the mouth; split sweeps of a varying flow may leave
    # the range slightly (measured 0.055 at most), never by much.
    assert 19.5 < c["min0"] and c["max0"] < 35.5 and c["mass0_final"] > c["mass0_initial"]


def test_native_fortran_host_agrees_with_the_c_host(hosts):
    """The host built with gfortran alone (native Fortran kernel) against the C host."""
    native = run_host(hosts / "tidal_basin_native")
    c = run_host(hosts / "tidal_basin_tidewater")
    assert native["scheme"] == c["scheme"] == "tidewater"
    assert native["steps"] == c["steps"]
    assert np.max(np.abs(native["profile"] - c["profile"])) < 1e-13
    assert native["mass_final"] == pytest.approx(native["mass_initial"], rel=1e-13)
