"""The time-method registry held against computations made another way.

Every fact fluxloom derives from a method's table (R(z), classical and linear order,
SSP coefficient, the kernels' low-storage stage updates) is checked here against a
published value or an independent computation: order conditions written out by hand,
R(z) by the determinant formula, the published stage formulas (including the
low-storage pseudo-code of SSPRK(10,4)), numpy bisection and root finding. Sources
flagged [mem] are recalled from memory.
"""
from __future__ import annotations

import dataclasses
import json
import math
from fractions import Fraction
from pathlib import Path

import numpy as np
import pytest
import sympy
from hypothesis import given, settings
from hypothesis import strategies as st

from fluxloom.compiler import scheme_from_text
from fluxloom.compiler.analysis.timemethods import imaginary_axis_limit
from fluxloom.compiler.time_methods import METHODS, Z, butcher, method, shu_osher
from fluxloom.compiler.time_methods.low_storage import derive
from fluxloom.compiler.time_methods.properties import rooted_trees
from fluxloom.runtime.cli import main

import reference_values as ref
from reference_values import PUBLISHED_STEPS as PUBLISHED, published_step

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
NAMES = sorted(METHODS)

# The 3/8 rule (Kutta 1901; Hairer, Norsett and Wanner, Solving ODEs I, table II.1.2
# [mem]): a fourth-order method whose rows read two earlier operator values, so its
# stage updates need two registers and a saved copy. It is registered only inside the
# tests that use it.
RULE_38 = butcher("rule_38", "Kutta's 3/8 rule (tests only)",
                  a=[["1/3"], ["-1/3", 1], [1, -1, 1]], b=["1/8", "3/8", "3/8", "1/8"])


def exact(value) -> Fraction:
    value = sympy.Rational(value)
    return Fraction(int(value.p), int(value.q))


def butcher_arrays(m):
    return sympy.Matrix(m.butcher_a), sympy.Matrix([m.butcher_b])


# ---- SSP coefficients ---------------------------------------------------------------------

@pytest.mark.parametrize("name", sorted(ref.SSP_COEFFICIENT))
def test_ssp_coefficient_is_the_published_value(name):
    # reference_values.SSP_COEFFICIENT (sources there: Shu and Osher 1988, Kraaijevanger
    # 1991, Ketcheson 2008 [mem]; ws_rk3 by hand).
    assert method(name).ssp_coefficient == ref.SSP_COEFFICIENT[name].value


def _absolutely_monotone(k: np.ndarray, r: float) -> bool:
    inverse = np.linalg.inv(np.eye(len(k)) + r * k)
    return bool(np.all(k @ inverse >= -1e-12) and np.all(inverse.sum(axis=1) >= -1e-12))


@pytest.mark.parametrize("name", NAMES)
def test_ssp_coefficient_by_floating_point_bisection(name):
    """numpy: bisection on r of Kraaijevanger's conditions with a numeric inverse."""
    m = method(name)
    k = np.array([[float(v) for v in row] + [0.0] for row in m.butcher_rows])
    lo, hi = 0.0, 50.0
    assert not _absolutely_monotone(k, hi)
    for _ in range(60):
        mid = (lo + hi) / 2
        lo, hi = (mid, hi) if _absolutely_monotone(k, mid) else (lo, mid)
    assert lo == pytest.approx(float(m.ssp_coefficient), abs=1e-9)


@pytest.mark.parametrize("name", ["euler", "ssp_rk2", "ssp_rk3", "ssp_rk10_4"])
def test_shu_osher_ratios_of_the_ssp_tables_reach_the_coefficient(name):
    # A Shu-Osher form with nonnegative coefficients is SSP with coefficient min alpha/beta
    # (Shu and Osher 1988 [mem]); for these (optimal) forms it equals Kraaijevanger's radius
    # (Ketcheson 2008, sec. 2 [mem]).
    m = method(name)
    pairs = [(a, b) for ar, br in zip(m.alpha, m.beta) for a, b in zip(ar, br)]
    assert all(a >= 0 and b >= 0 for a, b in pairs)
    assert min(a / b for a, b in pairs if b > 0) == m.ssp_coefficient


# ---- orders -------------------------------------------------------------------------------

