"""compare's measures held against computations outside fluxloom.

- Peak retained and front width after one revolution follow from a linear scheme's
  exact amplification factor: the final state is the inverse FFT of the initial cell
  averages' FFT times G(theta)^n (common practice, no source), for first-order upwind
  and for random linear stencils nobody has seen.
- Overshoot and undershoot come from our own numpy steppers (np.roll), step by step.
- The measured stability limit of a random stencil against a numpy scan of |G|.
- "diverged at step k" against a numpy FTCS stepper and the harness's divergence rule.
- The target-error interpolation against log-log interpolation done by hand; the cost's
  median and range, and the noise warnings, on injected timings (never timed asserts).
- A wrong prediction fed to compare must be marked as a disagreement.
"""
from __future__ import annotations

import math
from fractions import Fraction
from pathlib import Path

import numpy as np
import pytest

from fluxloom.compiler import load_scheme, scheme_from_text
from fluxloom.runtime.accuracy import GridError, cheapest, line_cells, reach
from fluxloom.runtime.compare_report import DISAGREE_MARK, comparison_text
from fluxloom.runtime.comparison import (CompareSettings, Variant, analysis_document, compare,
                                         measure_variant)
from fluxloom.runtime.costs import Cost, TimingSettings, noise_warnings, time_kernels
from fluxloom.runtime.kernel import load_kernel
from fluxloom.runtime.prediction import Prediction
from fluxloom.runtime.profiles import BELL, MIXED, SQUARE

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
NO_TIMING = TimingSettings(cells=200, repeats=1, steps=1)


