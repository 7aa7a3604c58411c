"""The analysis against published values: amplification factors, stability
limits, modified-equation coefficients and Runge-Kutta facts.

Every value comes from tests/reference_values.py, which names its source and says
whether the citation is recalled from memory [mem] or the value derived [derived].
"""
from __future__ import annotations

import pytest
import sympy

from fluxloom.compiler import load_scheme, scheme_from_text
from fluxloom.compiler.analysis import analyse
from fluxloom.compiler.analysis.consistency import DX, U
from fluxloom.compiler.analysis.stability import stable_set
from fluxloom.compiler.analysis.symbol import S, linearise
from fluxloom.compiler.analysis.timemethods import Z, imaginary_axis_limit, stability_polynomial
from fluxloom.compiler.symbols import C

import reference_values as ref
from conftest import EXAMPLES

c = C
y = sympy.Symbol("y", real=True)


def linear(stem):
    return linearise(load_scheme(EXAMPLES / f"{stem}.loom")).smooth[0]


def coefficient(stem, m):
    """a_m of the modified equation q_t + u q_x = sum a_m d^m q / dx^m."""
    result = analyse(load_scheme(EXAMPLES / f"{stem}.loom"))
    for term in result.consistency[0].terms:
        if term.derivative == m:
            return term.coefficient
    raise AssertionError(f"no d^{m} term among the first two of {stem}")


def same(a, b):
    return sympy.simplify(sympy.expand(a - b)) == 0


# ---- amplification factors -------------------------------------------------------

@pytest.mark.parametrize("stem", sorted(ref.ABS_G_SQUARED))
def test_amplification_factors(stem):
    # |G|^2 in s = sin^2(theta/2): upwind (common practice), Lax-Wendroff [pub], FTCS
    # 1 + c^2 sin^2(theta) [pub]; sources in reference_values.ABS_G_SQUARED.
    assert same(linear(stem).abs_squared, ref.ABS_G_SQUARED[stem].expr(c=c, s=S))


def test_lax_friedrichs_amplification():
    # G = cos(theta) - i c sin(theta) (reference_values.LAX_FRIEDRICHS_G, [mem]).
    theta = sympy.Symbol("theta", real=True)
    g = ref.LAX_FRIEDRICHS_G.expr(c=c, theta=theta)
    expected = sympy.expand(g * sympy.conjugate(g))
    got = linear("lax_friedrichs").abs_squared.subs(S, sympy.sin(theta / 2) ** 2)
    for value in (sympy.Rational(1, 7), sympy.Rational(2, 3), sympy.Integer(3)):
        for angle in (sympy.pi / 5, sympy.pi / 2, 2 * sympy.pi / 3):
            diff = (got - expected).subs({c: value, theta: angle})
            assert abs(float(sympy.N(diff, 30))) < 1e-25


def test_beam_warming_amplification_at_a_point():
    # reference_values.BEAM_WARMING_G (Warming and Beam 1976; LeVeque 2002 [mem]), checked
    # at one (c, theta).
    z = sympy.exp(sympy.I * sympy.pi / 3)
    value = sympy.Rational(3, 2)
    expected = ref.BEAM_WARMING_G.expr(c=value, z=z)
    got = linear("beam_warming").amplification.subs({sympy.Symbol("z"): z, c: value})
    assert abs(complex(sympy.N(got - expected))) < 1e-14


# ---- stability limits --------------------------------------------------------------

@pytest.mark.parametrize("stem", sorted(ref.STABLE_INTERVAL))
def test_single_step_stability_interval(stem):
    # Published stable Courant intervals (reference_values.STABLE_INTERVAL, [mem]).
    expected = ref.STABLE_INTERVAL[stem]
    main = stable_set(linear(stem)).main
    assert (main.lo, main.hi) == expected.value, expected.source
    assert main.lo_closed and main.hi_closed


def test_ftcs_is_unstable_for_every_courant_number():
    # reference_values.FTCS_UNSTABLE: |G| > 1 for every c > 0 (von Neumann, common practice).
    result = analyse(load_scheme(EXAMPLES / "ftcs.loom"))
    assert result.stability_kind == "unstable"
    assert result.to_json()["convergent"]["holds"] is False


def test_quickest_island_at_c_equal_2():
    # reference_values.QUICKEST_ISLAND (Leonard 1979 [mem]): stable again at c = 2 exactly.
    islands = stable_set(linear("quickest")).islands
    island = ref.QUICKEST_ISLAND.value
    assert [(p.lo, p.hi) for p in islands] == [(island, island)]


KAPPA_RK = """scheme k {{
  param kappa = 1/3
  time {method}
  flux = u * (q[0] + (1 + kappa) / 4 * (q[1] - q[0]) + (1 - kappa) / 4 * (q[0] - q[-1]))
}}"""
UPWIND_RK = "scheme k {{\n  time {method}\n  flux = u * q[0]\n}}"
CENTRED_RK = "scheme k {{\n  time {method}\n  flux = u * (q[0] + q[1]) / 2\n}}"


def _mol_spec(space: str, method: str):
    """The method-of-lines spec behind a key of reference_values.MOL_LIMIT."""
    if space.startswith("kappa="):
        return scheme_from_text(KAPPA_RK.format(method=method),
                                overrides={"kappa": sympy.Rational(space.split("=")[1])})
    return scheme_from_text({"upwind": UPWIND_RK, "centred": CENTRED_RK}[space].format(method=method))