def test_rooted_tree_counts():
    # reference_values.ROOTED_TREES (Cayley 1857; OEIS A000081 [mem]).
    assert tuple(len(rooted_trees(n)) for n in range(1, 9)) == ref.ROOTED_TREES.value


def hand_order(m) -> int:
    """The order conditions up to order 4 written out (Butcher 2008, Numerical Methods for
    ODEs, sec. 31 [mem]); the largest p <= 4 whose conditions all hold."""
    a, b = butcher_arrays(m)
    e = sympy.ones(a.rows, 1)
    c = a * e
    c2 = c.multiply_elementwise(c)
    dot = lambda v: (b * v)[0]  # noqa: E731
    conditions = {
        1: [dot(e) - 1],
        2: [dot(c) - sympy.Rational(1, 2)],
        3: [dot(c2) - sympy.Rational(1, 3), dot(a * c) - sympy.Rational(1, 6)],
        4: [dot(c2.multiply_elementwise(c)) - sympy.Rational(1, 4),
            dot(c.multiply_elementwise(a * c)) - sympy.Rational(1, 8),
            dot(a * c2) - sympy.Rational(1, 12), dot(a * a * c) - sympy.Rational(1, 24)],
    }
    p = 0
    while p < 4 and all(v == 0 for v in conditions[p + 1]):
        p += 1
    return p


@pytest.mark.parametrize("name", sorted(ref.CLASSICAL_ORDER))
def test_classical_order_against_the_written_out_conditions(name):
    # reference_values.CLASSICAL_ORDER (ws_rk3: third order only on linear problems).
    published = ref.CLASSICAL_ORDER[name].value
    m = method(name)
    assert m.order == published == hand_order(m)
    if published == 4:   # not fifth order: b A^3 c = 1/120 is one of its conditions
        a, b = butcher_arrays(m)
        assert (b * a ** 3 * a * sympy.ones(a.rows, 1))[0] != sympy.Rational(1, 120)


@pytest.mark.parametrize("name", sorted(ref.LINEAR_ORDER))
def test_linear_order_from_the_series_of_exp(name):
    """R(z) - exp(z) = O(z^(p+1)) with p the order on linear problems (sympy series), against
    reference_values.LINEAR_ORDER."""
    published = ref.LINEAR_ORDER[name].value
    gap = sympy.series(sympy.exp(Z) - method(name).stability_polynomial, Z, 0, 14).removeO()
    lowest = min(sympy.Poly(gap, Z).monoms())[0]
    assert lowest - 1 == method(name).linear_order == published


# ---- the stability polynomial --------------------------------------------------------------

@pytest.mark.parametrize("name", NAMES)
def test_stability_polynomial_by_the_determinant_formula(name):
    # R(z) = det(I - zA + z e b^T) / det(I - zA) (Hairer and Wanner, Solving ODEs II,
    # prop. IV.3.2 [mem]), from the Butcher form; fluxloom composes the Shu-Osher rows.
    from sympy.polys.matrices import DomainMatrix

    a, b = butcher_arrays(method(name))
    eye, e = sympy.eye(a.rows), sympy.ones(a.rows, 1)

    def det(matrix):  # exact, over the polynomial ring QQ[z]
        found = DomainMatrix.from_Matrix(matrix)
        return found.domain.to_sympy(found.det())
    by_det = sympy.cancel(det(eye - Z * a + Z * e * b) / det(eye - Z * a))
    assert sympy.expand(by_det - method(name).stability_polynomial) == 0


def kernel_step(updates, start, operator, number=lambda v: v):
    """One step of low-storage stage updates with a kernel's in-place semantics: q_out from
    the registers as they are, then each write in order, reading registers as they are
    then (a saved register from its copy). number() converts each coefficient."""
    registers: dict[int, object] = {}
    current = start
    for update in updates:
        rate = operator(current)
        copies = {k: registers[k] for k in update.saved}

        def value(c, copies=copies, rate=rate, current=current):
            total = number(c.start) * start + number(c.stage) * current + number(c.rate) * rate
            for k, w in c.registers:
                total += number(w) * (copies[k] if k in copies else registers[k])
            return total
        out = value(update.out)
        for k, c in update.writes:
            registers[k] = value(c)
        current = out
    return current


