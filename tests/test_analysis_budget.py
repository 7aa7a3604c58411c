"""The analysis budget: a pass past its CPU time (or memory) falls back to a numeric method
with its tolerance stated, or says undecided with the reason "budget exceeded"; `check`
returns promptly with a tiny budget. Work that never ends on its own stands in for a
runaway exact step, so each test proves the interruption rather than timing it."""
from __future__ import annotations

import json
import subprocess
import sys
import threading
from pathlib import Path

import pytest
import sympy

from fluxloom.compiler import load_scheme
from fluxloom.compiler import analysis
from fluxloom.compiler.analysis import budget
from fluxloom.runtime.cli import main

import reference_values as ref

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
X, Y = sympy.symbols("x y")


def endless_sympy(*args, **kwargs):
    """Symbolic work that does not end by itself, swallowing ordinary exceptions as some
    library code does: only the budget can stop it."""
    k = 2
    while True:
        try:
            sympy.factor(sympy.expand((X + Y + k) ** 12 - (X - Y) ** 11))
        except Exception:  # noqa: BLE001 - on purpose: the budget must get through this
            pass
        k += 1


def endless_checked(*args, **kwargs):
    """A loop that only checks the budget between steps (the cooperative path)."""
    while True:
        budget.check()


def test_an_endless_exact_step_falls_back():
    outcome = budget.attempt(0.2, endless_sympy, lambda: "numeric answer", "numeric")
    assert outcome.how == "fallback" and outcome.value == "numeric answer"
    assert "budget exceeded" in outcome.note and "numeric" in outcome.note


def test_an_endless_fallback_ends_undecided():
    outcome = budget.attempt(0.1, endless_sympy, endless_sympy, "numeric", lambda: None)
    assert outcome.how == "undecided" and outcome.value is None
    assert outcome.note.startswith("budget exceeded")


def test_nested_deadlines_stop_only_the_inner_pass():
    with budget.deadline(60):
        inner = budget.attempt(0.1, endless_sympy, undecided=lambda: "inner stopped")
        assert inner.value == "inner stopped"
        assert sympy.expand((X + 1) ** 3) == X ** 3 + 3 * X ** 2 + 3 * X + 1  # outer goes on
    assert not budget._ACTIVE


def test_other_threads_stop_at_the_next_check():
    # Signals reach only the main thread; elsewhere the checks between steps stop a pass.
    found = []
    worker = threading.Thread(target=lambda: found.append(
        budget.attempt(0.1, endless_checked, undecided=lambda: "stopped")))
    worker.start()
    worker.join(120)
    assert found and found[0].how == "undecided"


def test_memory_growth_is_a_budget_too(monkeypatch):
    monkeypatch.setattr(budget, "MEMORY_LIMIT_MB", 20.0)
    hoard = []

    def grow():
        while True:
            hoard.append(bytearray(1 << 20))
            sum(range(20000))  # give the timer's ticks CPU time to land on
    outcome = budget.attempt(60, grow, undecided=lambda: None)
    hoard.clear()
    assert outcome.how == "undecided" and "MB of extra memory" in outcome.note


@pytest.fixture
def fresh_cache(monkeypatch):
    analysis._cached_analysis.cache_clear()
    # these tests follow one pass past its own budget; the whole-analysis cap (tested
    # on its own below) must not cut the passes after it short here
    monkeypatch.setattr(budget, "WHOLE_FACTOR", 10.0)
    yield
    analysis._cached_analysis.cache_clear()  # no result of a patched pass outlives the test


def test_stability_falls_back_to_the_numeric_scan_within_its_tolerance(monkeypatch, fresh_cache):
    scheme = load_scheme(EXAMPLES / "kappa_rk3.loom")
    exact = analysis.analyse(scheme).to_json()["stability"]
    analysis._cached_analysis.cache_clear()
    monkeypatch.setattr(analysis, "analyse_stability", endless_sympy)
    doc = analysis.analyse(scheme, budget_seconds=1.5).to_json()  # the scan needs ~0.5 s
    st = doc["stability"]
    assert st["method"].startswith("numeric") and st["tolerance"] == pytest.approx(1e-5)
    assert abs(st["courant_max"] - exact["courant_max"]) <= 2 * st["tolerance"]
    (over,) = doc["budget"]["exceeded"]
    assert over["pass"] == "stability" and over["outcome"] == "fallback"


