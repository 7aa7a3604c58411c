"""Nonlinear faces without a limiter statement, linearised by differentiation, held against
independent computations: numpy finite differences of the face (at a constant state and
on smooth monotone data), mpmath evaluations of the remainder, published coefficients,
and numpy scans of the amplification factor built from those coefficients."""
from __future__ import annotations

from pathlib import Path

import mpmath
import numpy
import pytest
import sympy
from hypothesis import HealthCheck, given, settings, strategies as st

from fluxloom.compiler import load_scheme, scheme_from_text
from fluxloom.compiler.analysis import analyse
from fluxloom.compiler.analysis.jacobian import VARIANTS, _smooth_state, _symbols, \
    jacobian_linearisation
from fluxloom.compiler.analysis.series import Field
from fluxloom.compiler.symbols import C, offset_of, q

import reference_values as ref

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"

# reference_values.WENO5_LINEAR_FACE (Jiang and Shu 1996 [mem]): the ideal weights combine
# the three parabolic face values into the fifth-order upwind-biased face on q[-2..2].
WENO5_LINEAR = {k: sympy.Rational(v) for k, v in ref.WENO5_LINEAR_FACE.value.items()}

WENO5 = """scheme weno5 {{
  param eps = {eps}
  time {time}
  let b0 = 13/12 * (q[-2] - 2*q[-1] + q[0])^2 + 1/4 * (q[-2] - 4*q[-1] + 3*q[0])^2
  let b1 = 13/12 * (q[-1] - 2*q[0] + q[1])^2 + 1/4 * (q[-1] - q[1])^2
  let b2 = 13/12 * (q[0] - 2*q[1] + q[2])^2 + 1/4 * (3*q[0] - 4*q[1] + q[2])^2
  let a0 = 1/10 / (eps + b0)^2
  let a1 = 6/10 / (eps + b1)^2
  let a2 = 3/10 / (eps + b2)^2
  flux = u * (a0 * (2*q[-2] - 7*q[-1] + 11*q[0]) / 6 + a1 * (-q[-1] + 5*q[0] + 2*q[1]) / 6
              + a2 * (2*q[0] + 5*q[1] - q[2]) / 6) / (a0 + a1 + a2)
}}"""


def weno5(eps="1/1000000", time="ssp_rk3"):
    return scheme_from_text(WENO5.format(eps=eps, time=time).replace("\n              ", " "))


@pytest.mark.parametrize("eps, where", [("1/1000000", "a constant state"),
                                        ("1/10^40", "a constant state"),
                                        ("0", "smooth monotone data")])
def test_weno5_linearises_to_the_fifth_order_upwind_biased_face(eps, where):
    # With eps > 0 the face is differentiable at a constant state and its weights are the
    # ideal ones there; with eps = 0 it is 0/0 at a constant state, and the limit on smooth
    # data gives the same face.
    found = jacobian_linearisation(weno5(eps).bound_face)
    assert found.where == where
    (label, coefficients), = found.schemes
    assert dict(coefficients) == WENO5_LINEAR


def numeric_jacobian(g, point: dict, step: float = 1e-6, complex_step: bool = False) -> dict:
    """dg/dq[k] at q[k] = point[k] with numpy (an independent computation): central
    differences, or with complex_step Im g(q + i h e_k) / h, exact to rounding for faces
    rational in q however sharp their weights (complex-step differentiation, Squire and
    Trapp 1998, SIAM Review 40(1) 110-112; [mem])."""
    symbols = _symbols(g)
    f = sympy.lambdify(symbols, g, modules="numpy")
    base = numpy.array([point[offset_of(s)] for s in symbols],
                       dtype=complex if complex_step else float)
    out = {}
    for i, s in enumerate(symbols):
        e = numpy.zeros_like(base)
        if complex_step:
            e[i] = 1j * step
            out[offset_of(s)] = float(numpy.imag(f(*(base + e)))) / step
        else:
            e[i] = step
            out[offset_of(s)] = (f(*(base + e)) - f(*(base - e))) / (2 * step)
    return out


