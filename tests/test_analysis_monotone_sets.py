"""The monotone set of a linear scheme against an independent computation.

Fact of the trade (common practice, no source): a linear update q_j^{n+1} =
sum_k a_k(c) q_{j+k}^n is monotone exactly where every a_k(c) >= 0. Here the
coefficients come from stepping a unit impulse with the generated numpy kernel
(floating point, not the symbolic update the analysis uses), and are checked on a fine grid of
Courant numbers against the set `check` reports, for random multi-stage stencils.
"""
from __future__ import annotations

import random

import numpy as np
import pytest

from fluxloom.compiler import scheme_from_text
from fluxloom.compiler.analysis.monotone import analyse_monotone
from fluxloom.compiler.analysis.symbol import linearise
from fluxloom.runtime.kernel import load_kernel, run_periodic

CELLS = 48


def impulse_coefficients(kernel, courant: float) -> np.ndarray:
    """a_k(c): one step of a unit impulse with u = 1 (all offsets within the domain)."""
    q = np.zeros(CELLS)
    q[CELLS // 2] = 1.0
    return run_periodic(kernel, q, np.ones(CELLS + 1), courant, 1)


def random_stencil(seed: int) -> str:
    """Even seeds: multi-stage methods on mostly upwind stencils; odd seeds: single-step
    faces whose weights depend on c (monotone sets with ends and islands inside (0, 4])."""
    rng = random.Random(seed)
    if seed % 2:
        a, b, d = rng.randint(-4, 8), rng.randint(-8, 8), rng.randint(-4, 4)
        face = f"q[0] + ({a} + {b} * c) / 8 * (q[1] - q[0]) + {d} / 8 * (q[0] - q[-1])"
        return f"scheme s{seed} {{\n  time euler\n  flux = u * ({face})\n}}\n"
    offsets = sorted(rng.sample(range(-2, 2), rng.randint(2, 3)))
    weights = [rng.randint(0, 6) if k <= 0 else rng.randint(-1, 1) for k in offsets]
    weights[offsets.index(max(k for k in offsets if k <= 0))] += 8 - sum(weights)
    method = rng.choice(["ssp_rk2", "ssp_rk3", "rk4", "ssp_rk10_4"])
    terms = " + ".join(f"{w}/8 * q[{k}]" for w, k in zip(weights, offsets))
    return f"scheme s{seed} {{\n  time {method}\n  flux = u * ({terms})\n}}\n"


@pytest.mark.parametrize("seed", range(16))
def test_monotone_set_matches_impulse_coefficients(seed):
    scheme = scheme_from_text(random_stencil(seed), "s.loom")
    (linear,) = linearise(scheme).smooth
    found = analyse_monotone(linear).monotone
    kernel = load_kernel(scheme, "numpy")
    for courant in np.linspace(0.01, 4.0, 80):
        if any(abs(courant - float(p.lo)) < 1e-9 for p in found.parts if p.is_point):
            continue
        claimed = found.contains(float(courant))
        measured = bool(np.all(impulse_coefficients(kernel, courant) >= -1e-12))
        assert claimed == measured, (seed, courant, [p.text() for p in found.parts])
    for point in (p for p in found.parts if p.is_point and p.lo != 0):
        assert np.all(impulse_coefficients(kernel, float(point.lo)) >= -1e-9)