@pytest.mark.parametrize("m", [method(n) for n in NAMES] + [RULE_38], ids=lambda m: m.name)
def test_stage_updates_give_the_stability_polynomial(m):
    got = kernel_step(derive(m).updates, sympy.Integer(1), lambda y: Z * y)
    assert sympy.expand(got - m.stability_polynomial) == 0


@pytest.mark.parametrize("name", PUBLISHED)
def test_published_stage_formulas_give_the_registry_polynomial(name):
    got = sympy.expand(published_step(name, sympy.Integer(1), lambda y: Z * y))
    assert sympy.expand(got - method(name).stability_polynomial) == 0


def test_ssp_rk10_4_polynomial_is_of_degree_10_and_absolutely_monotone_to_6():
    # Ten stages give degree 10; an SSP coefficient of 6 needs R to be absolutely monotone
    # on [-6, 0]: every coefficient of R in powers of (1 + z/6) nonnegative (Kraaijevanger
    # 1991 [mem]). Checked on R itself, not on the table.
    r = method("ssp_rk10_4").stability_polynomial
    assert sympy.Poly(r, Z).degree() == 10
    w = sympy.Symbol("w")
    shifted = sympy.Poly(sympy.expand(r.subs(Z, 6 * (w - 1))), w)
    assert all(coefficient >= 0 for coefficient in shifted.all_coeffs())


def test_ssp_rk10_4_imaginary_axis_limit_by_numpy():
    """numpy: the first y > 0 where |R(iy)| exceeds 1, on a fine grid."""
    coefficients = [float(v) for v in reversed(sympy.Poly(
        method("ssp_rk10_4").stability_polynomial, Z).all_coeffs())]
    y = np.linspace(1e-3, 8, 800001)
    gain = np.abs(np.polynomial.polynomial.polyval(1j * y, coefficients))
    first = y[np.argmax(gain > 1 + 1e-12)]
    assert float(imaginary_axis_limit("ssp_rk10_4")) == pytest.approx(first, abs=2e-5)


# ---- stage updates on a nonlinear problem ---------------------------------------------------

def nonlinear(v):
    return v ** 2 + v ** 3


def butcher_step(m, y, h):
    slopes = []
    for row in m.butcher_a:
        slopes.append(nonlinear(y + h * sum((exact(a) * k for a, k in zip(row, slopes)),
                                            Fraction(0))))
    return y + h * sum(exact(b) * k for b, k in zip(m.butcher_b, slopes))


def shu_osher_step(m, y, h):
    stages = [y]
    for alpha, beta in zip(m.alpha, m.beta):
        stages.append(sum((exact(a) * s + exact(b) * h * nonlinear(s)
                           for a, b, s in zip(alpha, beta, stages)), Fraction(0)))
    return stages[-1]


def low_storage_step(m, y, h):
    return kernel_step(derive(m).updates, y, lambda v: h * nonlinear(v), exact)


POINTS = [(Fraction(3, 7), Fraction(2, 5)), (Fraction(-5, 3), Fraction(1, 9)),
          (Fraction(11, 4), Fraction(-3, 8))]


def points(m):
    """Exact values grow with degree 3^stages: one point for long methods."""
    return POINTS if m.stages <= 4 else POINTS[:1]


@pytest.mark.parametrize("m", [method(n) for n in NAMES] + [RULE_38], ids=lambda m: m.name)
def test_stage_updates_are_the_butcher_method_on_a_nonlinear_problem(m):
    """What the kernels stage (low-storage updates) equals one step of the Butcher form and
    one step of the plain Shu-Osher rows on y' = y^2 + y^3, in exact rational arithmetic."""
    for y, h in points(m):
        want = butcher_step(m, y, h)
        assert shu_osher_step(m, y, h) == want
        assert low_storage_step(m, y, h) == want


@pytest.mark.parametrize("name", PUBLISHED)
def test_published_formulas_on_a_nonlinear_problem(name):
    for y, h in points(method(name)):
        assert published_step(name, y, lambda v: h * nonlinear(v)) == \
            butcher_step(method(name), y, h)