def test_linearisation_falls_back_to_a_numeric_jacobian(monkeypatch, fresh_cache):
    # reference_values.WENO5_LINEAR_FACE (Jiang and Shu 1996 [mem]): the fifth-order weighted
    # face linearises to (2, -13, 47, 27, -3)/60; the numeric Jacobian, rounded to rationals,
    # finds it too, and no order is claimed from it.
    monkeypatch.setattr(analysis, "linearise", endless_sympy)
    doc = analysis.analyse(load_scheme(EXAMPLES / "weno5_rk3.loom"), budget_seconds=2).to_json()
    assert "numerically" in doc["linearisation"] and "tolerance" in doc["linearisation"]
    (scheme,) = doc["stability"]["schemes"]
    z = sympy.Symbol("z")
    face = sum((sympy.Rational(v) * z ** k for k, v in ref.WENO5_LINEAR_FACE.value.items()),
               sympy.Integer(0))
    assert sympy.sympify(scheme["semi_discrete_z"], locals={"z": z}).equals(-(1 - 1 / z) * face)
    assert doc["order"]["overall"] is None


def test_every_pass_undecided_says_budget_exceeded(monkeypatch, fresh_cache):
    import fluxloom.compiler.analysis.symbol as symbol

    for name in ("linearise", "analyse_conservation", "analyse_tvd"):
        monkeypatch.setattr(analysis, name, endless_sympy)
    monkeypatch.setattr(symbol, "linearise_numerically", endless_sympy)
    doc = analysis.analyse(load_scheme(EXAMPLES / "lw_vanleer.loom"), budget_seconds=0.2).to_json()
    assert doc["consistent"] is None and doc["stability"]["kind"] is None
    assert doc["conservative"] is None and doc["tvd"]["holds"] is None
    reasons = " ".join(doc["undecided"])
    for what in ("consistency", "stability", "conservation", "tvd"):
        assert f"{what}: " in reasons
    assert reasons.count("budget exceeded") >= 4
    assert {o["pass"] for o in doc["budget"]["exceeded"]} >= {"linearisation", "conservation", "tvd"}


def test_check_with_a_tiny_budget_returns_and_says_so():
    # A fresh process, as a user runs it; the timeout only guards the test run itself.
    done = subprocess.run([sys.executable, "-m", "fluxloom.runtime.cli", "check",
                           str(EXAMPLES / "weno5_rk3.loom"), "--budget", "0.001", "--json"],
                          capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    doc = json.loads(done.stdout)
    assert doc["budget"]["seconds"] == 0.001 and doc["budget"]["exceeded"]
    assert any("budget exceeded" in reason for reason in doc["undecided"])
    assert not done.stderr


@pytest.mark.parametrize("value", ["0", "-2", "abc", "nan", "inf"])
def test_bad_budget_is_bad_input(value, capsys):
    assert main(["check", str(EXAMPLES / "upwind.loom"), "--budget", value]) == 2
    assert "--budget" in capsys.readouterr().err


def test_the_budget_does_not_change_verdicts_given_enough_time(fresh_cache):
    scheme = load_scheme(EXAMPLES / "clamped_centred_rk4.loom")
    first = analysis.analyse(scheme, budget_seconds=60).to_json()
    second = analysis.analyse(scheme, budget_seconds=120).to_json()
    for doc in (first, second):
        doc.pop("budget")
    assert first == second and not analysis.analyse(scheme, budget_seconds=60).over_budget


def test_the_passes_together_get_at_most_a_few_budgets():
    """Once earlier passes have used the analysis's whole budget, a later pass gets only
    the floor: it is cut short and says why (each pass is endless work here)."""
    passes = analysis._Passes(0.2)
    first = passes.run("first", lambda: endless_sympy(), undecided=lambda: "undecided")
    assert first == "undecided"
    passes.end = passes.clock()  # as if the first pass had used everything
    second = passes.run("second", lambda: endless_sympy(), lambda: endless_sympy(),
                        "a fallback that never ends", lambda: "undecided")
    assert second == "undecided"
    (_, how, note), = [entry for entry in passes.over if entry[0] == "second"]
    assert how == "undecided" and "whole budget" in note
    assert f"{budget.FLOOR_SECONDS:g} s per pass" in note
