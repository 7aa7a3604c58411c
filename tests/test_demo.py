"""`fluxloom demo`: the whole chain into a report, without clobbering a user's files."""
from __future__ import annotations

import re
import shutil
from pathlib import Path

import pytest

from fluxloom.compiler import LoomError
from fluxloom.runtime.cli import main
from fluxloom.runtime.costs import TimingSettings
from fluxloom.runtime.demo import DemoSettings, run_demo

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"


@pytest.fixture
def small(tmp_path):
    """Settings for the demo over four examples, so the file handling is tested quickly;
    timing kept small (cost is measured, never asserted)."""
    folder = tmp_path / "examples"
    folder.mkdir()
    for stem in ("upwind", "lax_wendroff", "lw_fct", "kappa_rk2"):
        shutil.copy(EXAMPLES / f"{stem}.loom", folder)
    return DemoSettings(examples=folder, verify_selection=(("upwind", 0.5),),
                        bounds_comparison=("lax_wendroff", "lw_fct"),
                        family=("kappa_rk2", "kappa=0,1/2"), analysis_figures=("lax_wendroff",),
                        grids=(25, 50, 100), target_error=0.05,
                        timing=TimingSettings(cells=2000, repeats=3))


@pytest.fixture
def small_demo(tmp_path):
    return tmp_path / "out"


def links_resolve(report: Path) -> list[str]:
    """Every figure or file the report links to, that does not exist."""
    text = report.read_text()
    targets = re.findall(r"\]\(([^)#]+)\)", text)
    assert targets
    return [t for t in targets if not (report.parent / t).exists()]


@pytest.mark.slow
def test_small_demo_writes_report_kernels_and_figures(small, small_demo):
    said = []
    report = run_demo(small_demo, small, say=lambda part, message: said.append(f"{part}: {message}"))
    assert report == small_demo / "report.md"
    text = report.read_text()
    assert "## 1. check" in text and "## 3. verify" in text and "## 4. compare" in text
    assert "| scheme |" in text
    assert "Every finding of `verify` agrees with the analysis." in text
    assert links_resolve(report) == []
    assert sorted(p.name for p in (small_demo / "kernels").glob("upwind*")) == [
        "upwind.c", "upwind.h", "upwind.py", "upwind_kernel.f90", "upwind_mod.f90"]
    # issue 15: the accuracy-against-cost figure and the measures table of the scenario
    assert "![accuracy against cost](figures/compare-bounds-accuracy-cost.png)" in text
    assert "| scheme | peak retained | front width (cells) | overshoot | undershoot |" in text
    assert "(figures/compare-family-kappa_rk2-kappa.png)" in text
    assert "best kappa by" in text and "target l1 error 0.05" in text
    assert any(s.startswith("verify: upwind") for s in said)
    assert any(s.startswith("compare:") for s in said)   # progress on the long parts
    # and it runs again over its own files
    assert run_demo(small_demo, small) == report


def test_demo_report_is_strict_about_missing_values():
    # the template renders with StrictUndefined: a value the runtime forgot is an error
    import jinja2

    from fluxloom.compiler.emit.reports import demo_report

    with pytest.raises(jinja2.UndefinedError):
        demo_report({"marker": "<!-- -->"})


def test_demo_keeps_a_users_files(small_demo, capsys):
    small_demo.mkdir()
    (small_demo / "report.md").write_text("my own report\n")
    (small_demo / "notes.txt").write_text("keep me\n")
    assert main(["demo", "-o", str(small_demo)]) == 2
    assert "not written by fluxloom" in capsys.readouterr().err
    assert (small_demo / "report.md").read_text() == "my own report\n"
    assert (small_demo / "notes.txt").read_text() == "keep me\n"


@pytest.mark.parametrize("name", ["compare-bounds.png", "compare-bounds-accuracy-cost.png",
                                  "compare-family-kappa_rk3-kappa.png"])
def test_demo_keeps_a_users_figure(small_demo, capsys, name):
    figures = small_demo / "figures"
    figures.mkdir(parents=True)
    (figures / name).write_bytes(b"my drawing")
    assert main(["demo", "-o", str(small_demo)]) == 2
    assert (figures / name).read_bytes() == b"my drawing"
    assert not (small_demo / "report.md").exists()


def test_examples_are_found_from_the_package():
    folder = DemoSettings().examples_folder()
    assert folder == EXAMPLES
    assert (folder / "lw_fct.loom").exists()


def test_missing_examples_give_a_clear_error(tmp_path):
    settings = DemoSettings(examples=tmp_path / "site" / "fluxloom" / "examples")
    with pytest.raises(LoomError, match="bundled examples were not found"):
        run_demo(tmp_path / "out", settings)
    assert not (tmp_path / "out").exists()


@pytest.mark.slow
def test_full_demo(tmp_path, capsys):
    out = tmp_path / "fluxloom-demo"
    assert main(["demo", "-o", str(out)]) == 0
    report = out / "report.md"
    assert links_resolve(report) == []
    text = report.read_text()
    # the bounds story of issue 6 and the overreaching limiter are in the report
    for name in ("lw_clip", "lw_fct", "lw_vanleer", "ftcs_clip", "lw_overreach"):
        assert name in text
    assert "figures/compare-bounds-accuracy-cost.png" in text and "| peak retained |" in text
    assert len(list((out / "kernels").glob("*.c"))) == len(list(EXAMPLES.glob("*.loom")))
