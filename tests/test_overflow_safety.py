"""Finite input gives finite output: every bundled example, both back ends, both
precisions, on fields whose magnitudes run from subnormal numbers to 1e300 (1e30 in
single precision): tails, steps, spikes and mixtures.

Fact of the trade (common practice, no source): a conservative update of finite data
with finite fluxes is finite; a NaN or infinity out of finite data is a kernel fault.
Rational limiters used to give one (r = a/b overflows where b is tiny beside a, and
inf/inf follows); compiler/emit/limited.py evaluates them from a and b instead.
"""
from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from conftest import EXAMPLE_FILES
from fluxloom.compiler import load_scheme
from fluxloom.runtime.kernel import load_kernel, run_periodic

PRECISIONS = {"double": (np.float64, -323, 300), "float": (np.float32, -45, 30)}
CELLS = 24
STEPS = 3
SHAPES = ("tail", "steps", "spikes", "mixed")


def field(shape: str, seed: int, low: int, high: int, dtype) -> np.ndarray:
    """One profile on CELLS cells with decimal exponents in [low, high]."""
    rng = np.random.default_rng(seed)
    x = np.arange(CELLS)
    if shape == "tail":  # a front of 10^high decaying to 10^low (a tracer's tail)
        exponent = np.where(x < CELLS // 3, high, np.linspace(high, low, CELLS))
        values = 10.0 ** exponent
    elif shape == "steps":  # plateaus of unrelated magnitudes and signs
        levels = rng.choice([-1.0, 1.0], 4) * 10.0 ** rng.uniform(low, high, 4)
        values = levels[x * 4 // CELLS]
    elif shape == "spikes":  # zeros (or a tiny floor) with isolated spikes
        values = np.where(rng.random(CELLS) < 0.2, 10.0 ** high, 10.0 ** low * rng.random())
    else:  # every cell its own magnitude and sign
        values = rng.choice([-1.0, 1.0], CELLS) * 10.0 ** rng.uniform(low, high, CELLS)
    with np.errstate(under="ignore", over="ignore"):
        return values.astype(dtype)


def velocities(seed: int, dtype) -> np.ndarray:
    """Face Courant numbers |u| dt/dx in {0} and [1e-3, 1], either sign; periodic."""
    rng = np.random.default_rng(seed + 1)
    u = rng.choice([-1.0, 1.0], CELLS + 1) * rng.uniform(1e-3, 1.0, CELLS + 1)
    u[rng.random(CELLS + 1) < 0.15] = 0.0
    u[-1] = u[0]
    return u.astype(dtype)


SCHEMES = {path.stem: load_scheme(path) for path in EXAMPLE_FILES}


@pytest.mark.parametrize("name", sorted(SCHEMES))
@settings(max_examples=8, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(shape=st.sampled_from(SHAPES), seed=st.integers(0, 2 ** 32 - 1),
       span=st.tuples(st.floats(0.0, 1.0), st.floats(0.0, 1.0)))
def test_finite_data_gives_finite_output(name, shape, seed, span):
    for precision, (dtype, least, most) in PRECISIONS.items():
        low = int(least + (most - least) * min(span))
        high = int(least + (most - least) * max(span))
        q = field(shape, seed, low, high, dtype)
        u = velocities(seed, dtype)
        for backend in ("numpy", "c"):
            kernel = load_kernel(SCHEMES[name], backend, precision)
            with np.errstate(over="raise", invalid="raise", divide="raise", under="ignore"):
                out = run_periodic(kernel, q, u, 1.0, STEPS)
            assert np.all(np.isfinite(out)), (backend, precision, shape, low, high)
