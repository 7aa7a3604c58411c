"""Runtime of split schemes: the splitting helpers, the reference line sweep, the 2-D flows,
fields and cases, each held against an independent computation (a hand loop over lines,
analytic velocities, numpy quadrature, solid-body rotation of a centroid)."""
from __future__ import annotations

import itertools
import math
from pathlib import Path

import numpy as np
import pytest

from fluxloom.compiler import load_scheme
from fluxloom.runtime.kernel import KernelError, fill_periodic, load_kernel
from fluxloom.runtime.multidim.cases import CASES, run_case, step_count
from fluxloom.runtime.multidim.fields import HUMP, SLOTTED_CYLINDER
from fluxloom.runtime.multidim.flows import ROTATION, SWIRL, divergence
from fluxloom.runtime.splitting import (advance, alternating_step, lie_step, split_step,
                                        strang_step)
from fluxloom.runtime.sweeps import BoundSweep, LineSweep, periodic_fill

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"


def _recorder():
    seen = []

    def sweep(axis, q, fraction):
        seen.append((axis, fraction))
        return q
    return seen, sweep


def test_sweep_orders():
    # Lie: x then y every step; alternating Lie: x y, then y x; Strang: x/2, y, x/2 and in
    # 3-D x/2, y/2, z, y/2, x/2 (Strang 1968, SIAM J. Numer. Anal. 5:506, from memory;
    # common practice).
    q2, q3 = np.zeros((2, 2)), np.zeros((2, 2, 2))
    seen, sweep = _recorder()
    lie_step(sweep, q2)
    assert seen == [(0, 1.0), (1, 1.0)]
    seen, sweep = _recorder()
    alternating_step(sweep, q2, 0)
    alternating_step(sweep, q2, 1)
    assert seen == [(0, 1.0), (1, 1.0), (1, 1.0), (0, 1.0)]
    seen, sweep = _recorder()
    strang_step(sweep, q2)
    assert seen == [(0, 0.5), (1, 1.0), (0, 0.5)]
    seen, sweep = _recorder()
    strang_step(sweep, q3)
    assert seen == [(0, 0.5), (1, 0.5), (2, 1.0), (1, 0.5), (0, 0.5)]
    seen, sweep = _recorder()
    advance(sweep, q3, "alternating", 2)
    assert seen == [(0, 1.0), (1, 1.0), (2, 1.0), (2, 1.0), (1, 1.0), (0, 1.0)]


def _hand_sweep(kernel, q, axis, u_face, dt_dx):
    """Each line copied out, halos filled periodically, the kernel's step, copied back."""
    h = kernel.halo
    out = q.copy()
    others = [range(n) if a != axis else [slice(None)] for a, n in enumerate(q.shape)]
    for index in itertools.product(*others):
        line = np.zeros(q.shape[axis] + 2 * h, kernel.dtype)
        line[h:-h] = q[index]
        fill_periodic(line, h)
        out[index] = kernel.step(line, np.ascontiguousarray(u_face[index]), dt_dx)[h:-h]
    return out


@pytest.mark.parametrize("stem", ["lw_vanleer", "vanleer_rk3", "lw_fct"])
def test_line_sweep_matches_a_hand_loop_bit_for_bit(stem):
    kernel = load_kernel(load_scheme(EXAMPLES / f"{stem}.loom"), "numpy")
    rng = np.random.default_rng(2)
    for shape in [(7, 9), (5, 6, 4)]:
        q = rng.random(shape)
        for axis in range(len(shape)):
            faces_shape = list(shape)
            faces_shape[axis] += 1
            u = rng.uniform(-1, 1, faces_shape)
            index = [slice(None)] * len(shape)
            index[axis] = -1
            first = list(index)
            first[axis] = 0
            u[tuple(index)] = u[tuple(first)]        # periodic: face n is face 0
            got = LineSweep(kernel)(axis, q, u, 0.4)
            assert np.array_equal(got, _hand_sweep(kernel, q, axis, u, 0.4))


def test_line_sweep_c_and_numpy_agree_to_round_off():
    scheme = load_scheme(EXAMPLES / "kappa_rk3.loom")
    rng = np.random.default_rng(4)
    q = rng.random((10, 12))
    faces = [rng.uniform(-1, 1, (11, 12)), rng.uniform(-1, 1, (10, 13))]
    faces[0][-1], faces[1][:, -1] = faces[0][0], faces[1][:, 0]
    results = []
    for backend in ("numpy", "c"):
        sweep = BoundSweep(LineSweep(load_kernel(scheme, backend)), faces, (0.5, 0.5))
        results.append(split_step(sweep, q, "strang"))
    assert np.max(np.abs(results[0] - results[1])) < 1e-13


def test_line_sweep_refuses_bad_arguments():
    kernel = load_kernel(load_scheme(EXAMPLES / "upwind.loom"), "numpy")
    sweep = LineSweep(kernel)
    q = np.zeros((4, 5))
    with pytest.raises(KernelError, match="axis 2"):
        sweep(2, q, np.zeros((4, 6)), 0.5)
    with pytest.raises(KernelError, match="shape"):
        sweep(1, q, np.zeros((4, 5)), 0.5)
    with pytest.raises(KernelError, match="dtype"):
        sweep(0, q.astype(np.float32), np.zeros((5, 5)), 0.5)
    with pytest.raises(KernelError, match="rank"):
        sweep(0, np.zeros((2, 2, 2, 2)), np.zeros((3, 2, 2, 2)), 0.5)


