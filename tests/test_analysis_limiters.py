"""Limiters and TVD against published facts (Sweby 1984 and tests/reference_values.py)."""
from __future__ import annotations

import numpy
import pytest
import sympy

from fluxloom.compiler import load_scheme, scheme_from_text
from fluxloom.compiler.analysis import analyse
from fluxloom.compiler.analysis.limiters import analyse_limiter
from fluxloom.compiler.symbols import R

import reference_values as ref
from conftest import EXAMPLES

r = R
# Bodies as published (reference_values.LIMITER; sources there, all [mem]).
LIMITERS = {name: value.expr(r=r) for name, value in ref.LIMITER.items()}


@pytest.mark.parametrize("name", ref.LIMITERS_IN_SWEBY_REGION.value)
def test_six_limiters_in_sweby_region_and_its_second_order_part(name):
    # reference_values.LIMITERS_IN_SWEBY_REGION (Sweby 1984 [mem]): in the TVD region and its
    # second-order part, with psi(1) = 1.
    facts = analyse_limiter(name, LIMITERS[name])
    assert facts.psi_at_1 == 1
    assert facts.sweby_tvd is True
    assert facts.second_order_region is True
    assert facts.method.startswith("exact")


@pytest.mark.parametrize("name", sorted(ref.LIMITER_SYMMETRIC))
def test_limiter_symmetry(name):
    # reference_values.LIMITER_SYMMETRIC: psi(r)/r = psi(1/r) [pub: Arora and Roe 1997];
    # all symmetric but Koren [mem].
    assert analyse_limiter(name, LIMITERS[name]).symmetric is ref.LIMITER_SYMMETRIC[name].value


def test_van_albada_peak():
    # reference_values.VAN_ALBADA_PEAK [derived]: (1 + sqrt(2))/2 at r = 1 + sqrt(2).
    peak, _, approx = ref.VAN_ALBADA_PEAK.value
    facts = analyse_limiter("vanalbada", LIMITERS["vanalbada"])
    assert sympy.simplify(facts.sup_psi - sympy.sympify(peak)) == 0
    assert abs(float(facts.sup_psi) - approx) < 1e-4


@pytest.mark.parametrize("name", sorted(ref.LIMITER_SLOPES_AT_ONE))
def test_limiter_slopes_at_one(name):
    # reference_values.LIMITER_SLOPES_AT_ONE (from the published bodies, common practice).
    facts = analyse_limiter(name, LIMITERS[name])
    expected = tuple(sympy.Rational(v) for v in ref.LIMITER_SLOPES_AT_ONE[name].value)
    assert (facts.slope_left, facts.slope_right) == expected


def test_exact_verdicts_agree_with_a_dense_numpy_sample():
    # Independent check with numpy: sample each limiter on a dense grid and test Sweby's
    # inequalities directly (common practice, no source).
    grid = numpy.concatenate([numpy.linspace(-5, 0, 501), numpy.linspace(1e-4, 50, 200001)])
    for name, body in LIMITERS.items():
        psi = sympy.lambdify(R, body, modules="numpy")(grid)
        pos = grid > 0
        inside = (numpy.all(psi[~pos] == 0) and numpy.all(psi[pos] >= 0)
                  and numpy.all(psi[pos] <= numpy.minimum(2 * grid[pos], 2) + 1e-12))
        assert inside == analyse_limiter(name, body).sweby_tvd, name


def test_tidewater_in_region_not_symmetric():
    # Our own tidewater limiter (examples/tidewater.loom): in Sweby's region and its second-order
    # part, not symmetric. Independent check with numpy on a grid (common practice, no source).
    scheme = load_scheme(EXAMPLES / "tidewater.loom")
    facts = analyse(scheme).limiters[0]
    assert (facts.sweby_tvd, facts.second_order_region, facts.symmetric) == (True, True, False)
    psi = scheme.limiters[0].lambdified()
    rs = numpy.linspace(0.01, 20, 4000)
    assert numpy.all(psi(rs) <= numpy.minimum(2 * rs, 2))
    assert not numpy.allclose(psi(rs) / rs, psi(1 / rs))