def test_weno5_jacobian_matches_numpy_finite_differences_at_a_constant_state():
    g = weno5().bound_face
    (_, coefficients), = jacobian_linearisation(g).schemes
    # a step far below sqrt(eps), where the weights have left their ideal values by ~step^2/eps
    reference = numeric_jacobian(g, {k: 0.37 for k in range(-2, 3)}, step=1e-8)
    for k, a in coefficients:
        assert abs(float(a) - reference[k]) < 1e-7


# Stability polynomials written out here (common practice, no source): SSP-RK3 of Shu and
# Osher 1988, J. Comput. Phys. 77:439 [mem], and classical RK4, both R(z) = sum z^n / n!
# truncated after the method's order.
R_OF = {"ssp_rk3": (1, 1, 1 / 2, 1 / 6), "rk4": (1, 1, 1 / 2, 1 / 6, 1 / 24)}


def stability_limit(face: dict, r_coefficients, grid=4001) -> float:
    """Largest c with max_theta |R(c lambda(theta))| <= 1, lambda = -(1 - e^-i theta) g(theta)."""
    theta = numpy.linspace(0, numpy.pi, grid)
    g = sum(float(a) * numpy.exp(1j * k * theta) for k, a in face.items())
    lam = -(1 - numpy.exp(-1j * theta)) * g

    def stable(c):
        z = c * lam
        return numpy.max(numpy.abs(sum(w * z ** n for n, w in enumerate(r_coefficients)))) <= 1 + 1e-12
    lo, hi = 0.0, 4.0
    while hi - lo > 1e-6:
        mid = (lo + hi) / 2
        lo, hi = (mid, hi) if stable(mid) else (lo, mid)
    return lo


@pytest.mark.parametrize("time", ["ssp_rk3", "rk4"])
def test_weno5_stability_is_that_of_its_linearisation(time):
    doc = analyse(weno5(time=time)).to_json()
    assert doc["linear"] is False and doc["linearised_at"] == "a constant state"
    assert "Jacobian" in doc["linearisation"]
    assert doc["verdict_sources"]["stability"] == "linearisation"
    expected = stability_limit(WENO5_LINEAR, R_OF[time])
    # the linearisation's stability, reported as a stand-in (nothing is proven for the
    # nonlinear face itself)
    linearised = doc["stability"]["stand_ins"]
    tolerance = linearised["tolerance"] or 1e-9
    assert abs(linearised["courant_max"] - expected) <= tolerance + 1e-5
    # order: fifth in space (semi-discrete operator), the Runge-Kutta method's in time
    assert doc["order"]["space"] == 5 and doc["order"]["time"] == {"ssp_rk3": 3, "rk4": 4}[time]
    assert doc["order"]["overall"] == doc["order"]["time"]


def test_weno5_example_says_how_it_was_linearised():
    doc = analyse(load_scheme(EXAMPLES / "weno5_rk3.loom")).to_json()
    assert doc["linear"] is False and doc["convergent"]["holds"] is None
    assert doc["modified_equation"] and doc["dispersion"]["label"] == "Jacobian at a constant state"
    assert doc["conservative"] is True


def test_clamped_example_is_linearised_on_smooth_data_to_the_centred_face():
    # The fourth-order centred face (-1, 7, 7, -1)/12 on q[-1..2] (common practice, no source)
    # is what the clamp leaves on smooth monotone data.
    doc = analyse(load_scheme(EXAMPLES / "clamped_centred_rk4.loom")).to_json()
    assert doc["linearised_at"] == "smooth monotone data"
    assert "not differentiable at a constant state" in doc["linearisation"]
    (scheme,) = doc["stability"]["schemes"]
    assert sympy.sympify(scheme["semi_discrete_z"]).equals(
        sympy.sympify("z**2/12 - 2*z/3 + 2/(3*z) - 1/(12*z**2)"))
    assert doc["order"]["space"] == 4 and doc["order"]["overall"] == 4
    expected = stability_limit({-1: -1 / 12, 0: 7 / 12, 1: 7 / 12, 2: -1 / 12}, R_OF["rk4"])
    assert abs(doc["stability"]["stand_ins"]["courant_max"] - expected) <= 1e-4


