"""Generated sweeps that hold the edges (NAME_sweep_edges in C, sweep(low_edge=...) in numpy,
Kernel.sweep(edges=...)): every intermediate stage's ghost cells filled by the edge rules
inside the sweep, and the thickness-weighted form for multi-stage schemes.

Independent references: runtime/edge_sweeps.EdgeSweep (the 1-D kernel's stage function
called line by line with the boundary helpers run in Python between the stages, a path
that shares no sweep code), an own numpy SSP-RK3 stepper of the thickness-weighted
update written here, exact telescoping sums (conservation) and the continuity equation
(a constant tracer stays constant when h changes by the same fluxes: common practice,
no source).
"""
from __future__ import annotations

import numpy as np
import pytest

from fluxloom.compiler import load_scheme, scheme_from_text
from fluxloom.runtime.boundaries import Edge, fill_axis
from fluxloom.runtime.edge_sweeps import EdgeSweep, extend_faces
from fluxloom.runtime.kernel import KernelError, load_kernel

from conftest import EXAMPLE_FILES, EXAMPLES

WALLS = (Edge("wall"), Edge("wall"))
PERIODIC = (Edge("periodic"), Edge("periodic"))
# (axis 0 ends, axis 1 ends): every kind at both sides of some axis
EDGE_SETS = (
    (WALLS, (Edge("outflow"), Edge("inflow", 0.35))),
    ((Edge("inflow", 0.8), Edge("outflow")), WALLS),
    ((Edge("outflow"), Edge("wall")), PERIODIC),
)


def _case(sweep: EdgeSweep, rng, shape, axis, edges):
    q = sweep.padded(rng.random(shape).astype(sweep.dtype))
    fill_axis(sweep.fills, q, axis, sweep.halo, edges)
    faces = list(shape)
    faces[axis] += 1
    u = extend_faces(sweep.fills, rng.standard_normal(faces) * 0.6, axis, sweep.face_halo,
                     edges)
    return q, np.ascontiguousarray(u, sweep.dtype)


@pytest.mark.parametrize("backend", ["c", "numpy"])
@pytest.mark.parametrize("path", EXAMPLE_FILES, ids=[p.stem for p in EXAMPLE_FILES])
def test_generated_sweep_holds_the_edges_as_the_stage_by_stage_reference(path, backend):
    scheme = load_scheme(path)
    kernel, reference = load_kernel(scheme, backend), EdgeSweep(scheme, backend)
    rng = np.random.default_rng(17)
    for shape in ((13,), (6, 11)):
        for edges in EDGE_SETS:
            for axis in range(len(shape)):
                q, u = _case(reference, rng, shape, axis, edges)
                expected = reference.interior(reference(axis, q.copy(), u, 0.3, edges))
                got = reference.interior(kernel.sweep(q, u, 0.3, axis, edges=edges[axis]))
                np.testing.assert_allclose(got, expected, rtol=1e-13, atol=1e-14)


@pytest.mark.parametrize("backend", ["c", "numpy"])
def test_without_edges_the_stages_are_periodic_and_differ_at_a_wall(backend):
    # the check above has teeth: a multi-stage scheme's periodic stages differ from the
    # walls' near them, and the plain sweep equals the reference with periodic ends
    scheme = load_scheme(EXAMPLES / "vanleer_rk3.loom")
    kernel, reference = load_kernel(scheme, backend), EdgeSweep(scheme, backend)
    rng = np.random.default_rng(3)
    edges = (WALLS,)
    q, u = _case(reference, rng, (20,), 0, edges)
    walled = reference.interior(reference(0, q.copy(), u, 0.4, edges))
    plain = reference.interior(kernel.sweep(q, u, 0.4, 0))
    assert np.max(np.abs(plain - walled)) > 1e-3
    fill_axis(reference.fills, q, 0, reference.halo, (PERIODIC,))
    periodic = reference.interior(reference(0, q.copy(), u, 0.4, (PERIODIC,)))
    np.testing.assert_allclose(reference.interior(kernel.sweep(q, u, 0.4, 0)), periodic,
                               rtol=1e-13, atol=1e-14)


