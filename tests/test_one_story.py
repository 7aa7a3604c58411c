"""One fact reads the same in every output: check (text and JSON), compare, the demo's
report, verify's findings and report, and the comment atop every generated file.

The facts themselves are held against numpy first (an island of stability, a
limiter's failing range of r), then found, word for word, in each output.
"""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from fluxloom.compiler import load_scheme
from fluxloom.runtime.cli import main
from fluxloom.runtime import demo
from fluxloom.runtime.writing import generated_files
from fluxloom.runtime.prediction import predict
from fluxloom.runtime.findings import Options, verify_kernel
from fluxloom.runtime.kernel import load_kernel
from fluxloom.runtime.report import verification_markdown, verification_text

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"

# scheme -> the words each fact must read as, everywhere
FACTS = {
    # QUICKEST: stable on [0, 1] and at c = 2 (Leonard 1979 [mem]; checked with numpy below);
    # monotone, hence TVD, only at the exact shifts c = 1 and c = 2.
    "quickest": {"stability": "conditional, stable for [0, 1] and c = 2",
                 "TVD": "only for c = 1 and c = 2"},
    # lw_overreach: TVD on [1/3, 2/3] and at c = 1 (Sweby 1984 region argument [mem],
    # reference_values.OVERREACH_TVD), so proven stable (bounded) there and nowhere else
    # proven; its limiter leaves Sweby's region for r in (0, 1/2) and r > 2.
    "lw_overreach": {"stability": "conditional, stable for [1/3, 2/3] and c = 1",
                     "TVD": "yes for [1/3, 2/3] and c = 1",
                     "limiter": "Sweby's TVD region fails for r in (0, 1/2) and r in (2, oo)"},
    # FCT: total variation is not analysed: undecided, never "no" or "-"
    "lw_fct": {"stability": "conditional, stable for [0, 1]", "TVD": "undecided"},
}


def test_quickest_island_and_overreach_failing_range_hold_numerically():
    # QUICKEST's G from its face (reference_values.QUICKEST_FACE), with numpy: |G| <= 1 at c = 1 and
    # 2, > 1 at c = 1.5 and 2.1.
    theta = np.linspace(1e-3, np.pi, 4001)
    z = np.exp(1j * theta)

    def gain(c):
        face = (1 + z) / 2 - c / 2 * (z - 1) - (1 - c * c) / 6 * (z - 2 + 1 / z)
        return np.abs(1 - c * face * (1 - 1 / z)).max()
    assert gain(1.0) <= 1 + 1e-12 and gain(2.0) <= 1 + 1e-12
    assert gain(1.5) > 1.01 and gain(2.1) > 1.001
    # overreach(r) = max(0, min(3r, 1), min(r, 3)) leaves [0, min(2r, 2)] exactly where
    # 0 < r < 1/2 or r > 2 (numpy on a fine grid)
    r = np.linspace(-2, 6, 80001)
    psi = np.maximum.reduce([np.zeros_like(r), np.minimum(3 * r, 1), np.minimum(r, 3)])
    positive = r > 0
    outside = np.where(positive, (psi > np.minimum(2 * r, 2) + 1e-12) | (psi < 0), psi != 0)
    assert np.array_equal(outside, ((r > 0) & (r < 0.5)) | (r > 2))


def _check_text(capsys, path: Path) -> str:
    assert main(["check", str(path)]) == 0
    return capsys.readouterr().out


def _check_json(capsys, path: Path) -> dict:
    assert main(["check", str(path), "--json"]) == 0
    return json.loads(capsys.readouterr().out)