# reference_values.MOL_LIMIT [derived]; tables of such limits: Baldauf 2008 [mem].
@pytest.mark.parametrize("space, method", sorted(ref.MOL_LIMIT), ids=lambda v: str(v))
def test_method_of_lines_courant_limits(space, method):
    limit = ref.MOL_LIMIT[(space, method)].value
    main = stable_set(linearise(_mol_spec(space, method)).smooth[0]).main
    assert main.lo == 0
    assert abs(float(main.hi) - limit) < ref.MOL_LIMIT_TOLERANCE


@pytest.mark.parametrize("space", ref.MOL_EULER_UNSTABLE.value)
def test_forward_euler_method_of_lines_unstable(space):
    # reference_values.MOL_EULER_UNSTABLE [derived]: these operators with forward Euler.
    assert stable_set(linearise(_mol_spec(space, "euler")).smooth[0]).empty


# ---- modified equation ---------------------------------------------------------------

@pytest.mark.parametrize("stem, m", sorted(k for k in ref.MODIFIED_EQUATION
                                           if k[0] not in ("ftcs", "quickest")
                                           and not (k[0] == "upwind" and k[1] == 4)))
def test_modified_equation_coefficients(stem, m):
    # reference_values.MODIFIED_EQUATION: Warming and Hyett 1974, LeVeque 2002, Warming and
    # Beam 1976, Fromm 1968 (citations from memory; the values also derived).
    expected = ref.MODIFIED_EQUATION[(stem, m)]
    assert same(coefficient(stem, m), expected.expr(u=U, dx=DX, c=c)), expected.source


def test_lax_friedrichs_third_order_term_from_the_phase_of_g():
    # reference_values gives a3 = +(u dx^2/3)(1 - c^2) for Lax-Friedrichs (the sign once
    # misprinted as -). Derived independently: with G = cos(theta) - i c sin(theta), a q_xxx
    # term a3 shifts the phase per step by -(a3 c / (u dx^2)) theta^3, and sympy's series of
    # arg G = -atan(c tan(theta)) gives -c theta - c (1 - c^2) theta^3 / 3.
    theta = sympy.Symbol("theta")
    phase = sympy.series(-sympy.atan(c * sympy.tan(theta)), theta, 0, 4).removeO()
    cubic = phase.coeff(theta, 3)
    a3_independent = sympy.simplify(-cubic * U * DX**2 / c)
    assert same(a3_independent, ref.MODIFIED_EQUATION[("lax_friedrichs", 3)].expr(u=U, dx=DX, c=c))
    assert same(coefficient("lax_friedrichs", 3), a3_independent)


def test_ftcs_modified_equation_and_orders():
    # FTCS: a2 = -(u^2 dt / 2), negative diffusion; first order in time, second in space
    # (reference_values: common practice, derived).
    assert same(coefficient("ftcs", 2), ref.MODIFIED_EQUATION[("ftcs", 2)].expr(u=U, dx=DX, c=c))
    order = analyse(load_scheme(EXAMPLES / "ftcs.loom")).order
    assert order == {**ref.FTCS_ORDERS.value, "at_courant": ref.FTCS_ORDERS.value["overall"]}


def test_fromm_gains_an_order_at_half_courant():
    # reference_values.FROMM_ORDER_AT_HALF (Fromm 1968 [mem]): a3 vanishes at c = 1/2.
    fromm = load_scheme(EXAMPLES / "fromm.loom")
    assert analyse(fromm, courant=0.5).order["at_courant"] == ref.FROMM_ORDER_AT_HALF.value
    assert analyse(fromm, courant=0.4).order["at_courant"] == 2
    assert analyse(fromm, courant=0.5).order["overall"] == 2


def test_quickest_modified_equation():
    # reference_values (Leonard 1979 [mem]): no q_xx or q_xxx term, and a4.
    result = analyse(load_scheme(EXAMPLES / "quickest.loom"))
    assert result.consistency[0].terms[0].derivative == 4
    assert same(coefficient("quickest", 4),
                ref.MODIFIED_EQUATION[("quickest", 4)].expr(u=U, dx=DX, c=c))
    assert result.order["overall"] == ref.ORDER["quickest"].value


@pytest.mark.parametrize("stem", sorted(ref.ORDER))
def test_orders_of_single_step_schemes(stem):
    # reference_values.ORDER (sources there, [mem]).
    result = analyse(load_scheme(EXAMPLES / f"{stem}.loom"))
    assert result.consistent
    assert result.order["overall"] == ref.ORDER[stem].value


# ---- Runge-Kutta facts ----------------------------------------------------------------

@pytest.mark.parametrize("name", sorted(ref.IMAGINARY_AXIS_ABS_R_SQUARED))
def test_abs_r_on_imaginary_axis(name):
    # reference_values.IMAGINARY_AXIS_ABS_R_SQUARED (sources there).
    got = sympy.expand(sympy.expand_complex(
        sympy.Abs(stability_polynomial(name).subs(Z, sympy.I * y)) ** 2))
    assert same(got, ref.IMAGINARY_AXIS_ABS_R_SQUARED[name].expr(y=y))


@pytest.mark.parametrize("name", sorted(ref.IMAGINARY_AXIS_LIMIT))
def test_imaginary_axis_limits(name):
    # reference_values.IMAGINARY_AXIS_LIMIT (Gottlieb, Shu and Tadmor 2001 [mem]).
    assert same(imaginary_axis_limit(name), ref.IMAGINARY_AXIS_LIMIT[name].expr())
