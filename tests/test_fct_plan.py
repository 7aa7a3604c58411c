"""Flux correction and the workspace as plan data (compiler/emit/fct_plan.py, workspace.py).

Every target prints FCT from one plan, so the checks here come from outside it:
- the reference stepper (runtime/reference.py), which writes Zalesak's algorithm out
  from the paper on a periodic domain and shares no step, span or offset with the plan;
- Zalesak's own guarantees (ZALESAK in reference_values.py): the corrected solution
  stays inside the bounds of the old and the low-order solutions over each cell and its
  neighbours, and the flux form conserves mass. The low-order solution for the bounds
  is computed here with numpy from the upwind flux, not by any kernel;
- for the workspace, the compiled functions themselves: each target's workspace_size
  against the plan's layout and against the other targets, and each kernel run in a
  work array of exactly that size (numpy: an array of that size, a shorter one fails;
  C and Fortran: guard values on both sides of it stay untouched).
"""
from __future__ import annotations

import zlib

import numpy as np
import pytest
import sympy
from conftest import EXAMPLE_FILES, EXAMPLES
from reference_values import ZALESAK

from fluxloom.compiler import load_scheme, scheme_from_text
from fluxloom.compiler.emit import c as c_emitter
from fluxloom.compiler.emit.fct_plan import (CELLS, FctPlan, LoopStep, Span, element,
                                             fct_plan)
from fluxloom.compiler.emit.plan import FLUX_REGION, plan_kernel, workspace_layout
from fluxloom.compiler.emit.targets import BACKENDS, target
from fluxloom.runtime.kernel import fill_periodic, load_kernel, periodic_faces, run_periodic
from fluxloom.runtime.reference import reference_run

PRECISIONS = ("double", "float")
# One step agrees with the reference to these (as tests/test_agreement.py); STEPS steps
# let round-off grow by up to ten times.
REFERENCE_TOLERANCE = {"double": 1e-11, "float": 2e-4}
STEPS = 8
DT_DX = 0.4


def _random_fct_spec(seed: int, clip: bool) -> str:
    """A corrected scheme nobody has seen: a random linear high-order face over cells
    -1 .. 2 (consistent: g = q_0 for constant q), the upwind low-order flux."""
    rng = np.random.default_rng(seed)
    a, b, d = (sympy.Rational(int(rng.integers(-40, 41)), 40) for _ in range(3))
    face = (f"q[0] + ({a}) * (q[1] - q[0]) + ({b}) * (q[1] - 2*q[0] + q[-1])"
            f" + ({d}) * c * (q[2] - q[1] - q[0] + q[-1])")
    return (f"scheme fct_random_{seed} {{\n  time euler\n  low_flux = u * q[0]\n"
            f"  flux = u * ({face})\n  correct fct\n" + ("  clip -1, 2\n" if clip else "")
            + "}\n")


FCT_SCHEMES = {
    "lw_fct": lambda: load_scheme(EXAMPLES / "lw_fct.loom"),
    "random_31": lambda: scheme_from_text(_random_fct_spec(31, False), "random_31.loom"),
    "random_47_clip": lambda: scheme_from_text(_random_fct_spec(47, True), "random_47.loom"),
}


def _data(name: str, n: int):
    rng = np.random.default_rng(zlib.crc32(name.encode()))
    q = np.where(rng.random(n) < 0.4, 1.0, 0.0) + rng.uniform(-0.2, 0.2, n)
    u = rng.uniform(-1.0, 1.0, n + 1)
    u[rng.random(n + 1) < 0.15] = 0.0
    u[-1] = u[0]
    return q, u


