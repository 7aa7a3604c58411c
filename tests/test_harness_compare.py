"""`fluxloom compare`: variants from --set lists, the tables, sorting, JSON names, figures."""
from __future__ import annotations

import json
from pathlib import Path

import pytest

from fluxloom.runtime.cli import main
from fluxloom.runtime.comparison import (CompareSettings, compare, expand_variants, families,
                                         sort_rows)
from fluxloom.runtime.costs import TimingSettings

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
QUICK = ["--repeats", "2", "--timing-cells", "1000"]   # timing is measured, never asserted


def ex(stem: str) -> str:
    return str(EXAMPLES / f"{stem}.loom")


def test_set_list_expands_into_variants():
    variants = expand_variants([ex("kappa_rk3"), ex("upwind")], ["kappa=0,1/3,1/2"])
    assert [v.label for v in variants] == ["kappa_rk3 (kappa=0)", "kappa_rk3 (kappa=1/3)",
                                           "kappa_rk3 (kappa=1/2)", "upwind"]
    values = [v.scheme.params[0].value for v in variants[:3]]
    assert [str(x) for x in values] == ["0", "1/3", "1/2"]
    (family,) = families(variants)
    assert (family.scheme, family.param, family.members) == ("kappa_rk3", "kappa", (0, 1, 2))


def test_families_of_two_lists_fix_the_other_param(tmp_path):
    spec = tmp_path / "two.loom"
    spec.write_text("scheme two {\n  param a = 0\n  param b = 0\n  time ssp_rk2\n"
                    "  flux = u * (q[0] + a / 4 * (q[1] - q[0]) + b / 4 * (q[0] - q[-1]))\n}\n")
    variants = expand_variants([spec], ["a=1/2,0", "b=0,1/4"])
    titles = sorted(f.title for f in families(variants))
    assert titles == ["two over a (b=0)", "two over a (b=1/4)", "two over b (a=0)",
                      "two over b (a=1/2)"]
    # members in the order of the param's value
    fam = next(f for f in families(variants) if f.title == "two over a (b=0)")
    assert [str(v) for v in fam.values] == ["0", "1/2"]


def test_set_for_a_param_no_scheme_has_is_bad_input(capsys):
    assert main(["compare", ex("upwind"), ex("lax_wendroff"), "--set", "kappa=0,1"]) == 2
    assert "none of the schemes has a param 'kappa'" in capsys.readouterr().err


def test_bad_set_value_is_bad_input(capsys):
    assert main(["compare", ex("kappa_rk3"), "--set", "kappa=0,x"]) == 2
    assert "'x' is not a number" in capsys.readouterr().err


@pytest.mark.parametrize("option", [["--grids", "25,x"], ["--grids", "4,8"],
                                    ["--grids", "100"],
                                    ["--target-error", "abc"], ["--target-error", "-1"],
                                    ["--repeats", "0"]])
def test_bad_compare_options_are_bad_input(capsys, option):
    assert main(["compare", ex("upwind"), *option]) == 2
    err = capsys.readouterr().err
    assert option[0] in err and "Traceback" not in err


def test_bounds_comparison_json(capsys):
    # issue 6: Lax-Wendroff, + clamp, + FCT, and a van Leer limiter side by side.
    status = main(["compare", ex("lax_wendroff"), ex("lw_clip"), ex("lw_fct"), ex("lw_vanleer"),
                   "--json", "--cells", "80", "--grids", "100,200,400", *QUICK])
    doc = json.loads(capsys.readouterr().out)
    assert status == 0 and doc["cells"] == 80 and doc["grids"] == [80, 100, 200, 400]
    rows = {r["label"]: r for r in doc["rows"]}
    assert set(rows) == {"lax_wendroff", "lw_clip", "lw_fct", "lw_vanleer"}
    assert rows["lax_wendroff"]["new_extrema"] > 0 and not rows["lax_wendroff"]["bounded"]
    assert rows["lw_clip"]["bounded"] and rows["lw_clip"]["mass_drift"] > 1e-6
    assert rows["lw_fct"]["bounded"] and rows["lw_fct"]["new_extrema"] == 0
    assert rows["lw_fct"]["mass_drift"] <= 1e-12
    assert rows["lw_vanleer"]["bounded"] and rows["lw_vanleer"]["new_extrema"] == 0
    for row in rows.values():
        assert row["speed"] > 0 and row["l1"] > 0 and row["predicted_order"] == 2
        assert row["agree"] and row["disagree"] == []
    # the FCT square wave is sharper than the plain high-order scheme's wiggly one
    assert rows["lw_fct"]["square_l1"] < rows["lax_wendroff"]["square_l1"]
    # a clamp or FCT keeps the data in range (to round-off); Lax-Wendroff overshoots
    assert rows["lw_clip"]["overshoot"] == 0 and rows["lw_fct"]["overshoot"] < 1e-12
    assert rows["lax_wendroff"]["overshoot"] > 0.05


