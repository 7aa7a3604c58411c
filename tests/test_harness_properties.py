"""Properties of the measurements that must hold for any data (hypothesis)."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from fluxloom.compiler import load_scheme
from fluxloom.runtime import harness, norms
from fluxloom.runtime.kernel import load_kernel

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
finite = st.floats(-10, 10, allow_nan=False, allow_infinity=False)
KERNELS = {stem: load_kernel(load_scheme(EXAMPLES / f"{stem}.loom"), "numpy")
           for stem in ("lw_vanleer", "lw_fct", "quickest")}


@settings(max_examples=40, deadline=None)
@given(arrays(float, 20, elements=finite), arrays(float, 20, elements=finite),
       st.floats(0.01, 100) | st.floats(-100, -0.01))
def test_normalised_errors_ignore_scale(phi, exact, scale):
    if np.abs(exact).max() < 1e-3:
        exact = exact + 1.0
    a, b = norms.errors(phi, exact), norms.errors(scale * phi, scale * exact)
    assert b.l1 == pytest.approx(a.l1, rel=1e-12)
    assert b.l2 == pytest.approx(a.l2, rel=1e-12)
    assert b.linf == pytest.approx(a.linf, rel=1e-12)


@settings(max_examples=30, deadline=None)
@given(st.floats(0.5, 4.0), st.floats(1e-3, 10.0))
def test_pair_orders_recover_power_laws(order, constant):
    cells = [25, 50, 100, 200]
    errs = [constant * n ** -order for n in cells]
    assert norms.pair_orders(cells, errs) == pytest.approx([order] * 3, rel=1e-9)
    assert norms.fitted_order(cells, errs) == pytest.approx(order, rel=1e-9)


@settings(max_examples=25, deadline=None)
@given(st.sampled_from(sorted(KERNELS)), st.integers(0, 2 ** 32 - 1), st.floats(0.05, 1.0))
def test_total_is_kept_for_random_data_and_signed_velocities(stem, seed, courant):
    # A flux-form update telescopes on a periodic domain (common practice, no source).
    rng = np.random.default_rng(seed)
    n = 40
    q0 = rng.random(n)
    u = rng.uniform(-1, 1, n + 1)
    u[-1] = u[0]
    run = harness.advance(KERNELS[stem], q0, u, courant, 20)
    assert run.diverged_at is None
    assert harness.relative_drift(q0, run.q) <= 1e-13


@settings(max_examples=25, deadline=None)
@given(st.sampled_from(sorted(KERNELS)), st.integers(0, 2 ** 32 - 1), st.floats(0.05, 1.0))
def test_mirrored_data_with_reversed_flow_gives_the_mirror_image(stem, seed, courant):
    rng = np.random.default_rng(seed)
    n = 32
    q0 = rng.random(n)
    u = rng.uniform(0.2, 1, n + 1)
    u[-1] = u[0]
    k = KERNELS[stem]
    right = harness.advance(k, q0, u, courant, 10).q
    # mirroring the cells reverses the face order, and the flow changes sign
    left = harness.advance(k, q0[::-1].copy(), -u[::-1].copy(), courant, 10).q
    assert np.allclose(right, left[::-1], rtol=0, atol=1e-13)