def test_overreach_outside_sweby_region_yet_tvd_on_a_middle_band():
    # reference_values.OVERREACH_TVD (Sweby 1984 [mem]; [derived] from Harten's C):
    # psi = max(0, min(3r, 1), min(r, 3)) is outside the Courant-free region, yet one step is
    # TVD exactly for 1/3 <= c <= 2/3.
    body, (lo, hi) = ref.OVERREACH_TVD.value
    scheme = load_scheme(EXAMPLES / "lw_overreach.loom")
    assert sympy.simplify(scheme.limiters[0].body - sympy.sympify(body, locals={"r": R})) == 0
    result = analyse(scheme)
    assert result.limiters[0].sweby_tvd is False
    main = result.tvd.stable_set.main
    assert (main.lo, main.hi) == (sympy.Rational(lo), sympy.Rational(hi))
    limiter_main = result.limiters[0].tvd_courant.main
    assert (limiter_main.lo, limiter_main.hi) == (sympy.Rational(lo), sympy.Rational(hi))
    assert result.tvd.holds is True
    # c = 1 is the exact shift, TVD too; nothing else in (2/3, oo).
    assert all(p.is_point for p in result.tvd.stable_set.islands)


def test_courant_dependent_condition_checked_with_numpy():
    # reference_values.COURANT_REGION (Sweby 1984 [mem]) evaluated with numpy over a grid of
    # c and r, independent of the analysis code.
    psi = load_scheme(EXAMPLES / "lw_overreach.loom").limiters[0].lambdified()
    rs = numpy.concatenate([numpy.linspace(1e-6, 1, 20001), numpy.linspace(1, 100, 20001)])
    sup_ratio, sup_psi = numpy.max(psi(rs) / rs), numpy.max(psi(rs))
    tvd_set = analyse(load_scheme(EXAMPLES / "lw_overreach.loom")).tvd.stable_set
    for cv in numpy.linspace(0.01, 0.99, 99):
        numpy_says = sup_ratio <= 2 / cv + 1e-9 and sup_psi <= 2 / (1 - cv) + 1e-9
        assert numpy_says == tvd_set.contains(cv), cv


@pytest.mark.parametrize("stem", ["lw_minmod", "lw_superbee", "lw_vanleer", "lw_mc",
                                  "lw_vanalbada", "lw_koren", "tidewater"])
def test_limited_lax_wendroff_tvd_for_courant_up_to_one(stem):
    # reference_values.LIMITED_LW_TVD (Sweby 1984 [mem]).
    result = analyse(load_scheme(EXAMPLES / f"{stem}.loom"))
    main = result.tvd.stable_set.main
    assert (main.lo, main.hi) == ref.LIMITED_LW_TVD.value


def test_ssp_scaling_of_the_tvd_interval():
    # SSP-RK3 keeps the forward-Euler TVD interval (reference_values.SSP_COEFFICIENT, [mem]). For g = q0 + psi/2 (q1 - q0), Harten's C = c(1 + psi(r)/(2r) - psi(r')/2) with
    # van Leer's psi in [0, 2), psi/r in [0, 2): C <= 2c, so TVD for c <= 1/2 (derived by hand
    # from Harten 1983 [mem]).
    result = analyse(load_scheme(EXAMPLES / "vanleer_rk3.loom"))
    main = result.tvd.stable_set.main
    assert (main.lo, main.hi) == (0, sympy.Rational(1, 2))