def test_json_names_scripts_rely_on(capsys):
    # issue 15: the names of `compare --json` that scripts may rely on
    status = main(["compare", ex("upwind"), ex("kappa_rk3"), "--set", "kappa=1/3,1/2", "--json",
                   "--cells", "50", "--grids", "25,50,100", "--target-error", "0.05", *QUICK])
    doc = json.loads(capsys.readouterr().out)
    assert status == 0
    for row in doc["rows"]:
        for key in ("scheme", "params", "cost", "errors", "peak_retained", "front_width",
                    "overshoot", "undershoot", "stability_measured", "stages", "halo",
                    "mass_drift", "units"):
            assert key in row, key
        assert set(row["cost"]) >= {"median", "min", "max"}
        assert row["cost"]["min"] <= row["cost"]["median"] <= row["cost"]["max"]
        assert [e["n"] for e in row["errors"]] == [25, 50, 100]
        assert all(set(e) >= {"n", "l1", "linf"} for e in row["errors"])
        # verdicts are structured objects, worded as check words them
        analysis = row["analysis"]
        assert isinstance(analysis["stability"], dict) and "text" in analysis["stability"]
        assert analysis["tvd"]["holds"] in (True, False, None)
        assert isinstance(analysis["tvd"]["where"]["parts"], list)
        assert row["units"]["front_width"].startswith("cells")
    kappa = [r for r in doc["rows"] if r["scheme"] == "kappa_rk3"]
    assert [r["params"]["kappa"]["exact"] for r in kappa] == ["1/3", "1/2"]
    assert kappa[1]["params"]["kappa"]["value"] == 0.5
    assert kappa[0]["stages"] == 3 and kappa[0]["halo"] == 2
    # each variant carries the kernel name `build --set` would give it: distinct and stable
    assert [r["variant"] for r in kappa] == ["kappa_rk3_kappa_1_3", "kappa_rk3_kappa_1_2"]
    assert doc["rows"][0]["variant"] == "upwind"
    upwind = doc["rows"][0]
    assert upwind["analysis"]["stability"]["text"] == "conditional, stable for [0, 1]"
    assert upwind["analysis"]["stability"]["stable"]["parts"][0]["max_exact"] == "1"
    # first-order upwind is stable up to c = 1 (common practice, no source)
    assert abs(upwind["stability_measured"]["max"] - 1.0) < 0.01
    cheapest = doc["cheapest"]
    assert set(cheapest) >= {"scheme", "n", "cost"}
    assert set(cheapest["cost"]) >= {"median", "min", "max"}
    chosen = next(r for r in doc["rows"] if r["label"] == cheapest["label"])
    assert chosen["target"]["n"] == cheapest["n"]
    assert all(r["target"]["cost"] is None or r["target"]["cost"]["median"]
               >= cheapest["cost"]["median"] for r in doc["rows"])
    assert doc["families"][0]["param"] == "kappa"


def test_sorting_text_tables_and_figures(capsys, tmp_path):
    png = tmp_path / "overlay.png"
    figures = tmp_path / "figures"
    status = main(["compare", ex("upwind"), ex("lax_wendroff"), ex("fromm"), "--sort", "l1",
                   "--cells", "50", "--grids", "25,50", "--plot", str(png),
                   "--plots", str(figures), *QUICK])
    out = capsys.readouterr().out
    assert status == 0
    lines = [line.split()[0] for line in out.splitlines()[3:6]]
    assert lines == ["fromm", "lax_wendroff", "upwind"]  # third, second, first order
    assert "peak retained" in out and "accuracy against cost" in out
    assert png.read_bytes().startswith(b"\x89PNG")
    for name in ("compare-profiles.png", "compare-accuracy-cost.png"):
        assert (figures / name).read_bytes().startswith(b"\x89PNG")


@pytest.mark.slow
def test_family_figure_and_best_values(capsys, tmp_path):
    # issue 15 part 5: the measures against the param, so the best value can be read off
    status = main(["compare", ex("kappa_rk3"), "--set", "kappa=-1,0,1/3,1/2", "--cells", "50",
                   "--grids", "25,50", "--plots", str(tmp_path), *QUICK])
    out = capsys.readouterr().out
    assert status == 0
    assert (tmp_path / "compare-family-kappa_rk3-kappa.png").read_bytes().startswith(b"\x89PNG")
    line = next(line for line in out.splitlines() if line.startswith("family kappa_rk3"))
    # kappa = 1/3 is the third-order member: the smallest l1 error of the family
    # (the kappa family's usual reading; common practice, no source)
    assert "l1 error 1/3;" in line


def test_plot_does_not_overwrite_a_users_file(capsys, tmp_path):
    png = tmp_path / "mine.png"
    png.write_bytes(b"not ours")
    assert main(["compare", ex("upwind"), "--plot", str(png)]) == 2
    assert png.read_bytes() == b"not ours"
    (tmp_path / "figs").mkdir()
    (tmp_path / "figs" / "compare-accuracy-cost.png").write_bytes(b"mine too")
    assert main(["compare", ex("upwind"), "--plots", str(tmp_path / "figs")]) == 2
    assert (tmp_path / "figs" / "compare-accuracy-cost.png").read_bytes() == b"mine too"


def test_sort_rows_puts_missing_values_last():
    variants = expand_variants([ex("upwind"), ex("ftcs")], [])
    settings = CompareSettings(cells=200, grids=(50, 200), stability=False,
                               timing=TimingSettings(cells=500, repeats=1, steps=1))
    rows = compare(variants, settings).rows
    # FTCS diverges within one revolution on 200 cells: it has no error there
    assert rows[1].error_at_cells("l1") is None
    assert [r.label for r in sort_rows(rows, "l1")] == ["upwind", "ftcs"]
    assert [r.label for r in sort_rows(rows, "peak")] == ["upwind", "ftcs"]


@pytest.mark.parametrize("cells", ["4", "-1"])
def test_too_few_cells_is_bad_input(capsys, cells):
    assert main(["compare", ex("upwind"), "--cells", cells]) == 2
    assert "--cells" in capsys.readouterr().err