small = st.fractions(min_value=-2, max_value=2, max_denominator=5)


@settings(max_examples=25, deadline=None)
@given(st.integers(min_value=2, max_value=5).flatmap(
    lambda s: st.tuples(st.lists(st.lists(small, min_size=s, max_size=s), min_size=s - 1,
                                 max_size=s - 1),
                        st.lists(small, min_size=s, max_size=s))))
def test_random_tables_stage_like_their_butcher_form(table):
    """Random explicit tables (tables nobody published): the derived registers reproduce
    the Butcher step, whatever the rows read."""
    a, b = table
    m = butcher("random", "random", [row[:k + 1] for k, row in enumerate(a)], b)
    y, h = Fraction(2, 3), Fraction(1, 4)
    assert low_storage_step(m, y, h) == butcher_step(m, y, h)
    assert derive(m).registers <= m.stages


def test_register_counts():
    # Shu-Osher rows reading only q, the last stage and its operator need no register;
    # classical RK4 keeps one running sum; SSPRK(10,4) is a two-register (q_start plus one)
    # low-storage method (Ketcheson 2008 [mem]); the 3/8 rule needs two.
    counts = {n: derive(method(n)).registers for n in NAMES}
    assert counts == {"euler": 0, "ssp_rk2": 0, "ssp_rk3": 0, "rk4": 1, "ws_rk3": 0,
                      "ssp_rk10_4": 1}
    assert derive(RULE_38).registers == 2
    assert any(u.saved for u in derive(RULE_38).updates)


def test_tables_must_be_exact_and_consistent():
    with pytest.raises(TypeError, match="exact"):
        butcher("bad", "", [[0.5]], [0, 1])
    with pytest.raises(ValueError, match="sum"):
        shu_osher("bad", "", alpha=[[1], ["1/2", "1/4"]], beta=[[1], [0, "1/2"]])


# ---- kernels, the reference stepper and the analysis ----------------------------------------

def test_a_newly_registered_method_runs_in_both_kernels_and_the_reference(monkeypatch):
    """One registry entry is all a method needs: the 3/8 rule (two registers, a saved copy)
    in the C and numpy kernels agrees with the reference stepper, which stages the plain
    Shu-Osher rows."""
    from fluxloom.runtime.kernel import load_kernel, run_periodic
    from fluxloom.runtime.reference import reference_run

    monkeypatch.setitem(METHODS, "rule_38", RULE_38)
    text = ("scheme kappa_38 {\n  time ssp_rk3\n"
            "  flux = u * (q[0] + (q[1] - q[0]) / 3 + (q[0] - q[-1]) / 6)\n}\n")
    scheme = dataclasses.replace(scheme_from_text(text), time="rule_38")
    rng = np.random.default_rng(38)
    n = 40
    q0 = rng.random(n)
    u = rng.uniform(-1, 1, n + 1)
    u[-1] = u[0]
    want = reference_run(scheme, q0, u, 0.4, 3)
    for backend in ("c", "numpy"):
        kernel = load_kernel(scheme, backend)
        assert kernel.stages == 4
        got = run_periodic(kernel, q0, u, 0.4, 3)
        assert np.max(np.abs(got - want)) <= 1e-12 * np.max(np.abs(want))


@pytest.mark.parametrize("stem, backend", [("kappa_ws3", "c"), ("kappa_ws3", "numpy"),
                                           ("centred4_ssp10", "c"), ("centred4_ssp10", "numpy")])
def test_new_methods_in_kernels_agree_with_the_reference(stem, backend):
    from fluxloom.compiler import load_scheme
    from fluxloom.runtime.kernel import load_kernel, run_periodic
    from fluxloom.runtime.reference import reference_run

    scheme = load_scheme(EXAMPLES / f"{stem}.loom")
    rng = np.random.default_rng(10)
    n = 50
    q0 = rng.random(n)
    u = rng.uniform(-1, 1, n + 1)
    u[-1] = u[0]
    want = reference_run(scheme, q0, u, 1.2, 4)
    got = run_periodic(load_kernel(scheme, backend), q0, u, 1.2, 4)
    assert np.max(np.abs(got - want)) <= 1e-12 * np.max(np.abs(want))