@pytest.mark.parametrize("stem", sorted(FACTS))
def test_every_output_tells_the_same_story(stem, capsys, tmp_path):
    path = EXAMPLES / f"{stem}.loom"
    scheme = load_scheme(path)
    facts = FACTS[stem]
    outputs = {}
    outputs["check"] = _check_text(capsys, path)
    assert main(["compare", str(path), "--cells", "16", "--grids", "16,32", "--repeats", "1",
                 "--timing-cells", "1000"]) == 0
    outputs["compare"] = capsys.readouterr().out
    table, _, _ = demo.check_part([path], tmp_path, lambda *a: None, True)
    outputs["demo"] = table
    for name, text in generated_files(scheme, "all", "double").items():
        outputs[name] = text
    result = verify_kernel(load_kernel(scheme, "numpy"), predict(scheme, 0.5),
                           Options(cells=(25, 50), conservation_steps=10))
    outputs["verify"] = verification_text(result)
    outputs["verify report"] = verification_markdown(result, {})
    needs = {"stability": set(outputs), "TVD": set(outputs) - {"verify", "verify report"},
             "limiter": {"check"} | {n for n in outputs if n.startswith(stem)}}
    for fact, words in facts.items():
        for where in needs[fact]:
            assert words in outputs[where], (fact, where)
    # the JSON's readable sets say the same
    doc = _check_json(capsys, path)
    assert facts["stability"].endswith(doc["stability"]["schemes"][0]["set"]) or \
        len(doc["stability"]["schemes"]) > 1
    if doc["tvd"]["holds"] is None:
        assert facts["TVD"] == "undecided" and doc["tvd"]["set"] is None
    else:
        assert facts["TVD"].endswith(doc["tvd"]["set"])
    if "limiter" in facts:
        failure = doc["limiters"]["overreach"]["failures"][0]
        assert failure["property"] == "sweby_tvd"
        assert facts["limiter"].endswith(failure["r"])
        assert (failure["r_min"], failure["r_max"]) == (0.0, None)


def test_undecided_is_never_printed_as_no_or_a_dash(capsys, tmp_path):
    path = EXAMPLES / "lw_fct.loom"
    text = _check_text(capsys, path)
    assert "TVD           undecided" in text and "convergence   undecided" in text
    table, _, _ = demo.check_part([path], tmp_path, lambda *a: None, True)
    row = next(line for line in table.splitlines() if line.startswith("| lw_fct"))
    cells = [c.strip() for c in row.strip("|").split("|")]
    assert cells[5] == "undecided" and cells[4] == "undecided"   # TVD, monotone


def test_plots_say_why_a_figure_is_missing(capsys, tmp_path):
    spec = tmp_path / "clamp_face.loom"
    spec.write_text("scheme clamp_face {\n  time ssp_rk3\n"
                    "  flux = u * (q[0] + max(0, min(q[1] - q[0], q[0] - q[-1])) / 2)\n}\n")
    assert main(["check", str(spec), "--plots", str(tmp_path / "figs")]) == 0
    captured = capsys.readouterr()
    assert "no limiter figure" in captured.out and captured.err == ""


def test_no_library_warnings_reach_stderr(capsys, tmp_path):
    # 5 max(0, r) / (2 (1 + r)) is 0/0 at r = -1: its figure samples r = -1 exactly, where
    # numpy would warn about an invalid division
    spec = tmp_path / "singular.loom"
    spec.write_text("scheme singular {\n  let r = ratio(q[0] - q[-1], q[1] - q[0])\n"
                    "  limiter f(r) = 5 * max(0, r) / (2 * (1 + r))\n"
                    "  flux = u * (q[0] + (1 - c) / 2 * f(r) * (q[1] - q[0]))\n}\n")
    status = main(["check", str(spec), "--plots", str(tmp_path / "figs")])
    err = capsys.readouterr().err
    assert "Warning" not in err and "Traceback" not in err
    assert status == 0 or (status == 2 and "singular.loom:" in err)  # or refused, located


def test_values_read_exact_when_short_and_as_numbers_otherwise():
    from fluxloom.compiler.analysis.wording import value_text

    # sqrt(3) is the imaginary-axis limit of SSP-RK3 (common practice, no source)
    assert value_text(3 ** 0.5, "sqrt(3)") == "sqrt(3)"
    # a decimal from a numeric method is no exact form: shown to 6 digits
    assert value_text(3.611122, "3.61112200000000") == "3.61112"
    assert value_text(None, "oo") == "oo"
    long_root = "CRootOf(2*x**3 - 3*x**2 + 3*x - 3, 0)"
    assert value_text(1.2563726, long_root) == "1.25637"