@pytest.mark.parametrize("stem", ["vanleer_rk3", "centred4_ssp10", "lw_fct", "lw_vanleer"])
def test_c_and_numpy_edge_sweeps_agree_with_tracers_and_inflow_slabs(stem):
    scheme = load_scheme(EXAMPLES / f"{stem}.loom")
    c_kernel, np_kernel = load_kernel(scheme, "c"), load_kernel(scheme, "numpy")
    rng = np.random.default_rng(8)
    h, shape = c_kernel.halo, (5, 12)
    q = rng.random((3,) + tuple(s + 2 * h for s in shape))
    for axis in (0, 1):
        slab_shape = list(q.shape)
        slab_shape[1 + axis] = h
        inflow = rng.random(slab_shape)              # per tracer, per line, per ghost cell
        ends = (Edge("inflow", inflow), Edge("wall"))
        faces = list(shape)
        faces[axis] += 1
        u = rng.standard_normal(faces) * 0.5
        if c_kernel.face_halo:
            u = extend_faces(EdgeSweep(scheme, "numpy").fills, u, axis, c_kernel.face_halo,
                             tuple(ends if a == axis else PERIODIC for a in range(2)))
        widths = {} if scheme.correct else {"dt_dx": rng.uniform(0.2, 0.5, shape[axis] + 2)}
        d = widths.get("dt_dx", 0.35)
        a = c_kernel.sweep(q, u, d, axis, edges=ends)
        b = np_kernel.sweep(q, u, d, axis, edges=ends)
        np.testing.assert_allclose(a, b, rtol=1e-13, atol=1e-14)
        apart = np.stack([c_kernel.sweep(np.ascontiguousarray(q[t]), u, d, axis,
                                         edges=(Edge("inflow", inflow[t]), Edge("wall")))
                          for t in range(3)])
        assert np.array_equal(a, apart)


def test_edges_are_checked():
    kernel = load_kernel(load_scheme(EXAMPLES / "vanleer_rk3.loom"), "c")
    h = kernel.halo
    q = np.zeros((4, 8 + 2 * h))
    u = np.ones((4, 9))
    with pytest.raises(Exception, match="periodic partner"):
        kernel.sweep(q, u, 0.1, 1, halo=(0, h), edges=(Edge("periodic"), Edge("wall")))
    with pytest.raises(KernelError, match="inflow end needs"):
        kernel.sweep(q, u, 0.1, 1, halo=(0, h), edges=(Edge("inflow"), Edge("wall")))
    with pytest.raises(KernelError, match="broadcast"):
        kernel.sweep(q, u, 0.1, 1, halo=(0, h), edges=(Edge("inflow", np.ones(5)),
                                                        Edge("wall")))
    with pytest.raises(KernelError, match="Edges"):
        kernel.sweep(q, u, 0.1, 1, halo=(0, h), edges=("wall", "wall"))


# ---- thickness weighting through the stages ------------------------------------------

RANDOM_LINEAR_RK3 = """
scheme edge_linear_rk3 {
  time ssp_rk3
  flux = u * (q[0] + 0.3125 * (q[1] - q[0]) - 0.125 * (q[0] - q[-1]))
}
"""


def _own_weighted_rk3(q, h_old, h_new, U, d):
    """SSP-RK3 (Shu and Osher 1988, J. Comput. Phys. 77:439, eq. 2.18; [mem]) of the
    mass m = h q and the thickness h on a periodic line, dm/dt = -(F+ - F-)/dx,
    dh/dt = -(U+ - U-)/dx with F = U g(q) and g the spec's face value in the upwind frame;
    each stage's tracer is its mass over its thickness, the last one's over h_new."""
    def flux(v):
        padded = np.concatenate((v[-2:], v, v[:2]))
        left, right = padded[1:-2], padded[2:-1]
        behind, ahead = padded[0:-3], padded[3:]
        up = np.where(U >= 0, left, right)
        down = np.where(U >= 0, right, left)
        back = np.where(U >= 0, behind, ahead)
        return U * (up + 0.3125 * (down - up) - 0.125 * (up - back))

    def rate(f):
        return -d * (f[1:] - f[:-1])

    m0, h0 = h_old * q, h_old
    m1, h1 = m0 + rate(flux(q)), h0 + rate(U)
    m2 = 0.75 * m0 + 0.25 * (m1 + rate(flux(m1 / h1)))
    h2 = 0.75 * h0 + 0.25 * (h1 + rate(U))
    m3 = m0 / 3 + 2 / 3 * (m2 + rate(flux(m2 / h2)))
    return m3 / h_new


def _periodic_line(values, h):
    return np.concatenate((values[-h:], values, values[:h]))