def test_periodic_fill_against_numpy_wrap():
    lines = np.zeros((3, 5 + 4))
    lines[:, 2:7] = np.arange(15).reshape(3, 5)
    periodic_fill(0, lines, 2)
    assert np.array_equal(lines, np.pad(lines[:, 2:7], ((0, 0), (2, 2)), mode="wrap"))


# ---- flows and fields ---------------------------------------------------------------------

@pytest.mark.parametrize("flow", [ROTATION, SWIRL], ids=lambda f: f.name)
def test_face_velocities_are_divergence_free_and_match_the_flow(flow):
    n = 32
    u, v = flow.face_velocities(n)
    assert np.max(np.abs(divergence(u, v))) < 1e-12
    # the analytic velocity at face midpoints (u = dpsi/dy, v = -dpsi/dx written out here)
    x_faces = np.arange(n + 1) / n
    centres = (np.arange(n) + 0.5) / n
    X, Y = np.meshgrid(x_faces, centres, indexing="ij")
    if flow is ROTATION:
        exact_u = -2 * np.pi * (Y - 0.5)
    else:
        exact_u = np.sin(np.pi * X) ** 2 * np.sin(2 * np.pi * Y)
    assert np.max(np.abs(u - exact_u)) < 5.0 / n ** 2       # face mean vs midpoint: O(dx^2)


def test_swirl_undoes_itself():
    # the time factor integrates to zero over the period, so every particle returns
    # (LeVeque 1996, from memory); checked by numpy quadrature
    t = np.linspace(0.0, SWIRL.period, 20001)
    g = np.array([SWIRL.time_factor(s) for s in t])
    assert abs(np.trapezoid(g, t)) < 1e-9


def test_slotted_cylinder_area():
    # disc of radius 0.15 less the part of the slot (|x - 1/2| <= 0.025, y <= 0.85) inside it
    x = np.linspace(0.475, 0.525, 200001)
    inside_slot = np.trapezoid(0.85 - (0.75 - np.sqrt(0.15 ** 2 - (x - 0.5) ** 2)), x)
    area = np.pi * 0.15 ** 2 - inside_slot
    n = 64
    assert abs(SLOTTED_CYLINDER.cell_averages(n).sum() / n ** 2 - area) < 2e-4


def test_hump_total():
    # integral of (1 + cos(pi r / R)) / 2 over r <= R is R^2 (pi / 2 - 2 / pi) [derived]
    n = 64
    assert abs(HUMP.cell_averages(n).sum() / n ** 2 - 0.25 ** 2 * (np.pi / 2 - 2 / np.pi)) < 1e-6


def test_quarter_turn_moves_the_centroid_by_a_quarter_turn():
    kernel = load_kernel(load_scheme(EXAMPLES / "upwind.loom"), "c")
    n, steps = 64, 101
    q = HUMP.cell_averages(n)
    centres = (np.arange(n) + 0.5) / n
    X, Y = np.meshgrid(centres, centres, indexing="ij")
    dt = 0.25 / steps
    sweep = BoundSweep(LineSweep(kernel), ROTATION.face_velocities(n), (dt * n, dt * n))
    for k in range(steps):
        q = split_step(sweep, q, "strang", k)
    # counter-clockwise about (1/2, 1/2): (0.5, 0.7) goes to (0.3, 0.5)
    assert abs((q * X).sum() / q.sum() - 0.3) < 4e-3
    assert abs((q * Y).sum() / q.sum() - 0.5) < 4e-3


# ---- the cases -----------------------------------------------------------------------------

@pytest.mark.parametrize("stem, backend", [("upwind", "numpy"), ("kappa_rk3", "c"),
                                           ("lw_fct", "c")])
def test_every_case_keeps_mass_to_round_off(stem, backend):
    line_sweep = LineSweep(load_kernel(load_scheme(EXAMPLES / f"{stem}.loom"), backend))
    for case in CASES:
        for method in ("lie", "strang"):
            run = run_case(line_sweep, case, 16, 0.5, method)
            assert run.stopped_at is None and run.mass_drift <= 1e-12


def test_a_constant_leaves_constant_only_where_the_velocity_varies_along_sweeps():
    # A sweep along x changes a constant by -dt/dx (u(i+1/2) - u(i-1/2)) q: zero in solid-body
    # rotation (u depends on y only), not in the swirl (common practice, no source).
    from fluxloom.runtime.multidim.cases import Case
    from fluxloom.runtime.multidim.fields import CONSTANT

    line_sweep = LineSweep(load_kernel(load_scheme(EXAMPLES / "upwind.loom"), "c"))
    turning = run_case(line_sweep, Case("c", "", ROTATION, CONSTANT), 16, 0.5, "lie")
    assert turning.overshoot < 1e-12
    swirling = run_case(line_sweep, next(c for c in CASES if c.name == "swirl_constant"), 16,
                        0.5, "lie")
    assert swirling.overshoot > 1e-2
    # ... and the deviation is first order in dx for a first-order scheme
    finer = run_case(line_sweep, next(c for c in CASES if c.name == "swirl_constant"), 32,
                     0.5, "lie")
    assert 0.7 < math.log2(swirling.linf / finer.linf) < 1.3


def test_step_counts_reach_the_period_at_the_courant_number():
    for case in CASES:
        for method in ("lie", "alternating", "strang"):
            steps = step_count(case.flow, 32, 0.5, method)
            dt = case.flow.period / steps
            assert case.flow.max_speed(32) * dt * 32 <= 0.5 + 1e-12
            assert method != "alternating" or steps % 2 == 0