def settings(cells: int, courant: float = 0.5, stability: bool = False) -> CompareSettings:
    return CompareSettings(courant=courant, cells=cells, grids=(cells // 2,), stability=stability,
                           timing=NO_TIMING)


def measured(scheme, cells: int, courant: float = 0.5, stability: bool = False):
    row, _ = measure_variant(Variant(scheme.name, scheme), settings(cells, courant, stability))
    return row


# ---- numpy references ------------------------------------------------------------------

def three_point_symbol(a_minus, a_zero, a_plus, c, theta):
    """G of q_j <- q_j - c (g_{j+1/2} - g_{j-1/2}), g_{j+1/2} = sum a_k q_{j+k}, u > 0."""
    g = a_minus * np.exp(-1j * theta) + a_zero + a_plus * np.exp(1j * theta)
    return 1 - c * g * (1 - np.exp(-1j * theta))


def fft_revolution(q0, symbol, steps):
    n = q0.size
    theta = 2 * np.pi * np.fft.fftfreq(n)          # the grid's modes
    return np.real(np.fft.ifft(np.fft.fft(q0) * symbol(theta) ** steps))


def roll_stepper(coefficients, c):
    """One forward-Euler step of a linear face g = sum a_k q[k] (u > 0, periodic)."""
    def step(q):
        face = sum(a * np.roll(q, -k) for k, a in coefficients.items())   # g_{j+1/2}
        return q - c * (face - np.roll(face, 1))
    return step


def extremes_over_run(step, q0, steps):
    top, bottom, q = q0.max(), q0.min(), q0.copy()
    for _ in range(steps):
        q = step(q)
        top, bottom = max(top, q.max()), min(bottom, q.min())
    return top, bottom


def monotone_width(values, low, high):
    """10 %-90 % width of a monotone rising front by inverse interpolation (np.interp)."""
    lo, hi = low + 0.1 * (high - low), low + 0.9 * (high - low)
    inside = np.nonzero((values > low + 1e-3 * (high - low)) &
                        (values < high - 1e-3 * (high - low)))[0]
    first, last = max(inside[0] - 1, 0), min(inside[-1] + 2, values.size)
    window = values[first:last]
    assert np.all(np.diff(window) > 0)              # strictly monotone, as upwind keeps it
    assert window[0] <= lo and window[-1] >= hi
    positions = np.arange(first, last, dtype=float)
    return float(np.interp(hi, window, positions) - np.interp(lo, window, positions))


# ---- upwind: exact amplification factor -------------------------------------------------

@pytest.mark.parametrize("cells,courant", [(64, 0.5), (100, 0.25)])
def test_upwind_peak_and_front_follow_from_its_amplification_factor(cells, courant):
    row = measured(load_scheme(EXAMPLES / "upwind.loom"), cells, courant)
    steps = round(cells / courant)
    symbol = lambda theta: 1 - courant + courant * np.exp(-1j * theta)   # noqa: E731
    bell0 = BELL.cell_averages(cells)
    bell = fft_revolution(bell0, symbol, steps)
    assert row.measures.peak_retained == pytest.approx(bell.max() / bell0.max(), abs=1e-12)
    square = fft_revolution(SQUARE.cell_averages(cells), symbol, steps)
    half = cells // 2                               # fronts at 0.3 (rising), 0.7 (falling)
    widths = [monotone_width(square[:half], 0.0, 1.0),
              monotone_width(square[half:][::-1], 0.0, 1.0)]
    assert row.measures.front_width == pytest.approx(max(widths), abs=1e-9)
    # upwind is monotone: nothing beyond the initial range
    assert row.measures.overshoot == 0 and row.measures.undershoot == 0


def _random_stencil(seed: int):
    """A three-point face nobody has seen: a blend of Lax-Wendroff and Beam-Warming plus a
    curvature term, with random rational weights; rejected until stable near c = 0."""
    rng = np.random.default_rng(seed)
    while True:
        alpha = Fraction(int(rng.integers(0, 9)), 8)
        gamma = Fraction(int(rng.integers(-4, 5)), 16)
        text = (f"scheme random_{seed} {{\n  time euler\n"
                f"  flux = u * (q[0] + (1 - c) / 2 * ({alpha} * (q[1] - q[0]) + "
                f"(1 - {alpha}) * (q[0] - q[-1])) + ({gamma}) * c * (1 - c) * "
                f"(q[1] - 2 * q[0] + q[-1]))\n}}\n")
        a, g = float(alpha), float(gamma)

        def coefficients(c, a=a, g=g):
            k = (1 - c) / 2
            return {-1: -k * (1 - a) + g * c * (1 - c), 0: 1 + k * (1 - 2 * a) - 2 * g * c * (1 - c),
                    1: k * a + g * c * (1 - c)}
        theta = np.linspace(0, 2 * np.pi, 4001)

        def gain(c, coefficients=coefficients):
            co = coefficients(c)
            return np.max(np.abs(three_point_symbol(co[-1], co[0], co[1], c, theta)))
        if all(gain(c) <= 1 + 1e-12 for c in (0.05, 0.2, 0.4)):
            return scheme_from_text(text, f"random_{seed}.loom"), coefficients, gain


@pytest.mark.parametrize("seed", [3, 11, 29])
def test_random_stencil_peak_and_extremes_against_numpy(seed):
    scheme, coefficients, _ = _random_stencil(seed)
    cells, courant = 64, 0.4
    steps = 160
    row = measured(scheme, cells, courant)
    co = coefficients(courant)
    bell0 = BELL.cell_averages(cells)
    bell = fft_revolution(bell0, lambda t: three_point_symbol(co[-1], co[0], co[1], courant, t),
                          steps)
    assert row.measures.peak_retained == pytest.approx(bell.max() / bell0.max(), abs=1e-11)
    # overshoot and undershoot over every step of the square wave and the mixed profile
    step = roll_stepper(co, courant)
    tops, bottoms = zip(*(extremes_over_run(step, p.cell_averages(cells), steps)
                          for p in (SQUARE, MIXED)))
    assert row.measures.overshoot == pytest.approx(max(0.0, max(tops) - 1.0), abs=1e-12)
    assert row.measures.undershoot == pytest.approx(max(0.0, -min(bottoms)), abs=1e-12)


@pytest.mark.slow
@pytest.mark.parametrize("seed", [3, 29])
def test_random_stencil_measured_stability_limit_against_a_numpy_scan(seed):
    scheme, _, gain = _random_stencil(seed)
    row = measured(scheme, 32, 0.4, stability=True)
    grid = np.arange(0.01, 3.0, 0.0005)
    limit = next(c for c in grid if gain(c) > 1 + 1e-9)      # first growing Courant number
    assert row.measures.stability.max == pytest.approx(limit, abs=0.01)


# ---- overshoot against numpy steppers of published schemes --------------------------------

def test_lax_wendroff_overshoot_against_a_numpy_stepper():
    cells, c = 80, 0.5
    row = measured(load_scheme(EXAMPLES / "lax_wendroff.loom"), cells, c)
    step = roll_stepper({0: 1 - (1 - c) / 2, 1: (1 - c) / 2}, c)
    tops, bottoms = zip(*(extremes_over_run(step, p.cell_averages(cells), round(cells / c))
                          for p in (SQUARE, MIXED)))
    assert row.measures.overshoot == pytest.approx(max(tops) - 1.0, abs=1e-12)
    assert row.measures.undershoot == pytest.approx(-min(bottoms), abs=1e-12)
    assert row.measures.overshoot > 0.05       # Lax-Wendroff rings at a jump


def test_minmod_limited_scheme_overshoot_against_a_numpy_stepper():
    cells, c = 80, 0.5
    row = measured(load_scheme(EXAMPLES / "lw_minmod.loom"), cells, c)

    def step(q):
        up, down = q - np.roll(q, 1), np.roll(q, -1) - q           # q[0]-q[-1], q[1]-q[0]
        with np.errstate(divide="ignore", invalid="ignore"):
            r = np.where(down != 0, up / np.where(down != 0, down, 1), 0.0)
        face = q + (1 - c) / 2 * np.maximum(0, np.minimum(1, r)) * down
        return q - c * (face - np.roll(face, 1))
    tops, bottoms = zip(*(extremes_over_run(step, p.cell_averages(cells), round(cells / c))
                          for p in (SQUARE, MIXED)))
    assert row.measures.overshoot == pytest.approx(max(0.0, max(tops) - 1.0), abs=1e-12)
    assert row.measures.undershoot == pytest.approx(max(0.0, -min(bottoms)), abs=1e-12)


# ---- honest cells ------------------------------------------------------------------------

def test_a_diverged_run_says_at_which_step():
    cells, c = 200, 0.5
    row = measured(load_scheme(EXAMPLES / "ftcs.loom"), cells, c)
    # our own FTCS stepper and the harness's rule: growth past 1e6 times the initial max
    step = roll_stepper({0: 0.5, 1: 0.5}, c)
    q0 = BELL.cell_averages(cells)
    q, k = q0.copy(), 0
    while np.max(np.abs(q)) <= 1e6 * np.max(np.abs(q0)):
        q, k = step(q), k + 1
    grid = row.error_at(cells)
    assert grid.diverged_at == k and grid.l1 is None
    assert row.measures.peak_retained is None
    assert row.measures.stopped["peak_retained"] == f"diverged at step {k}"
    comparison = compare([Variant("ftcs", load_scheme(EXAMPLES / "ftcs.loom"))],
                         settings(cells, c))
    assert f"diverged at step {k}" in comparison_text(comparison)


def test_a_wrong_prediction_is_marked_as_a_disagreement():
    # Lax-Wendroff measured against upwind's claims (monotone, TVD and bounded for [0, 1])
    upwind = load_scheme(EXAMPLES / "upwind.loom")
    wrong = Prediction.from_document(analysis_document(upwind, 0.5))
    lw = load_scheme(EXAMPLES / "lax_wendroff.loom")
    comparison = compare([Variant("lax_wendroff", lw)], settings(64), predictions=[wrong])
    row = comparison.rows[0]
    assert {"bounds", "extrema", "tv"} <= set(row.disagreeing_checks)
    text = comparison_text(comparison)
    line = next(line for line in text.splitlines()
                if line.startswith("lax_wendroff") and "DISAGREE" in line)
    assert DISAGREE_MARK.strip() in line
    # and its own prediction agrees
    assert compare([Variant("lax_wendroff", lw)], settings(64)).rows[0].disagreeing_checks == ()


def test_a_wrong_order_is_marked_on_a_ladder_long_enough_to_judge_it():
    # Lax-Wendroff (second order) measured against Fromm's claim of order 3 at c = 0.5
    fromm = Prediction.from_document(analysis_document(load_scheme(EXAMPLES / "fromm.loom"), 0.5))
    assert fromm.order == 3
    lw = Variant("lax_wendroff", load_scheme(EXAMPLES / "lax_wendroff.loom"))
    long = CompareSettings(cells=100, grids=(200, 400), stability=False, timing=NO_TIMING)
    (row,) = compare([lw], long, predictions=[fromm]).rows
    assert "convergence" in row.disagreeing_checks
    # on a ladder ending at N = 100 the order is reported, not judged either way
    short = CompareSettings(cells=100, grids=(50,), stability=False, timing=NO_TIMING)
    (row,) = compare([lw], short, predictions=[fromm]).rows
    assert "convergence" not in row.disagreeing_checks
    assert all(f.verdict == "no claim" for f in row.verification.findings
               if f.check == "convergence")


# ---- the target error --------------------------------------------------------------------

def test_target_error_is_interpolated_in_log_log():
    # second order: e = 0.1 (25 / N)^2; the line reaches 0.05 at N = 25 sqrt(2) = 35.355
    points = [(25, 0.1), (50, 0.025), (100, 0.00625)]
    n, how = line_cells(points, 0.05)
    assert n == pytest.approx(35.3553, abs=1e-4) and "N = 25 and N = 50" in how
    # between (50, 0.02) and (100, 0.004): log-log by hand, N = 50 * 2^(ln 2 / ln 5) = 67.39
    n, _ = line_cells([(25, 0.5), (50, 0.02), (100, 0.004)], 0.01)
    assert n == pytest.approx(67.39, abs=0.01)
    # already met on the coarsest grid; never extrapolated past the finest
    assert line_cells(points, 0.2)[0] == 25
    n, why = line_cells(points, 1e-4)
    assert n is None and "not reached" in why and "N = 100" in why
    # a diverged grid ends the line
    assert line_cells([(25, 0.1), (50, None), (100, 0.001)], 0.01)[0] is None


def test_reach_and_cheapest_on_hand_made_lines():
    ladder = [GridError(25, 50, 0.1, 0.1, 0.1, None, None),
              GridError(50, 100, 0.025, 0.025, 0.025, None, None)]
    cost = Cost.from_samples([2e-3, 1e-3, 3e-3], 1000)          # 2e-6 s per cell-update
    r = reach(ladder, cost, 0.05, "l1", 0.5)
    assert (r.n, r.steps) == (36, 72)                            # ceil(35.36); 36 / 0.5
    assert r.cost.median == pytest.approx(2e-6 * 36 * 72)
    assert (r.cost.min, r.cost.max) == pytest.approx((1e-6 * 36 * 72, 3e-6 * 36 * 72))
    dearer = reach(ladder, Cost.from_samples([5e-3, 5e-3, 5e-3], 1000), 0.05, "l1", 0.5)
    best = cheapest([dearer, r], ["dear", "cheap"])
    assert best.index == 1 and best.noise is None
    close = reach(ladder, Cost.from_samples([2.1e-3, 2.0e-3, 2.2e-3], 1000), 0.05, "l1", 0.5)
    assert "within the spread" in cheapest([close, r], ["close", "cheap"]).noise


# ---- cost: median, range and noise on injected timings ----------------------------------

def test_cost_median_and_range_from_samples():
    cost = Cost.from_samples([3e-3, 1e-3, 2e-3, 5e-3, 4e-3], 1000)
    assert (cost.median, cost.min, cost.max) == pytest.approx((3e-6, 1e-6, 5e-6))
    assert cost.spread == pytest.approx(4e-6) and cost.speed == pytest.approx(1e-6 / 3e-6)
    even = Cost.from_samples([1.0, 4.0], 2)
    assert even.median == pytest.approx(1.25)                    # the mean of the middle two


class ScriptedClock:
    """Readings that make every timed sample last the scripted durations, in order."""

    def __init__(self, durations):
        self.readings, now = [], 100.0
        for d in durations:
            self.readings += [now, now + d]
            now += d + 1.0

    def __call__(self):
        return self.readings.pop(0)


def test_kernels_are_timed_in_turn_with_injected_timings():
    kernels = [load_kernel(load_scheme(EXAMPLES / f"{n}.loom")) for n in ("upwind", "fromm")]
    # rounds of (upwind, fromm): upwind 10, 30, 20 ms; fromm 25, 26, 24 ms
    clock = ScriptedClock([0.010, 0.025, 0.030, 0.026, 0.020, 0.024])
    timing = TimingSettings(cells=100, repeats=3, steps=2)
    upwind, fromm = time_kernels(kernels, 0.5, timing, timer=clock)
    assert clock.readings == []                                  # every reading used
    assert (upwind.median, upwind.min, upwind.max) == pytest.approx((1e-4, 5e-5, 1.5e-4))
    assert (fromm.median, fromm.min, fromm.max) == pytest.approx((1.25e-4, 1.2e-4, 1.3e-4))
    # 25 % apart, but upwind's samples spread over 100 %: their order is noise
    (warning,) = noise_warnings([("upwind", upwind), ("fromm", fromm)])
    assert "upwind and fromm" in warning and "not decided" in warning
    # a clear difference raises none
    clock = ScriptedClock([0.010, 0.100, 0.011, 0.101, 0.012, 0.099])
    upwind, fromm = time_kernels(kernels, 0.5, timing, timer=clock)
    assert noise_warnings([("upwind", upwind), ("fromm", fromm)]) == []


def test_calibrated_steps_come_from_one_timed_step():
    kernel = load_kernel(load_scheme(EXAMPLES / "upwind.loom"))
    # the calibration step takes 4 ms, so a 30 ms sample needs ceil(30 / 4) = 8 steps
    clock = ScriptedClock([0.004, 0.016, 0.016])
    (cost,) = time_kernels([kernel], 0.5, TimingSettings(cells=50, repeats=2,
                                                       sample_seconds=0.03), timer=clock)
    assert cost.median == pytest.approx(0.016 / (50 * 8))


def test_seconds_of_a_revolution_scale_the_cost():
    cost = Cost.from_samples([1e-3, 2e-3, 3e-3], 1000)
    grid = GridError(40, 80, 0.1, 0.1, 0.1, None, None)
    assert grid.work == 3200
    assert grid.to_json(cost)["seconds"] == pytest.approx(2e-6 * 3200)
    assert math.isclose(cost.scaled(10).max, 3e-5)