@pytest.mark.parametrize("backend", ["c", "numpy"])
def test_multi_stage_thickness_form_against_an_own_weighted_rk3(backend):
    kernel = load_kernel(scheme_from_text(RANDOM_LINEAR_RK3), backend)
    rng = np.random.default_rng(41)
    n, h = 48, kernel.halo
    widths = rng.uniform(0.5, 1.5, n)
    d = 0.15 / widths
    U = rng.standard_normal(n + 1) * 0.6
    U[-1] = U[0]
    h_old = rng.uniform(1.0, 2.0, n)
    h_new = h_old - d * (U[1:] - U[:-1])           # continuity with the same mass fluxes
    assert h_new.min() > 0
    q = rng.random(n)
    got = kernel.sweep(_periodic_line(q, h), U, _periodic_line(0.15 / widths, 1), 0,
                       h_old=_periodic_line(h_old, h), h_new=_periodic_line(h_new, h))
    np.testing.assert_allclose(got[h:h + n], _own_weighted_rk3(q, h_old, h_new, U, d),
                               rtol=1e-13, atol=1e-14)


@pytest.mark.parametrize("backend", ["c", "numpy"])
@pytest.mark.parametrize("stem", ["vanleer_rk3", "centred_rk4", "kappa_ws3"])
def test_multi_stage_thickness_conserves_mass_and_keeps_a_constant(backend, stem):
    # sum h dx q conserved to round-off (the fluxes telescope; walls pass none), and a
    # constant tracer stays constant when h changes by the same mass fluxes (common
    # practice, no source); 2-D, the thickness varying across lines too
    scheme = load_scheme(EXAMPLES / f"{stem}.loom")
    kernel, fills = load_kernel(scheme, backend), EdgeSweep(scheme, "numpy").fills
    rng = np.random.default_rng(5)
    h, shape = kernel.halo, (6, 40)
    widths = rng.uniform(0.5, 1.5, shape[1])
    d = 0.2 / np.concatenate((widths[:1], widths, widths[-1:]))
    U = rng.standard_normal((shape[0], shape[1] + 1)) * 0.5
    U[:, 0] = U[:, -1] = 0.0                       # walls at both ends
    thick = np.zeros((2, shape[0], shape[1] + 2 * h))
    thick[0, :, h:h + shape[1]] = rng.uniform(1.0, 2.0, shape)
    thick[1, :, h:h + shape[1]] = thick[0, :, h:h + shape[1]] - d[1:-1] * (U[:, 1:] - U[:, :-1])
    assert thick[1][:, h:h + shape[1]].min() > 0
    edges = (PERIODIC, WALLS)
    for array in thick:
        fill_axis(fills, array, 1, h, edges)
    q = np.zeros((shape[0], shape[1] + 2 * h))
    q[:, h:h + shape[1]] = rng.random(shape)
    fill_axis(fills, q, 1, h, edges)
    out = kernel.sweep(q, U, d, 1, halo=(0, h), h_old=thick[0], h_new=thick[1], edges=WALLS)
    inside = (slice(None), slice(h, h + shape[1]))
    before = (thick[0][inside] * widths * q[inside]).sum(axis=1)
    after = (thick[1][inside] * widths * out[inside]).sum(axis=1)
    np.testing.assert_allclose(after, before, rtol=1e-13)
    constant = np.full_like(q, 0.7)
    kept = kernel.sweep(constant, U, d, 1, halo=(0, h), h_old=thick[0], h_new=thick[1],
                        edges=WALLS)
    np.testing.assert_allclose(kept[inside], 0.7, rtol=1e-13)


@pytest.mark.parametrize("backend", ["c", "numpy"])
def test_verify_boundary_cases_through_the_generated_sweep_match_the_reference(backend):
    # verify --boundary runs BoundarySweep; the same cases through the stage-by-stage
    # reference give the same measurements to round-off (a multi-stage scheme, walls in
    # 2-D and an inflow/outflow channel)
    from fluxloom.runtime import boundary_cases as cases
    from fluxloom.runtime.boundary_sweep import BoundarySweep

    scheme = load_scheme(EXAMPLES / "vanleer_rk3.loom")
    generated, reference = BoundarySweep(scheme, backend), EdgeSweep(scheme, backend)
    pairs = [(cases.basin_2d(generated, 0.5, "strang", n=10),
              cases.basin_2d(reference, 0.5, "strang", n=10)),
             (cases.channel_1d(generated, 0.5, -1, n=40),
              cases.channel_1d(reference, 0.5, -1, n=40))]
    for ours, theirs in pairs:
        for field in ("mass_drift", "image_mismatch", "exit_difference", "reflection",
                      "remaining", "min", "max"):
            a, b = getattr(ours, field), getattr(theirs, field)
            assert (a is None) == (b is None)
            if a is not None:
                assert abs(a - b) <= 1e-12 * max(1.0, abs(b)), field
    assert generated.calls > 0 and reference.calls > 0