@pytest.mark.parametrize("stem, order", [("kappa_ws3", 3), ("centred4_ssp10", 4)])
def test_measured_order_in_time(stem, order):
    """On a fixed grid the error against a run with a 16 times smaller step falls as dt^p,
    p the method's order on this linear problem (numpy kernel; common practice)."""
    from fluxloom.compiler import load_scheme
    from fluxloom.runtime.kernel import load_kernel, run_periodic

    kernel = load_kernel(load_scheme(EXAMPLES / f"{stem}.loom"), "numpy")
    n = 64
    q0 = np.sin(2 * np.pi * (np.arange(n) + 0.5) / n)
    u = np.ones(n + 1)

    def run(steps):
        return run_periodic(kernel, q0, u, 8.0 / steps, steps)  # to t = 8 dx / u
    fine = run(128)
    errors = [np.max(np.abs(run(steps) - fine)) for steps in (8, 16)]
    assert math.log2(errors[0] / errors[1]) == pytest.approx(order, abs=0.25)


def check_json(capsys, stem, *args):
    assert main(["check", str(EXAMPLES / f"{stem}.loom"), "--json", *args]) == 0
    return json.loads(capsys.readouterr().out)


@pytest.mark.parametrize("stem, expected", [
    ("upwind", {"name": "euler", "stages": 1, "order": 1, "ssp_coefficient": 1.0}),
    ("kappa_ws3", {"name": "ws_rk3", "stages": 3, "order": 2, "linear_order": 3,
                   "ssp_coefficient": 0.0}),
])
def test_check_json_time_method(capsys, stem, expected):
    doc = check_json(capsys, stem)
    assert expected.items() <= doc["time_method"].items()
    if stem == "kappa_ws3":
        # SSP-RK3's limit for kappa = 1/3 (reference_values.MOL_LIMIT [derived]): every
        # three-stage method of linear order 3 has the same R(z).
        limit = ref.MOL_LIMIT[("kappa=1/3", "ssp_rk3")].value
        assert doc["stability"]["courant_max"] == pytest.approx(limit, abs=ref.MOL_LIMIT_TOLERANCE)
        assert doc["stability"]["time_method"]["ssp_coefficient"] == 0.0
        assert doc["tvd"]["holds"] is not True


@pytest.mark.slow
def test_check_reports_ssp_rk10_4(capsys):
    doc = check_json(capsys, "centred4_ssp10")
    assert {"name": "ssp_rk10_4", "stages": 10, "order": 4, "linear_order": 4,
            "ssp_coefficient": 6.0}.items() <= doc["time_method"].items()
    # the imaginary-axis limit of R times the largest |lambda| of the centred fourth-order
    # operator, (8 sin t - sin 2t)/6 (numpy, on a fine grid)
    t = np.linspace(0, np.pi, 200001)
    largest = np.max(np.abs(8 * np.sin(t) - np.sin(2 * t)) / 6)
    limit = doc["stability"]["time_method"]["imaginary_axis_limit"] / largest
    assert doc["stability"]["courant_max"] == pytest.approx(limit, abs=2e-3)
    assert main(["check", str(EXAMPLES / "centred4_ssp10.loom")]) == 0
    assert "ssp_rk10_4: 10 stages, order 4, SSP coefficient 6" in capsys.readouterr().out


