"""Profiles, norms and the harness's measurements, held against outside results.

The kernels here are written by hand in tests/harness_kernels.py (independent of
fluxloom's generators), so these tests check the measuring, not the generating.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
import sympy

from fluxloom.runtime import harness, norms, profiles
from harness_kernels import hand_kernel
import reference_values as ref

# ---- profiles --------------------------------------------------------------------

POINTWISE = {
    "sine": lambda x: np.sin(2 * np.pi * x),
    "bell": lambda x: np.where(np.abs(x - 0.5) <= 0.25, np.cos(2 * np.pi * (x - 0.5)) ** 2, 0.0),
    "square": lambda x: ((x >= 0.3) & (x <= 0.7)).astype(float),
    "mixed": lambda x: (np.where(np.abs(x - 0.2) <= 0.15, np.cos(np.pi * (x - 0.2) / 0.3) ** 2, 0.0)
                        + np.maximum(0.0, 1 - np.abs(x - 0.5) / 0.12)
                        + ((x >= 0.68) & (x <= 0.92))),
}


@pytest.mark.parametrize("name", sorted(POINTWISE))
def test_cell_averages_match_a_fine_midpoint_rule(name):
    # Independent reference: average the pointwise formula over 4000 midpoints per cell.
    n, sub = 40, 4000
    x = (np.arange(n * sub) + 0.5) / (n * sub)
    fine = POINTWISE[name](x).reshape(n, sub).mean(axis=1)
    got = profiles.PROFILES[name].cell_averages(n)
    assert np.max(np.abs(got - fine)) < 2e-4  # the midpoint rule's error at the jumps


@pytest.mark.parametrize("name", sorted(POINTWISE))
def test_shifting_by_a_whole_period_changes_nothing(name):
    profile = profiles.PROFILES[name]
    assert np.allclose(profile.cell_averages(50, shift=1.0), profile.cell_averages(50), atol=1e-13)
    assert np.allclose(profile.cell_averages(50, shift=-1.0), profile.cell_averages(50), atol=1e-13)


def test_shift_moves_the_square_by_whole_cells():
    square = profiles.SQUARE
    assert np.allclose(square.cell_averages(10, shift=0.2), np.roll(square.cell_averages(10), 2))


def test_profiles_lie_in_their_stated_range():
    for profile in profiles.PROFILES.values():
        q = profile.cell_averages(200)
        assert profile.low - 1e-12 <= q.min() and q.max() <= profile.high + 1e-12


def test_scaled_profile_maps_the_range():
    scaled = profiles.SINE.scaled(0.0, 1.0)
    q = scaled.cell_averages(100)
    assert np.allclose(q, 0.5 + 0.5 * profiles.SINE.cell_averages(100))


# ---- norms -------------------------------------------------------------------------

def test_norms_agree_with_numpy_linalg():
    rng = np.random.default_rng(1)
    exact, phi = rng.standard_normal(37), rng.standard_normal(37)
    e = norms.errors(phi, exact)
    diff = phi - exact
    assert e.l1 == pytest.approx(np.linalg.norm(diff, 1) / np.linalg.norm(exact, 1), rel=1e-14)
    assert e.l2 == pytest.approx(np.linalg.norm(diff, 2) / np.linalg.norm(exact, 2), rel=1e-14)
    assert e.linf == pytest.approx(np.linalg.norm(diff, np.inf) / np.linalg.norm(exact, np.inf),
                                   rel=1e-14)


def test_observed_order_of_a_power_law():
    cells = [25, 50, 100, 200]
    errs = [3.0 * n ** -2.5 for n in cells]
    assert norms.pair_orders(cells, errs) == pytest.approx([2.5, 2.5, 2.5])
    assert norms.fitted_order(cells, errs) == pytest.approx(2.5)


def test_observed_order_skips_missing_values():
    cells = [25, 50, 100]
    orders = norms.pair_orders(cells, [1e-2, float("nan"), 1e-4])
    assert all(math.isnan(o) for o in orders)
    assert norms.fitted_order(cells, [1e-2, float("nan"), 1e-4]) == pytest.approx(math.log2(100) / 2)


# ---- convergence against the exact l2 table ------------------------------------------

# reference_values.EXACT_L2 [derived]: for sin(2 pi x), c = 1/2, one period, the
# normalised l2 error is |G(theta)^n - exp(-i c theta n)|, theta = 2 pi / N, n = 2N.
EXACT_L2 = {name: value.value for name, value in ref.EXACT_L2.items()}
FACE_SYMBOLS = {  # the face value g with q[k] -> exp(i k theta)
    "upwind": lambda c, t: 1,
    "lax_wendroff": lambda c, t: 1 + (1 - c) / 2 * (np.exp(1j * t) - 1),
    "beam_warming": lambda c, t: 1 + (1 - c) / 2 * (1 - np.exp(-1j * t)),
    "fromm": lambda c, t: 1 + (1 - c) / 4 * (np.exp(1j * t) - np.exp(-1j * t)),
}


def amplification(name, c, t):
    """G = 1 - c g (1 - exp(-i theta)), the same numbers another way (numpy, complex)."""
    return 1 - c * FACE_SYMBOLS[name](c, t) * (1 - np.exp(-1j * t))


@pytest.mark.parametrize("name", sorted(EXACT_L2))
def test_exact_l2_table_is_reproduced(name):
    conv = harness.convergence(hand_kernel(name), profiles.SINE, 0.5, cells=(20, 40, 80, 160))
    got = [row.errors.l2 for row in conv.rows]
    assert got == pytest.approx(EXACT_L2[name], rel=1e-6)
    # and the closed form from the amplification factor, computed with numpy
    closed = [abs(amplification(name, 0.5, 2 * np.pi / n) ** (2 * n) - np.exp(-1j * 0.5 * 2 * np.pi / n * 2 * n))
              for n in (20, 40, 80, 160)]
    assert got == pytest.approx(closed, rel=1e-9)


@pytest.mark.parametrize("name, order", [("upwind", 1), ("lax_wendroff", 2)])
def test_upwind_first_and_lax_wendroff_second_order(name, order):
    # LeVeque 2002, Finite Volume Methods for Hyperbolic Problems, sec. 8.6 (from memory).
    conv = harness.convergence(hand_kernel(name), profiles.SINE, 0.5)
    assert [row.n for row in conv.rows] == [25, 50, 100, 200, 400, 800]
    assert abs(conv.finest_order["l1"] - order) < 0.1
    assert abs(conv.fitted["l1"] - order) < 0.15


@pytest.mark.parametrize("velocity", [1.0, -1.0])
def test_convergence_is_the_same_for_both_velocity_signs(velocity):
    conv = harness.convergence(hand_kernel("fromm"), profiles.BELL, 0.5, velocity,
                               cells=(25, 50))
    plus = harness.convergence(hand_kernel("fromm"), profiles.BELL, 0.5, 1.0, cells=(25, 50))
    assert [r.errors.l1 for r in conv.rows] == pytest.approx([r.errors.l1 for r in plus.rows])


def test_revolution_steps_at_awkward_courant_numbers():
    assert harness.revolution_steps(100, 0.5) == 200
    assert harness.revolution_steps(100, 0.3) == 334
    conv = harness.convergence(hand_kernel("upwind"), profiles.SINE, 0.3, cells=(100,))
    assert conv.rows[0].courant == pytest.approx(100 / 334)


# ---- divergence is a finding, not a crash --------------------------------------------

def test_divergence_is_reported_at_its_step():
    # FTCS: |G|^2 = 1 + c^2 sin^2(theta) > 1 (von Neumann analysis, common practice).
    kernel = hand_kernel("ftcs")
    shape = harness.shape(kernel, profiles.SQUARE, 0.9, n=50, steps=10_000)
    assert shape.diverged_at is not None and shape.diverged_at < 10_000
    assert shape.steps == shape.diverged_at - 1
    assert np.all(np.isfinite(shape.final))


class NaNKernel:
    """A broken kernel: NaN from finite data, whatever the Courant number."""
    halo, dtype = 1, np.dtype(float)

    def step(self, q, u_face, dt_dx, out=None):
        out[1:-1] = np.nan
        return out


def test_nan_from_finite_data_is_a_kernel_fault_not_divergence():
    # At c = 0.5 one step cannot overflow from values of size 1, so a NaN is the kernel's
    # fault (IEEE 754 arithmetic: finite operands below the overflow bound stay finite).
    run = harness.advance(NaNKernel(), np.ones(8), np.ones(9), 0.5, 5)
    assert run.fault_at == 1 and run.diverged_at is None and run.steps == 0
    assert run.stopped_at == 1


def test_overflow_at_a_huge_courant_number_is_divergence():
    # At c = 1e300 one Lax-Wendroff step multiplies by about c^2 = 1e600: Inf, then NaN
    # (IEEE 754 double overflows past 1.8e308), which is the instability, not a fault.
    run = harness.advance(hand_kernel("lax_wendroff"), np.sin(np.arange(16.0)), np.ones(17),
                          1e300, 3)
    assert run.diverged_at == 1 and run.fault_at is None
    assert harness.overflow_possible(1.0, 1e300, np.float64)
    assert not harness.overflow_possible(1e6, 10.0, np.float64)


# ---- monotone, TVD, and not -----------------------------------------------------------

@pytest.mark.parametrize("name", ["upwind", "lax_friedrichs"])
@pytest.mark.parametrize("courant", [0.25, 0.5, 0.9, 1.0])
@pytest.mark.parametrize("velocity", [1.0, -1.0])
def test_upwind_and_lax_friedrichs_are_monotone_up_to_one(name, courant, velocity):
    # Monotone for 0 <= c <= 1: all update coefficients non-negative (LeVeque 2002, from memory).
    for profile in profiles.DISCONTINUOUS:
        shape = harness.shape(hand_kernel(name), profile, courant, velocity, n=60)
        assert shape.bounded and shape.new_extrema == 0 and shape.tv_growth_steps == 0


@pytest.mark.parametrize("name", ["lw_minmod", "lw_superbee", "lw_vanleer"])
@pytest.mark.parametrize("courant", [0.3, 0.5, 0.8])
def test_sweby_limiters_keep_total_variation(name, courant):
    # Sweby 1984, SIAM J. Numer. Anal. 21:995 (citation from memory): limiters in the
    # TVD region give a TVD scheme for 0 <= c <= 1.
    for profile in profiles.DISCONTINUOUS:
        shape = harness.shape(hand_kernel(name), profile, courant, n=80)
        assert shape.tv_growth_steps == 0 and shape.new_extrema == 0 and shape.bounded


def test_limiter_outside_sweby_region_is_caught_at_c_08():
    # reference_values.OVERREACH_TVD: psi = max(0, min(3r, 1), min(r, 3)) is TVD only for
    # 1/3 <= c <= 2/3 (Sweby's conditions psi/r <= 2/c and psi <= 2/(1-c); [mem]).
    assert not float(sympy.Rational(ref.OVERREACH_TVD.value[1][0])) <= 0.8 <= \
        float(sympy.Rational(ref.OVERREACH_TVD.value[1][1]))
    outside = harness.shape(hand_kernel("lw_overreach"), profiles.SQUARE, 0.8, n=80)
    assert outside.tv_growth_steps > 0 and outside.tv_increase > 1e-3
    inside = harness.shape(hand_kernel("lw_overreach"), profiles.SQUARE, 0.5, n=80)
    assert inside.tv_growth_steps == 0


def test_lax_wendroff_oscillates_at_a_jump():
    shape = harness.shape(hand_kernel("lax_wendroff"), profiles.SQUARE, 0.5, n=80)
    assert not shape.bounded and shape.new_extrema > 0 and shape.tv_growth_steps > 0


def test_linear_schemes_measured_monotone_are_first_order():
    # Godunov 1959, Mat. Sb. 47:271 (from memory): a monotone linear scheme is at most
    # first order. Measured both ways on hand-written kernels.
    for name in ["upwind", "lax_friedrichs", "lax_wendroff", "beam_warming", "fromm"]:
        kernel = hand_kernel(name)
        monotone = all(
            s.bounded and s.new_extrema == 0 and s.tv_growth_steps == 0
            for s in (harness.shape(kernel, p, 0.5, n=80) for p in profiles.DISCONTINUOUS))
        order = harness.convergence(kernel, profiles.SINE, 0.5, cells=(100, 200)).finest_order["l1"]
        if monotone:
            assert order < 1.3, name
        else:
            assert order > 1.7, name


def test_new_extrema_and_total_variation_by_hand():
    old = np.array([0, 0, 1, 0, 0.0])
    # odd-even splitting stays inside each cell's neighbourhood: no new extremum
    assert harness.outside_local_range(old, np.array([0, 0.5, 0, 0.5, 0]), 1, 1e-12) == 0
    # an overshoot and an undershoot are new
    assert harness.outside_local_range(old, np.array([-0.1, 0, 1.2, 0, 0]), 1, 1e-12) == 2
    # a value outside one cell's reach but inside a wider one (periodic wrap included)
    assert harness.outside_local_range(old, np.array([0.3, 0, 1, 0, 0]), 1, 1e-12) == 1
    assert harness.outside_local_range(old, np.array([0.3, 0, 1, 0, 0]), 2, 1e-12) == 0
    assert harness.total_variation(np.array([0, 1, 1, 0.0])) == 2.0


# ---- conservation and symmetry ----------------------------------------------------------

@pytest.mark.parametrize("name", ["upwind", "lax_wendroff", "fromm", "lw_vanleer", "lax_friedrichs"])
@pytest.mark.parametrize("velocity", ["+1", "-1", "varying"])
def test_flux_form_conserves_the_total(name, velocity):
    # A flux-form update telescopes on a periodic domain (common practice, no source).
    result = harness.conservation(hand_kernel(name), profiles.MIXED, 0.5, velocity)
    assert result.mass_drift <= 1e-12 and result.diverged_at is None


def test_clamping_breaks_conservation():
    # (On the square wave the over- and undershoots of Lax-Wendroff mirror each other and
    # the clamp's losses cancel; the mixed profile has no such symmetry.)
    result = harness.conservation(hand_kernel("lax_wendroff_clip", clip=(0.0, 1.0)),
                                  profiles.MIXED, 0.5, "+1")
    assert result.mass_drift > 1e-6


def test_varying_velocity_changes_sign():
    u = harness.varying_velocity(100)
    assert u.min() < 0 < u.max() and u[0] == pytest.approx(u[-1])


@pytest.mark.parametrize("name", ["upwind", "lax_wendroff", "fromm", "lw_superbee"])
def test_mirrored_run_mirrors(name):
    assert harness.mirror_mismatch(hand_kernel(name), profiles.MIXED, 0.5) <= 1e-13


# ---- stability ---------------------------------------------------------------------

@pytest.mark.parametrize("name, limit", [
    # von Neumann limits (reference_values.STABLE_INTERVAL: LeVeque 2002; Warming and Beam
    # 1976; Fromm 1968; citations from memory).
    (name, float(ref.STABLE_INTERVAL[name].value[1]))
    for name in ("upwind", "lax_wendroff", "beam_warming", "fromm", "lax_friedrichs")
])
@pytest.mark.parametrize("linear", [True, False])
def test_measured_stability_limit(name, limit, linear):
    # measured both ways: spectrally (one step, per-mode gain) and by growth over many steps
    result = harness.stability_sweep(hand_kernel(name), np.arange(1, 13) / 4, 1.0, linear=linear)
    assert result.method == ("spectral" if linear else "growth")
    assert result.measured_max is not None
    assert abs(result.measured_max - limit) <= 0.02


@pytest.mark.parametrize("linear", [True, False])
def test_ftcs_grows_at_every_courant_number_tried(linear):
    # von Neumann: |G|^2 = 1 + c^2 sin^2(theta) (common practice).
    result = harness.stability_sweep(hand_kernel("ftcs"), np.arange(1, 7) / 4, -1.0,
                                     linear=linear)
    assert result.unstable_everywhere and result.measured_max is None
    assert len(result.probes) >= 6 and all(p.grows for p in result.probes)


def test_spectral_probe_measures_the_amplification_factor():
    # Lax-Wendroff |G|^2 (reference_values.ABS_G_SQUARED [pub]); max over the grid's modes,
    # computed with numpy.
    abs_squared = sympy.lambdify(sympy.symbols("c s"), ref.ABS_G_SQUARED["lax_wendroff"].value)
    for c in (0.5, 1.2):
        theta = 2 * np.pi * np.arange(1, 129) / 256
        expected = np.sqrt(abs_squared(c, np.sin(theta / 2) ** 2)).max()
        got = harness.spectral_probe(hand_kernel("lax_wendroff"), c).growth
        assert got == pytest.approx(expected, rel=1e-12)


def test_clamped_scheme_is_probed_underneath_the_clamp():
    # FTCS under a clamp to [0, 1] still has |G| > 1 (the clamp hides it at large amplitude).
    kernel = hand_kernel("ftcs_clip", clip=(0.0, 1.0))
    result = harness.stability_sweep(kernel, np.arange(1, 7) / 4, 1.0, linear=True,
                                     clip=(0.0, 1.0))
    assert result.unstable_everywhere