# ---- random nonlinear faces -------------------------------------------------------------

_small = st.fractions(min_value=-2, max_value=2, max_denominator=5).map(sympy.Rational)
_offset = st.integers(min_value=-2, max_value=1)


def d(k):
    """The difference q[k + 1] - q[k]."""
    return q(k + 1) - q(k)


@st.composite
def smooth_faces(draw):
    """q[0] + a linear part in differences + products of differences + a blend of two
    candidate faces weighted by regularised smoothness indicators."""
    face = q(0) + sum(draw(_small) * d(k) for k in range(-2, 2))
    for _ in range(draw(st.integers(0, 3))):
        face += draw(_small) * d(draw(_offset)) * d(draw(_offset))
    if draw(st.booleans()):
        eps = sympy.Rational(1, draw(st.sampled_from([10, 1000, 10 ** 6])))
        w1 = draw(_small) ** 2 / (eps + d(draw(_offset)) ** 2) ** 2 + sympy.Rational(1, 10)
        w2 = draw(_small) ** 2 / (eps + d(draw(_offset)) ** 2) ** 2 + sympy.Rational(1, 10)
        p1 = q(0) + draw(_small) * d(draw(_offset))
        p2 = q(0) + draw(_small) * d(draw(_offset))
        face += (w1 * p1 + w2 * p2) / (w1 + w2) - q(0)
    return face


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(smooth_faces(), st.floats(min_value=-3, max_value=3))
def test_random_smooth_faces_match_numpy_at_a_constant_state(face, level):
    found = jacobian_linearisation(face)
    assert found is not None and found.where == "a constant state"
    (_, coefficients), = found.schemes
    # central differences err by ~step^2 / eps^2 when eps is 1e-6; the complex step does not
    reference = numeric_jacobian(face, {k: level for k in range(-2, 3)}, step=1e-30,
                                 complex_step=True)
    got = dict(coefficients)
    for k, value in reference.items():
        assert abs(float(got.get(k, 0)) - value) < 1e-6, (face, k)


@st.composite
def clamp_faces(draw):
    """q[0] + a (min or max of scaled differences) + b (a clamp of a difference between two
    others): kinked wherever the clamped differences tie, as at every constant state."""
    a, b = draw(_small), draw(_small)
    scales = [sympy.Rational(draw(st.integers(1, 3)), draw(st.integers(1, 3))) for _ in range(3)]
    first = draw(st.sampled_from([sympy.Min, sympy.Max]))(*(s * d(draw(_offset)) for s in scales))
    lo, mid, hi = (d(draw(_offset)) for _ in range(3))
    clamp = sympy.Max(sympy.Min(lo, hi), sympy.Min(sympy.Max(lo, hi), mid))
    extra = draw(_small) * sympy.Abs(d(draw(_offset)))
    return q(0) + a * first + b * clamp + extra


def smooth_monotone_jacobian(g, increasing: bool, r_below: bool, h: float = 1e-4) -> dict:
    """numpy central differences at q[k] = f(x0 + k h) for a smooth f of the given kind:
    f' > 0 or < 0; f''/f' > 0 makes r = (q[0] - q[-1]) / (q[1] - q[0]) < 1."""
    s = 1.0 if increasing else -1.0
    f = (lambda x: s * numpy.exp(x)) if r_below else (lambda x: -s * numpy.exp(-x))
    point = {k: f(0.3 + k * h) for k in range(-2, 3)}
    return numeric_jacobian(g, point, step=1e-10)


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(clamp_faces())
def test_random_clamps_match_numpy_on_smooth_monotone_data(face):
    qs = _symbols(face)
    for variant in VARIANTS:
        (exact,) = _smooth_state(face, qs, Field("QQ"), variant)
        reference = smooth_monotone_jacobian(face, variant.increasing, variant.r_below)
        for s, value in zip(qs, exact):
            assert abs(float(value) - reference[offset_of(s)]) < 1e-3, (face, variant)


