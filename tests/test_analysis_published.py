"""The analysis against published values: amplification factors, stability
limits, modified-equation coefficients and Runge-Kutta facts.

Sources are named beside each value. Citations flagged [mem] in the project's
reference list are recalled from memory; each such test says so.
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

from conftest import EXAMPLES

c = C


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

def test_upwind_amplification():
    # |G|^2 = 1 - 4c(1 - c) sin^2(theta/2): von Neumann analysis of first-order upwind,
    # common practice (REFERENCE.md "Amplification factors").
    assert same(linear("upwind").abs_squared, 1 - 4 * c * (1 - c) * S)


def test_lax_wendroff_amplification():
    # |G|^2 = 1 - 4c^2(1 - c^2) sin^4(theta/2) [pub] (REFERENCE.md; LeVeque 2002, sec. 8.6 [mem]).
    assert same(linear("lax_wendroff").abs_squared, 1 - 4 * c**2 * (1 - c**2) * S**2)


def test_ftcs_amplification():
    # |G|^2 = 1 + c^2 sin^2(theta) [pub]; sin^2 theta = 4 s (1 - s) with s = sin^2(theta/2).
    assert same(linear("ftcs").abs_squared, 1 + c**2 * 4 * S * (1 - S))


def test_lax_friedrichs_amplification():
    # G = cos(theta) - i c sin(theta) (LeVeque 2002 [mem]), so |G|^2 = cos^2 + c^2 sin^2.
    theta = sympy.Symbol("theta", real=True)
    expected = sympy.cos(theta) ** 2 + c**2 * sympy.sin(theta) ** 2
    got = linear("lax_friedrichs").abs_squared.subs(S, sympy.sin(theta / 2) ** 2)
    for value in (sympy.Rational(1, 7), sympy.Rational(2, 3), sympy.Integer(3)):
        for angle in (sympy.pi / 5, sympy.pi / 2, 2 * sympy.pi / 3):
            diff = (got - expected).subs({c: value, theta: angle})
            assert abs(float(sympy.N(diff, 30))) < 1e-25


def test_beam_warming_amplification_at_a_point():
    # G = 1 - c(2 - c)/2 ... written out: G = 1 - c(1 - e^{-i th})(3 - c)/2 + c(1 - c)/2 (1 - e^{-i th}) e^{-i th}
    # (Warming and Beam 1976; LeVeque 2002 [mem]); checked at one (c, theta).
    z = sympy.exp(sympy.I * sympy.pi / 3)
    value = sympy.Rational(3, 2)
    expected = 1 - value * (1 - 1 / z) * (3 - value) / 2 + value * (1 - value) / 2 * (1 - 1 / z) / z
    got = linear("beam_warming").amplification.subs({sympy.Symbol("z"): z, c: value})
    assert abs(complex(sympy.N(got - expected))) < 1e-14


# ---- stability limits --------------------------------------------------------------

@pytest.mark.parametrize("stem, low, high, source", [
    ("upwind", 0, 1, "Warming and Hyett 1974 [mem]"),
    ("lax_wendroff", 0, 1, "LeVeque 2002 [mem]"),
    ("beam_warming", 0, 2, "Warming and Beam 1976; LeVeque 2002 [mem]"),
    ("fromm", 0, 1, "Fromm 1968 [mem]"),
    ("lax_friedrichs", 0, 1, "LeVeque 2002 [mem]"),
    ("quickest", 0, 1, "Leonard 1979 [mem]"),
])
def test_single_step_stability_interval(stem, low, high, source):
    # Published stable Courant intervals (sources [mem], citations from memory).
    main = stable_set(linear(stem)).main
    assert (main.lo, main.hi) == (low, high), source
    assert main.lo_closed and main.hi_closed


def test_ftcs_is_unstable_for_every_courant_number():
    # FTCS: |G| > 1 for every c > 0 (von Neumann, common practice; REFERENCE.md).
    result = analyse(load_scheme(EXAMPLES / "ftcs.loom"))
    assert result.stability_kind == "unstable"
    assert result.to_json()["convergent"]["holds"] is False


def test_quickest_island_at_c_equal_2():
    # QUICKEST is stable for 0 < c <= 1 and again at c = 2 exactly (DESIGN.md method notes;
    # Leonard 1979 [mem]). At c = 2, G = z^-2: an exact shift by two cells.
    islands = stable_set(linear("quickest")).islands
    assert [(p.lo, p.hi) for p in islands] == [(2, 2)]


KAPPA_RK = """scheme k {{
  param kappa = 1/3
  time {method}
  flux = u * (q[0] + (1 + kappa) / 4 * (q[1] - q[0]) + (1 - kappa) / 4 * (q[0] - q[-1]))
}}"""
UPWIND_RK = "scheme k {{\n  time {method}\n  flux = u * q[0]\n}}"
CENTRED_RK = "scheme k {{\n  time {method}\n  flux = u * (q[0] + q[1]) / 2\n}}"


# REFERENCE.md "Largest stable Courant number, method of lines" [derived]; tables of such
# limits: Baldauf 2008, J. Comput. Phys. 227:6638 [mem, citation from memory]. Tolerance 1e-3.
@pytest.mark.parametrize("template, kappa, method, limit", [
    (UPWIND_RK, None, "ssp_rk2", 1.0),
    (UPWIND_RK, None, "ssp_rk3", 1.2564),
    (UPWIND_RK, None, "rk4", 1.3926),
    (CENTRED_RK, None, "ssp_rk3", 3 ** 0.5),
    (CENTRED_RK, None, "rk4", 2 * 2 ** 0.5),
    (KAPPA_RK, "1/3", "ssp_rk2", 0.8736),
    (KAPPA_RK, "1/3", "ssp_rk3", 1.6259),
    (KAPPA_RK, "1/3", "rk4", 1.7453),
    (KAPPA_RK, "0", "ssp_rk2", 1.0),
    (KAPPA_RK, "0", "ssp_rk3", 1.1758),
    (KAPPA_RK, "0", "rk4", 1.3846),
    (KAPPA_RK, "-1", "ssp_rk2", 0.5),
    (KAPPA_RK, "-1", "ssp_rk3", 0.6281),
    (KAPPA_RK, "-1", "rk4", 0.6963),
], ids=lambda v: v if isinstance(v, str) and "\n" not in v else (
    {UPWIND_RK: "upwind", CENTRED_RK: "centred", KAPPA_RK: "kappa"}.get(v, str(v))))
def test_method_of_lines_courant_limits(template, kappa, method, limit):
    overrides = {"kappa": sympy.Rational(kappa)} if kappa is not None else None
    scheme = scheme_from_text(template.format(method=method), overrides=overrides)
    main = stable_set(linearise(scheme).smooth[0]).main
    assert main.lo == 0
    assert abs(float(main.hi) - limit) < 1e-3


@pytest.mark.parametrize("template, kappa", [(CENTRED_RK, None), (KAPPA_RK, "1/3"),
                                             (KAPPA_RK, "0"), (KAPPA_RK, "-1")],
                         ids=["centred", "kappa=1/3", "kappa=0", "kappa=-1"])
def test_forward_euler_method_of_lines_unstable(template, kappa):
    # REFERENCE.md table: centred and kappa schemes with forward Euler are unstable [derived].
    text = template.format(method="euler")
    overrides = {"kappa": sympy.Rational(kappa)} if kappa is not None else None
    scheme = scheme_from_text(text, overrides=overrides)
    assert stable_set(linearise(scheme).smooth[0]).empty


# ---- modified equation ---------------------------------------------------------------

def test_upwind_modified_equation():
    # Warming and Hyett 1974, J. Comput. Phys. 14:159 [mem, citation from memory]:
    # a2 = (u dx / 2)(1 - c), a3 = -(u dx^2 / 6)(1 - c)(1 - 2c).
    assert same(coefficient("upwind", 2), U * DX / 2 * (1 - c))
    assert same(coefficient("upwind", 3), -U * DX**2 / 6 * (1 - c) * (1 - 2 * c))


def test_lax_wendroff_modified_equation():
    # LeVeque 2002, sec. 8.6 [mem]: a3 = -(u dx^2/6)(1 - c^2); a4 = -(u dx^3/8) c (1 - c^2).
    assert same(coefficient("lax_wendroff", 3), -U * DX**2 / 6 * (1 - c**2))
    assert same(coefficient("lax_wendroff", 4), -U * DX**3 / 8 * c * (1 - c**2))


def test_beam_warming_modified_equation():
    # Warming and Beam 1976; LeVeque 2002 [mem]: a3 = (u dx^2/6)(2 - 3c + c^2);
    # a4 = -(u dx^3/8)(2 - c)(1 - c)^2.
    assert same(coefficient("beam_warming", 3), U * DX**2 / 6 * (2 - 3 * c + c**2))
    assert same(coefficient("beam_warming", 4), -U * DX**3 / 8 * (2 - c) * (1 - c) ** 2)


def test_fromm_modified_equation():
    # Fromm 1968, J. Comput. Phys. 3:176 [mem]: a3 = (u dx^2/12)(1 - c)(1 - 2c).
    assert same(coefficient("fromm", 3), U * DX**2 / 12 * (1 - c) * (1 - 2 * c))


def test_lax_friedrichs_modified_equation():
    # LeVeque 2002 [mem]: a2 = (u dx/(2c))(1 - c^2) = dx^2/(2 dt) (1 - c^2).
    assert same(coefficient("lax_friedrichs", 2), U * DX / (2 * c) * (1 - c**2))


def test_lax_friedrichs_third_order_term_from_the_phase_of_g():
    # The reference list gives a3 = -(u dx^2/3)(1 - c^2) for Lax-Friedrichs [mem]; an
    # independent derivation disagrees in sign. With G = cos(theta) - i c sin(theta), a
    # q_xxx term a3 shifts the phase per step by -a3 k^3 dt = -(a3 c / (u dx^2)) theta^3,
    # and sympy's series of arg G = -atan(c tan(theta)) gives -c theta - c (1 - c^2) theta^3 / 3,
    # so a3 = +(u dx^2/3)(1 - c^2). The analysis is held to the independent derivation.
    theta = sympy.Symbol("theta")
    phase = sympy.series(-sympy.atan(c * sympy.tan(theta)), theta, 0, 4).removeO()
    cubic = phase.coeff(theta, 3)
    a3_independent = sympy.simplify(-cubic * U * DX**2 / c)
    assert same(a3_independent, U * DX**2 / 3 * (1 - c**2))
    assert same(coefficient("lax_friedrichs", 3), a3_independent)


def test_ftcs_modified_equation_and_orders():
    # FTCS: a2 = -(u^2 dt / 2) = -(u dx c / 2), negative diffusion; first order in time,
    # second in space (von Neumann / modified equation, common practice; REFERENCE.md).
    assert same(coefficient("ftcs", 2), -U * DX * c / 2)
    order = analyse(load_scheme(EXAMPLES / "ftcs.loom")).order
    assert order == {"space": 2, "time": 1, "overall": 1, "at_courant": 1}


def test_fromm_gains_an_order_at_half_courant():
    # Fromm: a3 = (u dx^2/12)(1 - c)(1 - 2c) vanishes at c = 1/2, where the scheme is
    # third order (Fromm 1968, J. Comput. Phys. 3:176; from memory, REFERENCE.md).
    fromm = load_scheme(EXAMPLES / "fromm.loom")
    assert analyse(fromm, courant=0.5).order["at_courant"] == 3
    assert analyse(fromm, courant=0.4).order["at_courant"] == 2
    assert analyse(fromm, courant=0.5).order["overall"] == 2


def test_quickest_modified_equation():
    # Leonard 1979 [mem]: no q_xx or q_xxx term; a4 = -(u dx^3/24)(1 - c)(2 - c)(1 + c).
    result = analyse(load_scheme(EXAMPLES / "quickest.loom"))
    assert result.consistency[0].terms[0].derivative == 4
    assert same(coefficient("quickest", 4), -U * DX**3 / 24 * (1 - c) * (2 - c) * (1 + c))
    assert result.order["overall"] == 3


@pytest.mark.parametrize("stem, order", [("upwind", 1), ("lax_wendroff", 2),
                                         ("beam_warming", 2), ("fromm", 2),
                                         ("lax_friedrichs", 1), ("quickest", 3)])
def test_orders_of_single_step_schemes(stem, order):
    # Orders from REFERENCE.md's single-step table (sources there, [mem]).
    result = analyse(load_scheme(EXAMPLES / f"{stem}.loom"))
    assert result.consistent
    assert result.order["overall"] == order


# ---- Runge-Kutta facts ----------------------------------------------------------------

@pytest.mark.parametrize("name, expected", [
    # |R(iy)|^2 polynomials from REFERENCE.md "Runge-Kutta methods on the imaginary axis".
    ("euler", "1 + y**2"), ("ssp_rk2", "1 + y**4/4"),
    ("ssp_rk3", "1 - y**4/12 + y**6/36"), ("rk4", "1 - y**6/72 + y**8/576"),
    # Every three-stage method of linear order 3 has SSP-RK3's R(z); Wicker and Skamarock
    # (2002, Mon. Wea. Rev. 130:2088) note the same limit sqrt(3) [mem].
    ("ws_rk3", "1 - y**4/12 + y**6/36"),
])
def test_abs_r_on_imaginary_axis(name, expected):
    y = sympy.Symbol("y", real=True)
    got = sympy.expand(sympy.expand_complex(
        sympy.Abs(stability_polynomial(name).subs(Z, sympy.I * y)) ** 2))
    assert same(got, sympy.sympify(expected, locals={"y": y}))


@pytest.mark.parametrize("name, limit", [
    # Imaginary-axis limits: sqrt(3) for SSP-RK3, 2 sqrt(2) for RK4, only y = 0 for forward
    # Euler and SSP-RK2 (REFERENCE.md; Gottlieb, Shu and Tadmor 2001 [mem]).
    ("euler", 0), ("ssp_rk2", 0), ("ssp_rk3", sympy.sqrt(3)), ("rk4", 2 * sympy.sqrt(2)),
    ("ws_rk3", sympy.sqrt(3)),  # the same R(z) as SSP-RK3 (Wicker and Skamarock 2002 [mem])
])
def test_imaginary_axis_limits(name, limit):
    assert same(imaginary_axis_limit(name), limit)
