"""Independent check of the von Neumann analysis with numpy.

For each linear example the update matrix on a periodic grid is built by
evaluating the IR's face expression face by face (sympy.lambdify) and staging
it with the Runge-Kutta formulas as published (tests/reference_values.py); its eigenvalues are then
compared with |G| from the analysis on the same theta grid, and the largest
stable Courant number found from the eigenvalues is compared with check's.
Nothing here calls the analysis' own symbol code.
"""
from __future__ import annotations

import os

import numpy
import pytest
import sympy

from fluxloom.compiler import load_scheme
from fluxloom.compiler.analysis import analyse
from fluxloom.compiler.symbols import C, offset_of

from conftest import EXAMPLE_FILES
from reference_values import published_step

LINEAR = [p for p in EXAMPLE_FILES if not load_scheme(p).limited]


_FACES = {}


def face_values(scheme):
    """A numpy function: (q, c) -> face values g_{j+1/2} for u > 0 on a periodic grid."""
    if scheme.fingerprint not in _FACES:
        _FACES[scheme.fingerprint] = _face_values(scheme)
    return _FACES[scheme.fingerprint]


def _face_values(scheme):
    g = scheme.bound_face
    symbols = sorted((s for s in g.free_symbols if offset_of(s) is not None), key=offset_of)
    f = sympy.lambdify([C, *symbols], g, modules="numpy")
    offsets = [offset_of(s) for s in symbols]

    def faces(q, c):
        return numpy.broadcast_to(f(c, *[numpy.roll(q, -k) for k in offsets]), q.shape)
    return faces


def one_step(scheme, q, c):
    """q after one step at Courant number c (u > 0, dx = 1, u = 1, dt = c)."""
    faces = face_values(scheme)

    def rhs(v):
        f = faces(v, c)
        return -(f - numpy.roll(f, 1))
    return published_step(scheme.time, q, lambda y: c * rhs(y), lambda a, b: a / b)


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


# ---- random linear schemes: the exact stability set against eigenvalues -----------------

from hypothesis import HealthCheck, given, settings, strategies as st  # noqa: E402

from fluxloom.compiler import scheme_from_text  # noqa: E402
from fluxloom.compiler.analysis.stability import stable_set  # noqa: E402
from fluxloom.compiler.analysis.symbol import linearise  # noqa: E402

small = st.fractions(min_value=-1, max_value=1, max_denominator=6)


@st.composite
def linear_specs(draw):
    """A consistent linear face on offsets -1, 0, 1 (weights sum to 1), maybe c-dependent."""
    method = draw(st.sampled_from(["euler", "ssp_rk2", "ssp_rk3", "rk4"]))
    a_m1, a_1 = draw(small), draw(small)
    b_m1, b_1 = (draw(small), draw(small)) if method == "euler" else (0, 0)
    face = (f"({a_m1} + ({b_m1}) * c) * q[-1] + (1 - ({a_m1}) - ({a_1}) - ({b_m1}) * c - ({b_1}) * c) * q[0]"
            f" + ({a_1} + ({b_1}) * c) * q[1]")
    if method != "euler":
        face = face.replace(" * c", " * 0")
    return f"scheme random_linear {{\n  time {method}\n  flux = u * ({face})\n}}"


@pytest.mark.slow
@settings(max_examples=int(os.environ.get("FLUXLOOM_HYPOTHESIS_EXAMPLES", "20")), deadline=None,
          suppress_health_check=[HealthCheck.too_slow])
@given(linear_specs())
def test_exact_stability_set_matches_eigenvalues(text):
    scheme = scheme_from_text(text)
    exact = stable_set(linearise(scheme).smooth[0])
    ends = [float(v) for p in exact.parts for v in (p.lo, p.hi) if v.is_finite]
    for c in numpy.arange(0.01, 3.0, 0.01):
        if any(abs(c - e) < 2e-3 for e in ends):
            continue
        eig_stable = eigen_growth(scheme, c, 256) <= 1 + 1e-12
        if eig_stable and not exact.contains(c):
            eig_stable = eigen_growth(scheme, c, 8192) <= 1 + 1e-12  # a narrow band of growth
        assert eig_stable == exact.contains(c), (text, c)