@pytest.mark.parametrize("name", sorted(FCT_SCHEMES))
def test_every_target_agrees_with_the_reference_stepper(name):
    """C, numpy and native Fortran print one plan; the reference shares none of it."""
    scheme = FCT_SCHEMES[name]()
    assert scheme.correct == "fct"
    q, u = _data(name, 61)
    expected = reference_run(scheme, q, u, DT_DX, STEPS)
    for precision in PRECISIONS:
        dtype = np.float64 if precision == "double" else np.float32
        results = {}
        for backend in BACKENDS:
            kernel = load_kernel(scheme, backend, precision)
            results[backend] = run_periodic(kernel, q.astype(dtype), u.astype(dtype), DT_DX,
                                            STEPS).astype(np.float64)
            error = np.max(np.abs(results[backend] - expected)) / np.max(np.abs(expected))
            assert error <= REFERENCE_TOLERANCE[precision], (backend, precision, error)
        for backend in BACKENDS:
            gap = np.max(np.abs(results[backend] - results["numpy"]))
            assert gap <= REFERENCE_TOLERANCE[precision] * np.max(np.abs(expected)), backend


def _low_order_bounds(q: np.ndarray, u: np.ndarray, dt_dx: float):
    """Zalesak's bounds for one periodic step, computed here with numpy: the upwind
    solution q_td, then min and max of q and q_td over each cell and its neighbours."""
    left = np.roll(q, 1)                       # cell j - 1: the left neighbour of face j
    face = u[:-1] * np.where(u[:-1] >= 0, left, q)   # upwind flux on face j (left of cell j)
    q_td = q - dt_dx * (np.roll(face, -1) - face)
    upper, lower = np.maximum(q, q_td), np.minimum(q, q_td)
    most = np.maximum(np.maximum(np.roll(upper, 1), upper), np.roll(upper, -1))
    least = np.minimum(np.minimum(np.roll(lower, 1), lower), np.roll(lower, -1))
    return least, most


def _outside_bounds(kernel, q, u, dt_dx) -> float:
    """How far one step of kernel leaves the bounds (0 when inside)."""
    new = run_periodic(kernel, q, u, dt_dx, 1)
    least, most = _low_order_bounds(q, u, dt_dx)
    return float(max(np.max(new - most), np.max(least - new), 0.0))


@pytest.mark.parametrize("name", ["lw_fct", "random_31"])
def test_corrected_steps_keep_zalesaks_bounds_and_conserve_mass(name):
    """ZALESAK: the corrected solution lies within the local extremes of the old and the
    low-order solutions, and the flux form conserves the total (periodic domain)."""
    scheme = FCT_SCHEMES[name]()
    q, u = _data(name + "bounds", 80)
    unlimited = scheme_from_text(
        "scheme unlimited {\n  time euler\n  flux = " + _high_flux_text(scheme) + "\n}\n",
        "unlimited.loom")
    for backend in ("c", "numpy"):
        kernel = load_kernel(scheme, backend, "double")
        current = q.copy()
        for _ in range(STEPS):
            assert _outside_bounds(kernel, current, u, DT_DX) <= 1e-13, (ZALESAK, backend)
            following = run_periodic(kernel, current, u, DT_DX, 1)
            assert abs(following.sum() - current.sum()) <= 1e-12 * np.abs(current).sum()
            current = following
    # the same check on the high-order flux alone finds the overshoots the correction removes
    assert _outside_bounds(load_kernel(unlimited, "numpy", "double"), q, u, DT_DX) > 1e-3


def _high_flux_text(scheme) -> str:
    text = (EXAMPLES / "lw_fct.loom").read_text() if scheme.name == "lw_fct" else \
        _random_fct_spec(31, False)
    line = next(line for line in text.splitlines() if line.strip().startswith("flux ="))
    return line.split("=", 1)[1].strip()