def test_random_clamp_linearisation_names_its_data():
    face = q(0) + sympy.Max(0, sympy.Min(d(0), d(-1))) / 2 + sympy.Min(0, sympy.Max(d(0), d(-1))) / 2
    found = jacobian_linearisation(face)
    assert found.where == "smooth monotone data"
    labels = sorted(label for label, _ in found.schemes)
    # minmod of the two slopes picks q[0] - q[-1] for r < 1 and q[1] - q[0] for r > 1
    assert labels == ["linearised at smooth monotone data (r -> 1 from above)",
                      "linearised at smooth monotone data (r -> 1 from below)"]
    by_label = dict(found.schemes)
    assert dict(by_label["linearised at smooth monotone data (r -> 1 from below)"]) == \
        {-1: sympy.Rational(-1, 2), 0: sympy.Rational(3, 2)}
    assert dict(by_label["linearised at smooth monotone data (r -> 1 from above)"]) == \
        {0: sympy.Rational(1, 2), 1: sympy.Rational(1, 2)}


def test_courant_dependent_clamp_keeps_c_in_its_coefficients():
    # A Lax-Wendroff correction clamped by a minmod of the two slopes, written inline on a
    # five-point stencil (so not of the three-point limiter form): r < 1 gives Beam-Warming,
    # r > 1 Lax-Wendroff (common practice, no source).
    text = ("scheme clampc {\n  flux = u * (q[0] + (1 - c) / 2 * (max(0, min(q[1] - q[0], "
            "q[0] - q[-1])) + min(0, max(q[1] - q[0], q[0] - q[-1]))) + 0 * q[2] + 0 * q[-2])\n}")
    found = jacobian_linearisation(scheme_from_text(text).bound_face)
    faces = {label.split("(")[-1]: dict(coefficients) for label, coefficients in found.schemes}
    assert sympy.simplify(faces["r -> 1 from above)"][1] - (1 - C) / 2) == 0
    assert sympy.simplify(faces["r -> 1 from below)"][-1] + (1 - C) / 2) == 0


# ---- the remainder's order against mpmath ------------------------------------------------

def measured_remainder_order(g, coefficients: dict) -> float:
    """Slope of |R(x1) - R(x2)| against dx with R = g - sum a_k q[k] on f = exp(sin x), 60 digits."""
    symbols = _symbols(g)
    f = sympy.lambdify(symbols, g, modules="mpmath")
    with mpmath.workdps(60):
        def remainder(x, h):
            values = [mpmath.exp(mpmath.sin(x + offset_of(s) * h)) for s in symbols]
            return f(*values) - sum(coefficients.get(offset_of(s), 0) * v
                                    for s, v in zip(symbols, values))

        def size(h):
            return abs(remainder(mpmath.mpf("0.4"), h) - remainder(mpmath.mpf("0.9"), h))
        h1, h2 = mpmath.mpf("1e-4"), mpmath.mpf("1e-5")
        return float(mpmath.log(size(h1) / size(h2)) / mpmath.log(h1 / h2))


@pytest.mark.parametrize("text, cap", [
    ("(q[0] + q[1]) / 2 + (q[1] - q[0]) * (q[0] - q[-1])", 2),
    ("q[0] + (q[1] - q[0])^2 / (abs(q[1] - q[0]) + abs(q[0] - q[-1]))", 3),
    ("q[0] + (q[1] - q[0]) / 2 + (q[1] - q[0])^3", 3),
])
def test_remainder_order_caps_the_claimed_order(text, cap):
    face = scheme_from_text(f"scheme r {{\n  time ssp_rk3\n  flux = u * ({text})\n}}").bound_face
    found = jacobian_linearisation(face)
    assert found.order_cap == cap
    (_, coefficients), *_ = found.schemes
    assert round(measured_remainder_order(face, dict(coefficients))) == cap


@pytest.mark.parametrize("eps, cap", [("1/1000000", 7), ("0", 5)])
def test_weno5_remainder_order_against_mpmath(eps, cap):
    face = weno5(eps).bound_face
    found = jacobian_linearisation(face)
    assert found.order_cap == cap
    assert round(measured_remainder_order(face, WENO5_LINEAR)) == cap