def test_tvd_interval_scales_with_the_computed_ssp_coefficient():
    """A limited reconstruction TVD for c <= C_FE under forward Euler (Harten's form) is TVD
    for c <= C_FE under SSP-RK3 (coefficient 1), for c <= 6 C_FE under SSPRK(10,4), and not
    decided under a method that is not SSP (Gottlieb, Shu and Tadmor 2001 [mem]). The
    kernel is held to it: 40 steps at c = 6 C_FE on random data never raise the total
    variation (brute force, round-off aside)."""
    from fluxloom.compiler.analysis.tvd import analyse_tvd
    from fluxloom.runtime.harness import total_variation
    from fluxloom.runtime.kernel import load_kernel, run_periodic

    body = ("  let r = ratio(q[0] - q[-1], q[1] - q[0])\n"
            "  limiter smooth(r) = (r + abs(r)) / (2 + abs(r))\n"
            "  flux = u * (q[0] + smooth(r) / 2 * (q[1] - q[0]))\n}\n")
    spans = {}
    for time in ("euler", "ssp_rk3", "ssp_rk10_4", "ws_rk3"):
        tvd = analyse_tvd(scheme_from_text(f"scheme smooth {{\n  time {time}\n" + body), None)
        spans[time] = tvd.stable_set.main.hi if tvd.holds else None
    assert spans["ssp_rk10_4"] == 6 * spans["ssp_rk3"] == 6 * spans["euler"]
    assert spans["ws_rk3"] is None
    scheme = scheme_from_text("scheme smooth {\n  time ssp_rk10_4\n" + body)
    kernel = load_kernel(scheme, "numpy")
    rng = np.random.default_rng(6)
    c = float(spans["ssp_rk10_4"])
    for _ in range(5):
        q = rng.random(60) * (rng.random(60) < 0.5)
        u = np.ones(61)
        for _ in range(40):
            new = run_periodic(kernel, q, u, c, 1)
            assert total_variation(new) <= total_variation(q) * (1 + 1e-12)
            q = new


# ---- verify on the new examples --------------------------------------------------------------

def verify_json(capsys, stem, *args):
    status = main(["verify", str(EXAMPLES / f"{stem}.loom"), "--json", *args])
    return status, json.loads(capsys.readouterr().out)


def test_verify_measures_ws_rk3_third_order(capsys):
    status, doc = verify_json(capsys, "kappa_ws3")
    assert status == 0 and doc["agree"] is True
    assert doc["predicted_order"] == 3
    assert doc["observed_order"]["l1"] == pytest.approx(3, abs=0.1)


def test_verify_disagrees_with_a_wrong_order_for_ws_rk3(capsys, monkeypatch):
    # Claiming fourth order (a method of linear order 3 cannot give it) must be caught.
    from fluxloom.runtime.commands import verify as verify_command

    real = verify_command.analysis_document

    def overclaiming(scheme, courant):
        doc = dict(real(scheme, courant))
        doc["order"] = {**doc["order"], "overall": 4, "at_courant": 4}
        return doc
    monkeypatch.setattr(verify_command, "analysis_document", overclaiming)
    status, doc = verify_json(capsys, "kappa_ws3")
    assert status == 1 and doc["agree"] is False


@pytest.mark.slow
def test_verify_measures_ssp_rk10_4_fourth_order_at_a_large_courant_number(capsys):
    # At c = 3 the time error (c^4 u dx^4 / 2160 q_xxxxx from check) outweighs the space
    # error (72 u dx^4 / 2160): fourth order here is the method's.
    status, doc = verify_json(capsys, "centred4_ssp10", "--courant", "3", "--backend", "c")
    assert status == 0 and doc["agree"] is True
    assert doc["predicted_order"] == 4
    assert doc["observed_order"]["l1"] == pytest.approx(4, abs=0.1)


# ---- the README says what the registry computes ------------------------------------------------

def readme_time_methods():
    lines = (EXAMPLES.parent / "README.md").read_text().splitlines()
    start = next(i for i, line in enumerate(lines) if line.startswith("| `time` | method | stages"))
    rows = {}
    for line in lines[start + 2:]:
        if not line.startswith("|"):
            break
        cells = [cell.strip() for cell in line.strip("|").split("|")]
        rows[cells[0].strip("`")] = cells[2:]
    return rows


def test_readme_time_method_table_matches_the_registry():
    rows = readme_time_methods()
    assert sorted(rows) == NAMES
    for name, (stages, order, ssp, limit, registers) in rows.items():
        m = method(name)
        orders = order.replace("(", " ").replace(")", " ").split()
        assert int(stages) == m.stages
        assert (int(orders[0]), int(orders[-1])) == (m.order, m.linear_order), name
        assert int(ssp.split()[0]) == m.ssp_coefficient, name
        computed = imaginary_axis_limit(name)
        if "." in limit:
            assert float(limit) == pytest.approx(float(computed), abs=5e-5), name
        else:
            assert sympy.simplify(sympy.sympify(limit.replace(" ", "*")) - computed) == 0, name
        assert int(registers) == derive(m).registers, name