def test_rk4_tvd_is_undecided():
    # Classical RK4 is not SSP (reference_values.SSP_COEFFICIENT, [mem]): no TVD claim carries
    # over.
    assert ref.SSP_COEFFICIENT["rk4"].value == 0
    text = """scheme v {
  time rk4
  let r = ratio(q[0] - q[-1], q[1] - q[0])
  limiter vanleer(r) = (r + abs(r)) / (1 + abs(r))
  flux = u * (q[0] + vanleer(r) / 2 * (q[1] - q[0]))
}"""
    result = analyse(scheme_from_text(text))
    assert result.tvd.holds is None
    assert "not strong-stability preserving" in result.tvd.reason


def test_inline_minmod_slope_matches_the_named_limiter():
    # minmod written inline as a slope (sign/min/abs) is the same scheme as lw_minmod, so it
    # gets the same verdicts: TVD for 0 <= c <= 1 (reference_values.LIMITED_LW_TVD, [mem]),
    # second order in smooth monotone regions, stable for 0 <= c <= 1.
    text = """scheme inline_minmod {
  flux = u * (q[0] + (1 - c) / 2 * (sign(q[1] - q[0]) + sign(q[0] - q[-1])) / 2
              * min(abs(q[1] - q[0]), abs(q[0] - q[-1])))
}""".replace("\n              ", " ")
    inline = analyse(scheme_from_text(text)).to_json()
    named = analyse(load_scheme(EXAMPLES / "lw_minmod.loom")).to_json()
    for key in ("courant_min", "courant_max"):
        assert inline["tvd"][key] == named["tvd"][key]
        assert inline["stability"][key] == named["stability"][key]
    assert inline["order"]["overall"] == named["order"]["overall"] == 2
    assert "random rational states" in inline["tvd"]["reason"]


# ---- random piecewise-linear limiters: exact verdicts against dense numpy sampling -----

from hypothesis import HealthCheck, given, settings, strategies as st  # noqa: E402

from fluxloom.compiler.symbols import R as _r  # noqa: E402

_coef = st.fractions(min_value=0, max_value=4, max_denominator=4)


@st.composite
def random_limiters(draw):
    """max(0, min(a r, b), min(d r, e)) with small rational a, b, d, e, maybe through abs."""
    a, b, d, e = (sympy.Rational(draw(_coef)) for _ in range(4))
    body = sympy.Max(0, sympy.Min(a * _r, b), sympy.Min(d * _r, e))
    if draw(st.booleans()):
        body = body.subs(_r, sympy.Abs(_r)) * (1 + sympy.sign(_r)) / 2
    return body


@pytest.mark.slow
@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(random_limiters())
def test_exact_sweby_verdict_against_sampling(body):
    # Sweby's region (reference_values.SWEBY_REGION, [mem]) tested directly with numpy; a
    # violation the grid sees must be reported, and a body reported inside must show none.
    grid = numpy.concatenate([numpy.linspace(-5, 0, 1001), numpy.linspace(1e-5, 40, 400001)])
    psi = numpy.broadcast_to(sympy.lambdify(_r, body, modules="numpy")(grid), grid.shape)
    pos = grid > 0
    violation = max(numpy.max(numpy.abs(psi[~pos])),
                    numpy.max(psi[pos] - numpy.minimum(2 * grid[pos], 2)),
                    numpy.max(-psi[pos]))
    facts = analyse_limiter("random", body)
    assert facts.method.startswith("exact")
    if violation > 1e-9:
        assert facts.sweby_tvd is False, body
    if facts.sweby_tvd:
        assert violation <= 1e-12, body
    # psi(1) and symmetry checked the same way
    assert sympy.simplify(facts.psi_at_1 - body.subs(_r, 1)) == 0
    mirrored = numpy.broadcast_to(sympy.lambdify(_r, body, modules="numpy")(1 / grid[pos]),
                                  grid[pos].shape)
    asymmetry = numpy.max(numpy.abs(psi[pos] / grid[pos] - mirrored))
    if asymmetry > 1e-9:
        assert facts.symmetric is False, body
    if facts.symmetric:
        assert asymmetry <= 1e-9, body
