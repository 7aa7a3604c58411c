"""Independent check of the von Neumann analysis with numpy.

For each linear example the update matrix on a periodic grid is built by
evaluating the IR's face expression face by face (sympy.lambdify) and staging
it with Runge-Kutta formulas written out here; its eigenvalues are then
compared with |G| from the analysis on the same theta grid, and the largest
stable Courant number found from the eigenvalues is compared with check's.
Nothing here calls the analysis' own symbol code.
"""
from __future__ import annotations

import numpy
import pytest
import sympy

from fluxloom.compiler import load_scheme
from fluxloom.compiler.analysis import analyse
from fluxloom.compiler.symbols import C, offset_of

from conftest import EXAMPLE_FILES

LINEAR = [p for p in EXAMPLE_FILES if not load_scheme(p).limited]


def face_values(scheme):
    """A numpy function: (q, c) -> face values g_{j+1/2} for u > 0 on a periodic grid."""
    g = scheme.bound_face
    symbols = sorted((s for s in g.free_symbols if offset_of(s) is not None), key=offset_of)
    f = sympy.lambdify([C, *symbols], g, modules="numpy")
    offsets = [offset_of(s) for s in symbols]

    def faces(q, c):
        return numpy.broadcast_to(f(c, *[numpy.roll(q, -k) for k in offsets]), q.shape)
    return faces


# Classical Runge-Kutta stages (Butcher tableaux; common practice, no source).
def rk_step(rhs, q, dt, method):
    if method == "euler":
        return q + dt * rhs(q)
    if method == "ssp_rk2":
        q1 = q + dt * rhs(q)
        return 0.5 * q + 0.5 * (q1 + dt * rhs(q1))
    if method == "ssp_rk3":
        q1 = q + dt * rhs(q)
        q2 = 0.75 * q + 0.25 * (q1 + dt * rhs(q1))
        return q / 3 + 2 / 3 * (q2 + dt * rhs(q2))
    if method == "rk4":
        k1 = rhs(q)
        k2 = rhs(q + dt / 2 * k1)
        k3 = rhs(q + dt / 2 * k2)
        k4 = rhs(q + dt * k3)
        return q + dt / 6 * (k1 + 2 * k2 + 2 * k3 + k4)
    raise AssertionError(method)


def one_step(scheme, q, c):
    """q after one step at Courant number c (u > 0, dx = 1, u = 1, dt = c)."""
    faces = face_values(scheme)

    def rhs(v):
        f = faces(v, c)
        return -(f - numpy.roll(f, 1))
    return rk_step(rhs, q, c, scheme.time)


def update_matrix(scheme, c, n):
    return numpy.column_stack([one_step(scheme, numpy.eye(n)[:, i], c) for i in range(n)])


def eigen_growth(scheme, c, n=512):
    """max |eigenvalue| of the circulant update, from the FFT of its first column."""
    column = one_step(scheme, numpy.eye(n)[:, 0], c)
    return numpy.max(numpy.abs(numpy.fft.fft(column)))


@pytest.mark.parametrize("path", LINEAR, ids=[p.stem for p in LINEAR])
def test_eigenvalue_moduli_match_abs_g(path):
    scheme = load_scheme(path)
    analysis = analyse(scheme)
    g = analysis.linearisation.smooth[0].amplification
    n = 48
    thetas = 2 * numpy.pi * numpy.arange(n) / n
    for c in (0.3, 0.8, 1.5):
        eig = numpy.sort(numpy.abs(numpy.linalg.eigvals(update_matrix(scheme, c, n))))
        g_of = sympy.lambdify(sympy.Symbol("z"), g.subs(C, c), modules="numpy")
        predicted = numpy.sort(numpy.abs(numpy.broadcast_to(g_of(numpy.exp(1j * thetas)),
                                                            thetas.shape)))
        assert numpy.allclose(eig, predicted, rtol=1e-9, atol=1e-9), c


@pytest.mark.parametrize("path", LINEAR, ids=[p.stem for p in LINEAR])
def test_stability_limit_from_eigenvalues(path):
    scheme = load_scheme(path)
    doc = analyse(scheme).to_json()["stability"]

    def stable(c):
        return eigen_growth(scheme, c) <= 1 + 1e-12

    steps = numpy.arange(1, 801) * 0.005
    first_bad = next((c for c in steps if not stable(c)), None)
    if doc["kind"] == "unstable":
        assert first_bad is not None and first_bad <= 0.005 + 1e-12
        return
    assert first_bad is not None, "every example here is conditionally stable"
    lo, hi = first_bad - 0.005, first_bad
    while hi - lo > 1e-7:
        mid = (lo + hi) / 2
        lo, hi = (mid, hi) if stable(mid) else (lo, mid)
    assert doc["courant_min"] == 0
    assert abs(lo - doc["courant_max"]) < 1e-3
