"""The harness on the generated kernels of the bundled examples, held against outside
results (sources named beside each check)."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import sympy

from fluxloom.compiler import load_scheme, scheme_from_text
from fluxloom.runtime import harness, profiles
from fluxloom.runtime.prediction import analysis_document
from fluxloom.runtime.findings import Options, Prediction, verify_kernel
from fluxloom.runtime.kernel import load_kernel

import reference_values as ref

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
ALL = sorted(p.stem for p in EXAMPLES.glob("*.loom"))


def kernel(stem: str, backend: str = "numpy"):
    return load_kernel(load_scheme(EXAMPLES / f"{stem}.loom"), backend)


# reference_values.EXACT_L2 [derived]: sin(2 pi x), c = 1/2, one period.
EXACT_L2 = {name: value.value for name, value in ref.EXACT_L2.items()}


@pytest.mark.parametrize("backend", ["numpy", "c"])
@pytest.mark.parametrize("stem", sorted(EXACT_L2))
def test_exact_l2_table_on_generated_kernels(stem, backend):
    conv = harness.convergence(kernel(stem, backend), profiles.SINE, 0.5, cells=ref.EXACT_L2_CELLS)
    assert [row.errors.l2 for row in conv.rows] == pytest.approx(EXACT_L2[stem], rel=1e-6)


@pytest.mark.slow
@pytest.mark.parametrize("stem", ALL)
def test_every_example_agrees_with_its_analysis(stem):
    # c = 0.4: no example has an error term that vanishes there (Fromm's does at c = 1/2).
    scheme = load_scheme(EXAMPLES / f"{stem}.loom")
    prediction = Prediction.from_document(analysis_document(scheme, 0.4))
    options = Options(courant=0.4, cells=harness.CONVERGENCE_CELLS[:5])  # N = 25 .. 400
    result = verify_kernel(load_kernel(scheme, "numpy"), prediction, options)
    assert result.agree, [(f.check, f.context, f.predicted, f.measured)
                          for f in result.disagreements]


@pytest.mark.parametrize("stem", ["upwind", "lax_friedrichs"])
@pytest.mark.parametrize("courant", [0.3, 0.7, 1.0])
def test_upwind_and_lax_friedrichs_monotone_up_to_one(stem, courant):
    # reference_values.MONOTONE_INTERVAL: monotone for c <= 1 (LeVeque 2002, from memory).
    assert courant <= ref.MONOTONE_INTERVAL[stem].value[1]
    k = kernel(stem)
    for velocity in (1.0, -1.0):
        for profile in profiles.DISCONTINUOUS:
            sh = harness.shape(k, profile, courant, velocity)
            assert sh.bounded and sh.new_extrema == 0 and sh.tv_growth_steps == 0


@pytest.mark.parametrize("stem", ["lw_minmod", "lw_superbee", "lw_vanleer"])
@pytest.mark.parametrize("courant", [0.25, 0.5, 0.9])
def test_sweby_limiters_keep_tv_on_the_square_wave(stem, courant):
    # Sweby 1984, SIAM J. Numer. Anal. 21:995 (citation from memory).
    sh = harness.shape(kernel(stem), profiles.SQUARE, courant)
    assert sh.tv_growth_steps == 0 and sh.new_extrema == 0 and sh.bounded


def test_limiter_outside_sweby_region_grows_tv_at_c_08():
    # psi up to 3: TVD only for 1/3 <= c <= 2/3 (reference_values.OVERREACH_TVD, [mem]).
    k = kernel("lw_overreach")
    assert harness.shape(k, profiles.SQUARE, 0.8).tv_growth_steps > 0
    assert harness.shape(k, profiles.SQUARE, 0.5).tv_growth_steps == 0


@pytest.mark.parametrize("method", [True, False])
def test_ftcs_grows_at_every_courant_number(method):
    # von Neumann: |G|^2 = 1 + c^2 sin^2(theta) > 1 (common practice, no source).
    result = harness.stability_sweep(kernel("ftcs"), np.arange(1, 7) / 4, 1.0, linear=method)
    assert result.unstable_everywhere and len(result.probes) >= 6


def test_linear_examples_measured_monotone_are_first_order():
    # Godunov 1959, Mat. Sb. 47:271 (from memory): monotone linear schemes are at most first
    # order. Measured: monotone on both discontinuous profiles, then the order on a sine.
    seen_monotone = []
    for stem in ALL:
        scheme = load_scheme(EXAMPLES / f"{stem}.loom")
        if scheme.limited or scheme.correct or scheme.clip:
            continue
        k = load_kernel(scheme, "numpy")
        shapes = [harness.shape(k, p, 0.5, n=80) for p in profiles.DISCONTINUOUS]
        if all(s.bounded and s.new_extrema == 0 and s.tv_growth_steps == 0
               and s.diverged_at is None for s in shapes):
            order = harness.convergence(k, profiles.SINE, 0.5, cells=(100, 200)).finest_order["l1"]
            assert order < 1.3, stem
            seen_monotone.append(stem)
    assert {"upwind", "lax_friedrichs", "upwind_rk3"} <= set(seen_monotone)
    assert "lax_wendroff" not in seen_monotone and "quickest" not in seen_monotone


def test_numpy_and_c_measure_the_same():
    errs = [[row.errors.l1 for row in harness.convergence(kernel("lw_vanleer", backend),
                                                          profiles.BELL, 0.5, cells=(50, 100)).rows]
            for backend in ("numpy", "c")]
    assert errs[0] == pytest.approx(errs[1], rel=1e-10)


# ---- issue 6: clamping against flux-corrected transport -----------------------------

def test_clamped_centred_scheme_is_bounded_but_drifts_and_wiggles():
    k = kernel("ftcs_clip")
    for profile in profiles.DISCONTINUOUS:
        sh = harness.shape(k, profile, 0.5)
        assert sh.bounded and 0.0 <= sh.seen_bounds[0] and sh.seen_bounds[1] <= 1.0
    mixed = harness.shape(k, profiles.MIXED, 0.5)
    assert mixed.new_extrema > 0
    assert mixed.mass_drift > 1e-3   # the clamp adds and removes tracer: reported, not hidden
    assert harness.conservation(k, profiles.MIXED, 0.5, "varying").mass_drift > 1e-3


@pytest.mark.parametrize("courant", [0.25, 0.5, 0.8])
@pytest.mark.parametrize("velocity", [1.0, -1.0])
def test_fct_bounded_without_new_extrema_and_conservative(courant, velocity):
    k = kernel("lw_fct")
    for profile in profiles.DISCONTINUOUS:
        sh = harness.shape(k, profile, courant, velocity)
        assert sh.bounded and sh.new_extrema == 0 and sh.diverged_at is None
        assert sh.mass_drift <= 1e-12
    assert harness.conservation(k, profiles.MIXED, courant, "varying").mass_drift <= 1e-12


@pytest.mark.parametrize("n", [100, 200])
def test_zalesak_square_wave_behaviour(n):
    # Zalesak 1979, J. Comput. Phys. 31:335: on the 1-D square wave, FCT shows no overshoot
    # and no undershoot, and keeps the wave sharper than the low-order (upwind) solution.
    fct = harness.convergence(kernel("lw_fct"), profiles.SQUARE, 0.5, cells=(n,)).rows[0]
    low = harness.convergence(kernel("upwind"), profiles.SQUARE, 0.5, cells=(n,)).rows[0]
    high = harness.convergence(kernel("lax_wendroff"), profiles.SQUARE, 0.5, cells=(n,)).rows[0]
    assert fct.final.min() >= -1e-12 and fct.final.max() <= 1 + 1e-12
    assert high.final.min() < -0.05 and high.final.max() > 1.05  # the high-order flux alone
    assert fct.errors.l1 < 0.6 * low.errors.l1

    def smeared(q):  # cells caught part-way through a jump
        return int(np.count_nonzero((q > 0.05) & (q < 0.95)))
    assert smeared(fct.final) < smeared(low.final) / 2


@pytest.mark.parametrize("courant", [0.2, 0.5, 0.9, 1.0])
def test_low_order_flux_alone_is_monotone_by_its_coefficients(courant):
    # Godunov 1959 (from memory): monotone iff every coefficient of the linear update is
    # >= 0. The coefficients are read off the kernel of lw_fct's low flux by unit impulses.
    low = scheme_from_text("scheme lw_fct_low {\n  time euler\n  flux = u * q[0]\n}\n")
    k = load_kernel(low, "numpy")
    n = 16
    columns = []
    for j in range(n):
        impulse = np.zeros(n)
        impulse[j] = 1.0
        columns.append(harness.advance(k, impulse, np.ones(n + 1), courant, 1).q)
    update = np.array(columns).T
    assert update.min() >= -1e-15
    assert np.allclose(update.sum(axis=0), 1.0)


@pytest.mark.parametrize("stem, kappa, limit", [
    # reference_values.MOL_LIMIT [derived] (tables of such limits: Baldauf 2008, from memory).
    ("upwind_rk3", None, ref.MOL_LIMIT[("upwind", "ssp_rk3")].value),
    ("centred_rk4", None, ref.MOL_LIMIT[("centred", "rk4")].value),
    ("kappa_rk2", None, ref.MOL_LIMIT[("kappa=1/3", "ssp_rk2")].value),
    ("kappa_rk3", None, ref.MOL_LIMIT[("kappa=1/3", "ssp_rk3")].value),
    ("kappa_rk3", 0, ref.MOL_LIMIT[("kappa=0", "ssp_rk3")].value),
    ("kappa_rk3", -1, ref.MOL_LIMIT[("kappa=-1", "ssp_rk3")].value),
    ("kappa_rk2", -1, ref.MOL_LIMIT[("kappa=-1", "ssp_rk2")].value),
])
def test_method_of_lines_limits_measured_on_the_kernels(stem, kappa, limit):
    overrides = {} if kappa is None else {"kappa": sympy.Integer(kappa)}
    k = load_kernel(load_scheme(EXAMPLES / f"{stem}.loom", overrides), "numpy")
    result = harness.stability_sweep(k, np.arange(1, 13) / 4, 1.0, linear=True)
    assert result.method == "spectral"
    assert result.measured_max == pytest.approx(limit, abs=0.005)


def test_a_wide_clamp_is_judged_by_its_own_range():
    # Data in [0, 1] under a clamp to [-1, 2]: Lax-Wendroff's wiggles leave the data's
    # range but not the clamp's, which is all the clamp promises.
    text = ("scheme lw_wide_clip {\n  time euler\n"
            "  flux = u * (q[0] + (1 - c) / 2 * (q[1] - q[0]))\n  clip -1, 2\n}\n")
    scheme = scheme_from_text(text)
    prediction = Prediction.from_document(analysis_document(scheme, 0.5))
    result = verify_kernel(load_kernel(scheme, "numpy"), prediction,
                           Options(cells=(25, 50, 100), stability=False))
    bounds = [f for f in result.findings if f.check == "bounds"]
    assert bounds and all(f.verdict == "agree" and "[-1, 2]" in f.predicted for f in bounds)
    assert any(not sh.bounded for sh in result.shapes)  # left the data's own range
