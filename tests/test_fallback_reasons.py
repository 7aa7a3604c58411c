"""Every fallback from an exact to a numeric verdict says why, and `check` shows it."""
from __future__ import annotations

from conftest import EXAMPLES

from fluxloom.compiler import load_scheme
from fluxloom.compiler.analysis import analyse
from fluxloom.compiler.analysis.stability import MAX_EXACT_DEGREE
from fluxloom.runtime.cli import main


def test_a_numeric_stability_set_says_why_the_exact_path_was_left(capsys):
    # SSPRK(10,4) over a centred fourth-order stencil: R(z) has degree 10 and the
    # symbol degree 2 in e^(i theta), so |G|^2 - 1 is of high degree in
    # s = sin^2(theta/2), beyond the exact path's limit (common practice, no source).
    scheme = load_scheme(EXAMPLES / "centred4_ssp10.loom")
    method = analyse(scheme).to_json()["stability"]["method"]
    assert method.startswith("numeric (degree ")
    degree = int(method.split("degree ")[1].split()[0])
    assert degree > MAX_EXACT_DEGREE and f"above {MAX_EXACT_DEGREE}" in method
    assert main(["check", str(EXAMPLES / "centred4_ssp10.loom")]) == 0
    assert f"above {MAX_EXACT_DEGREE}" in capsys.readouterr().out


def test_an_exact_set_is_not_called_numeric():
    method = analyse(load_scheme(EXAMPLES / "lax_wendroff.loom")).to_json()["stability"]["method"]
    assert method.startswith("exact")
