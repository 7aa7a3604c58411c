"""The front end: every example compiles, and the IR holds the facts of the spec."""
from __future__ import annotations

import subprocess
import sys

import pytest
import sympy

from fluxloom.compiler import load_scheme, parse_overrides, scheme_from_text
from fluxloom.compiler.symbols import C, R, U, Ratio, offset_of, q
from fluxloom.runtime.cli import build_parser, main
from fluxloom.runtime.commands import ORDER

from pathlib import Path

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"


def test_every_example_compiles(example_path):
    scheme = load_scheme(example_path)
    assert scheme.name == example_path.stem
    assert scheme.about, "every bundled example says what it is"
    assert scheme.offsets


def test_there_are_enough_examples():
    assert len(list(EXAMPLES.glob("*.loom"))) >= 14


@pytest.mark.parametrize("stem, offsets, halo", [
    ("upwind", (0,), 1),
    ("lax_wendroff", (0, 1), 1),
    ("beam_warming", (-1, 0), 2),
    ("fromm", (-1, 0, 1), 2),
    ("lw_vanleer", (-1, 0, 1), 2),
    ("kappa_rk3", (-1, 0, 1), 2),
])
def test_stencil_and_halo(stem, offsets, halo):
    # Halo widths: face j+1/2 of an upwind-frame offset k touches cell j+k or j+1-k;
    # counting by hand (common practice, no source).
    scheme = load_scheme(EXAMPLES / f"{stem}.loom")
    assert scheme.offsets == offsets
    assert scheme.stencil_reach == halo


def test_face_expression_is_the_flux_over_u():
    scheme = load_scheme(EXAMPLES / "lax_wendroff.loom")
    expected = q(0) + (1 - C) / 2 * (q(1) - q(0))
    assert sympy.simplify(scheme.face - expected) == 0
    assert scheme.uses_c and not scheme.limited and scheme.time == "euler"


def test_limiters_are_kept_by_name():
    scheme = load_scheme(EXAMPLES / "lw_vanleer.loom")
    assert scheme.limited
    (limiter,) = scheme.limiters
    assert limiter.name == "vanleer"
    assert sympy.simplify(limiter.body - (R + sympy.Abs(R)) / (1 + sympy.Abs(R))) == 0
    # van Leer at r = 1 is 1 (Sweby 1984, from memory: all the classic limiters pass through (1, 1)).
    assert limiter(1) == 1
    expanded = scheme.expand_limiters(scheme.face)
    assert not expanded.has(sympy.Function("vanleer"))
    assert expanded.has(Ratio)


def test_decimals_and_rationals_stay_exact():
    scheme = scheme_from_text("scheme d {\n  param a = 0.1\n  param b = 1/3\n"
                              "  flux = u * (q[0] + a * b * (q[1] - q[0]))\n}\n")
    assert [p.value for p in scheme.params] == [sympy.Rational(1, 10), sympy.Rational(1, 3)]


def test_ratio_is_zero_on_a_zero_denominator():
    assert Ratio(sympy.Integer(3), sympy.Integer(0)) == 0
    assert Ratio(sympy.Integer(3), sympy.Integer(6)) == sympy.Rational(1, 2)


def test_offset_symbols_round_trip():
    for k in range(-4, 5):
        assert offset_of(q(k)) == k
    assert offset_of(U) is None


def test_overrides_change_the_fingerprint_and_values():
    base = load_scheme(EXAMPLES / "kappa_rk3.loom")
    again = load_scheme(EXAMPLES / "kappa_rk3.loom")
    assert base.fingerprint == again.fingerprint
    varied = load_scheme(EXAMPLES / "kappa_rk3.loom", parse_overrides(["kappa=0"]))
    assert varied.fingerprint != base.fingerprint
    assert varied.params[0].value == 0 and base.params[0].value == sympy.Rational(1, 3)


def test_one_flux_serves_both_signs_because_it_is_linear_in_u():
    scheme = load_scheme(EXAMPLES / "lax_friedrichs.loom")
    assert U not in scheme.face.free_symbols


def test_version_and_help_for_every_command(capsys):
    with pytest.raises(SystemExit) as done:
        main(["--version"])
    assert done.value.code == 0
    assert capsys.readouterr().out.startswith("fluxloom ")
    registered = build_parser()._subparsers._group_actions[0].choices
    for name in registered:
        with pytest.raises(SystemExit) as done:
            main([name, "--help"])
        assert done.value.code == 0
        assert "usage: fluxloom " + name in capsys.readouterr().out
    assert set(registered) <= set(ORDER)


def test_console_script_runs_from_a_shell():
    out = subprocess.run([sys.executable, "-m", "fluxloom.runtime.cli", "--version"],
                         capture_output=True, text=True, check=True)
    assert out.stdout.startswith("fluxloom ")