def test_a_step_that_reads_what_it_writes_elsewhere_is_refused():
    """Slices (numpy) and sequential loops (C, Fortran) agree only when no step reads the
    array it writes at another index: the plan refuses such a step."""
    from fluxloom.compiler.emit import fct_plan as module

    good = fct_plan()
    bad = LoopStep(Span(CELLS, 0, -1), (), (("low_solution", element("low_solution", 1)),),
                   "shifted read of the written array")
    with pytest.raises(AssertionError):
        module._check(FctPlan(good.arrays, good.steps + (bad,)))
    outside = LoopStep(Span(CELLS, -2, 1), (), (("r_plus", element("low_solution", 0)),),
                       "write outside the array")
    with pytest.raises(AssertionError):
        module._check(FctPlan(good.arrays, good.steps + (outside,)))


# ---- the workspace -------------------------------------------------------------------

def _planned(scheme, backend: str, n: int) -> int:
    plan = plan_kernel(scheme)
    layout = workspace_layout(plan, target(backend).emitter().FLUX_SCRATCH)
    return layout.size.at(n, plan.halo, c_emitter.FLUX_BLOCK)


@pytest.mark.parametrize("path", EXAMPLE_FILES, ids=[p.stem for p in EXAMPLE_FILES])
def test_workspace_sizes_follow_the_plan_on_every_target(path):
    """Each target's compiled workspace_size is the plan's layout for that target, and the
    targets differ only by the face fluxes each keeps (FCT: not at all)."""
    scheme = load_scheme(path)
    plan = plan_kernel(scheme)
    for n in (1, 9, 300):
        sizes = {backend: load_kernel(scheme, backend, "double").workspace_size(n)
                 for backend in BACKENDS}
        for backend, size in sizes.items():
            assert size == _planned(scheme, backend, n), (backend, n)
        beyond_fluxes = set()
        for backend, size in sizes.items():
            layout = workspace_layout(plan, target(backend).emitter().FLUX_SCRATCH)
            scratch = (layout.region(FLUX_REGION).total.at(n, plan.halo, c_emitter.FLUX_BLOCK)
                       if layout.has(FLUX_REGION) else 0)
            beyond_fluxes.add(size - scratch)
        assert len(beyond_fluxes) == 1, sizes
        if plan.fct:
            assert set(sizes.values()) == {5 * n + 16}  # the FCT regions: 5 arrays of n + c


EXACT_WORK = ["lw_fct", "centred4_ssp10", "kappa_rk3", "clamped_centred_rk4"]


@pytest.mark.parametrize("example", EXACT_WORK)
def test_kernels_run_in_exactly_their_workspace(example):
    scheme = load_scheme(EXAMPLES / f"{example}.loom")
    rng = np.random.default_rng(zlib.crc32(example.encode()))
    n = 45
    plan = plan_kernel(scheme)
    h = plan.halo
    q_values = fill_periodic(rng.uniform(-1, 1, n + 2 * h), h)
    u_values = periodic_faces(np.append(u0 := rng.uniform(-1, 1, n), u0[0]), plan.face_halo)
    for precision in PRECISIONS:
        dtype = np.float64 if precision == "double" else np.float32
        q, u = q_values.astype(dtype), u_values.astype(dtype)
        results = {}
        for backend in BACKENDS:
            kernel = load_kernel(scheme, backend, precision)
            size = kernel.workspace_size(n)
            assert size == _planned(scheme, backend, n)
            guard = 4096
            buffer = np.full(size + 2 * guard, np.nan, dtype)
            work = buffer[guard:guard + size]
            out = q.copy()
            kernel._run_step(n, q, out, u, dtype(DT_DX), work if size else None)
            assert np.isnan(buffer[:guard]).all() and np.isnan(buffer[guard + size:]).all(), \
                (backend, precision, "wrote outside its workspace")
            results[backend] = out[h:h + n]
            if backend == "numpy" and scheme.correct == "fct":
                short = np.empty(size - 1, dtype)
                with pytest.raises((ValueError, IndexError)):
                    kernel._run_step(n, q, q.copy(), u, dtype(DT_DX), short)
        for backend, values in results.items():
            assert np.allclose(values, results["numpy"], rtol=0,
                               atol=REFERENCE_TOLERANCE[precision]), (backend, precision)
