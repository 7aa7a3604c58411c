"""`fluxloom compare`: variants from --set lists, the table, sorting, the overlay figure."""
from __future__ import annotations

import json
from pathlib import Path

import pytest

from fluxloom.runtime.cli import main
from fluxloom.runtime.commands import compare as compare_command

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"


def ex(stem: str) -> str:
    return str(EXAMPLES / f"{stem}.loom")


def test_set_list_expands_into_variants():
    variants = compare_command.expand_variants([ex("kappa_rk3"), ex("upwind")],
                                               ["kappa=0,1/3,1/2"])
    assert [v.label for v in variants] == ["kappa_rk3 (kappa=0)", "kappa_rk3 (kappa=1/3)",
                                           "kappa_rk3 (kappa=1/2)", "upwind"]
    values = [v.scheme.params[0].value for v in variants[:3]]
    assert [str(x) for x in values] == ["0", "1/3", "1/2"]


def test_set_for_a_param_no_scheme_has_is_bad_input(capsys):
    assert main(["compare", ex("upwind"), ex("lax_wendroff"), "--set", "kappa=0,1"]) == 2
    assert "none of the schemes has a param 'kappa'" in capsys.readouterr().err


def test_bad_set_value_is_bad_input(capsys):
    assert main(["compare", ex("kappa_rk3"), "--set", "kappa=0,x"]) == 2
    assert "'x' is not a number" in capsys.readouterr().err


def test_bounds_comparison_json(capsys):
    # issue 6: Lax-Wendroff, + clamp, + FCT, and a van Leer limiter side by side.
    status = main(["compare", ex("lax_wendroff"), ex("lw_clip"), ex("lw_fct"), ex("lw_vanleer"),
                   "--json", "--cells", "80"])
    doc = json.loads(capsys.readouterr().out)
    assert status == 0 and doc["cells"] == 80
    rows = {r["label"]: r for r in doc["rows"]}
    assert set(rows) == {"lax_wendroff", "lw_clip", "lw_fct", "lw_vanleer"}
    assert rows["lax_wendroff"]["new_extrema"] > 0 and not rows["lax_wendroff"]["bounded"]
    assert rows["lw_clip"]["bounded"] and rows["lw_clip"]["mass_drift"] > 1e-6
    assert rows["lw_fct"]["bounded"] and rows["lw_fct"]["new_extrema"] == 0
    assert rows["lw_fct"]["mass_drift"] <= 1e-12
    assert rows["lw_vanleer"]["bounded"] and rows["lw_vanleer"]["new_extrema"] == 0
    for row in rows.values():
        assert row["speed"] > 0 and row["l1"] > 0 and row["order"] == 2
    # the FCT square wave is sharper than the plain high-order scheme's wiggly one
    assert rows["lw_fct"]["square_l1"] < rows["lax_wendroff"]["square_l1"]


def test_sorting_and_text_table(capsys, tmp_path):
    png = tmp_path / "overlay.png"
    status = main(["compare", ex("upwind"), ex("lax_wendroff"), ex("fromm"), "--sort", "l1",
                   "--cells", "50", "--plot", str(png)])
    out = capsys.readouterr().out
    assert status == 0
    lines = [line.split()[0] for line in out.splitlines()[3:6]]
    assert lines == ["fromm", "lax_wendroff", "upwind"]  # third, second, first order
    assert png.read_bytes().startswith(b"\x89PNG")


def test_plot_does_not_overwrite_a_users_file(capsys, tmp_path):
    png = tmp_path / "mine.png"
    png.write_bytes(b"not ours")
    assert main(["compare", ex("upwind"), "--plot", str(png)]) == 2
    assert png.read_bytes() == b"not ours"


def test_sort_rows_puts_missing_values_last():
    rows = [compare_command.Row("a", None, None, "unstable", "unstable for every c > 0", "no",
                                None, None, None, None, 0, False, 0.0, 1.0),
            compare_command.Row("b", 1, 1.0, "conditional", "conditional, stable for [0, 1]",
                                "no", 0.1, 0.1, 0.1, 0.2, 0, True, 0.0, 2.0)]
    assert [r.label for r in compare_command.sort_rows(rows, "l1")] == ["b", "a"]
    assert [r.label for r in compare_command.sort_rows(rows, "speed")] == ["b", "a"]


@pytest.mark.parametrize("cells", ["4", "-1"])
def test_too_few_cells_is_bad_input(capsys, cells):
    assert main(["compare", ex("upwind"), "--cells", cells]) == 2
    assert "--cells" in capsys.readouterr().err