def test_a_quadratic_remainder_lowers_the_claimed_order():
    # kappa = 1/3 (third order with SSP-RK3) plus a product of differences: the face is only
    # second order on smooth data, and the analysis must not claim the third.
    text = ("scheme k3q {\n  time ssp_rk3\n  flux = u * (q[0] + (q[1] - q[0]) / 3 + (q[0] - q[-1]) / 6"
            " + (q[1] - q[0]) * (q[0] - q[-1]))\n}")
    doc = analyse(scheme_from_text(text)).to_json()
    assert doc["order"]["overall"] == 2 and "O(dx^2)" in doc["order"]["note"]


def test_level_dependent_face_claims_no_order():
    doc = analyse(scheme_from_text("scheme lv {\n  flux = u * (q[0] + q[0] * (q[1] - q[0]))\n}")).to_json()
    assert len(doc["stability"]["schemes"]) == 2 and doc["order"]["overall"] is None


# ---- verify holds the linearised prediction, and catches wrong ones --------------------

def test_verify_measures_the_linearisation_and_rejects_wrong_claims():
    import copy

    from fluxloom.runtime import harness, profiles
    from fluxloom.runtime.findings import AGREE, DISAGREE, Prediction
    from fluxloom.runtime.kernel import load_kernel
    from fluxloom.runtime.rules import convergence_finding, stability_finding

    scheme = load_scheme(EXAMPLES / "weno5_rk3.loom")
    kernel = load_kernel(scheme, "numpy")
    doc = analyse(scheme).to_json()
    right = Prediction.from_document(doc)
    assert right.linearised_at_constant_state and right.order == 3
    assert right.spectral and right.probe_amplitude == 1e-30
    # stability: small random data about a constant state see the linearisation
    sweep = harness.stability_sweep(kernel, right.probe_courants(spectral=True), 1.0,
                                    linear=True, amplitude=right.probe_amplitude)
    assert stability_finding(sweep, right).verdict == AGREE
    wide = copy.deepcopy(doc)
    top = wide["stability"]["courant_max"] + 0.1
    for part in [wide["stability"], *wide["stability"]["schemes"]]:
        part.update(courant_max=top, courant_max_exact=None)
    too_wide = Prediction.from_document(wide)
    sweep = harness.stability_sweep(kernel, too_wide.probe_courants(spectral=True), 1.0,
                                    linear=True, amplitude=too_wide.probe_amplitude)
    assert stability_finding(sweep, too_wide).verdict == DISAGREE
    # order on the sine: third (SSP-RK3), not the fifth of the reconstruction alone
    conv = harness.convergence(kernel, profiles.SINE, 0.5, cells=(50, 100, 200))
    assert convergence_finding(conv, profiles.SINE, right, 0.5, 1e-16).verdict == AGREE
    over = copy.deepcopy(doc)
    over["order"].update(overall=4, at_courant=4)
    assert convergence_finding(conv, profiles.SINE, Prediction.from_document(over), 0.5,
                               1e-16).verdict == DISAGREE


@pytest.mark.slow
def test_linearisation_reads_the_same_under_any_hash_seed(tmp_path):
    # Same spec, same report: two interpreters with different hash seeds agree (the
    # branch bookkeeping and the order of the linear schemes do not depend on hashing).
    from conftest import outputs_under_hash_seeds

    script = ("import json, sys\n"
              "from fluxloom.compiler import load_scheme\n"
              "from fluxloom.compiler.analysis import analyse\n"
              "doc = analyse(load_scheme(sys.argv[1])).to_json()\n"
              "print(json.dumps({k: doc[k] for k in ('linearisation', 'linearised_at', 'order',"
              " 'modified_equation_by_scheme', 'stability')}, sort_keys=True))\n")
    spec = tmp_path / "two.loom"  # two linear schemes (r -> 1 from below and from above)
    spec.write_text("scheme two {\n  time ssp_rk3\n  flux = u * (q[0] + max(0, min(q[1] - q[0], "
                    "q[0] - q[-1], q[-1] - q[-2])) / 2 + min(0, max(q[1] - q[0], q[0] - q[-1], "
                    "q[-1] - q[-2])) / 2)\n}\n")
    assert len(outputs_under_hash_seeds(script, [str(spec)], ("1", "4242"))) == 1
