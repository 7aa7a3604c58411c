"""`fluxloom demo`: the whole chain into a report, without clobbering a user's files."""
from __future__ import annotations

import re
import shutil
from pathlib import Path

import pytest

from fluxloom.runtime.cli import main
from fluxloom.runtime.commands import demo

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"


@pytest.fixture
def small_demo(monkeypatch, tmp_path):
    """The demo over four examples, so the file handling can be tested quickly."""
    folder = tmp_path / "examples"
    folder.mkdir()
    for stem in ("upwind", "lax_wendroff", "lw_fct", "kappa_rk2"):
        shutil.copy(EXAMPLES / f"{stem}.loom", folder)
    monkeypatch.setattr(demo, "examples_directory", lambda: folder)
    monkeypatch.setattr(demo, "VERIFY_SELECTION", (("upwind", 0.5),))
    monkeypatch.setattr(demo, "BOUNDS_COMPARISON", ("lax_wendroff", "lw_fct"))
    monkeypatch.setattr(demo, "KAPPA_FAMILY", ("kappa_rk2", "kappa=0"))
    monkeypatch.setattr(demo, "ANALYSIS_FIGURES", ("lax_wendroff",))
    return tmp_path / "out"


def links_resolve(report: Path) -> list[str]:
    """Every figure or file the report links to, that does not exist."""
    text = report.read_text()
    targets = re.findall(r"\]\(([^)#]+)\)", text)
    assert targets
    return [t for t in targets if not (report.parent / t).exists()]


@pytest.mark.slow
def test_small_demo_writes_report_kernels_and_figures(small_demo, capsys):
    assert main(["demo", "-o", str(small_demo)]) == 0
    report = small_demo / "report.md"
    text = report.read_text()
    assert "## 1. check" in text and "## 3. verify" in text and "## 4. compare" in text
    assert "| scheme |" in text
    assert "Every finding of `verify` agrees with the analysis." in text
    assert links_resolve(report) == []
    assert sorted(p.name for p in (small_demo / "kernels").glob("upwind*")) == [
        "upwind.c", "upwind.h", "upwind.py", "upwind_mod.f90"]
    err = capsys.readouterr().err
    assert "verify: upwind" in err and "compare:" in err  # progress on the long parts
    # and it runs again over its own files
    assert main(["demo", "-o", str(small_demo)]) == 0


def test_demo_keeps_a_users_files(small_demo, capsys):
    small_demo.mkdir()
    (small_demo / "report.md").write_text("my own report\n")
    (small_demo / "notes.txt").write_text("keep me\n")
    assert main(["demo", "-o", str(small_demo)]) == 2
    assert "not written by fluxloom" in capsys.readouterr().err
    assert (small_demo / "report.md").read_text() == "my own report\n"
    assert (small_demo / "notes.txt").read_text() == "keep me\n"


def test_demo_keeps_a_users_figure(small_demo, capsys):
    figures = small_demo / "figures"
    figures.mkdir(parents=True)
    (figures / "compare-bounds.png").write_bytes(b"my drawing")
    assert main(["demo", "-o", str(small_demo)]) == 2
    assert (figures / "compare-bounds.png").read_bytes() == b"my drawing"


def test_examples_are_found_from_the_package():
    folder = demo.examples_directory()
    assert folder == EXAMPLES
    assert (folder / "lw_fct.loom").exists()


def test_missing_examples_give_a_clear_error(monkeypatch, tmp_path, capsys):
    fake = tmp_path / "site" / "fluxloom" / "runtime" / "commands" / "demo.py"
    monkeypatch.setattr(demo, "__file__", str(fake))
    assert main(["demo", "-o", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err
    assert "bundled examples were not found" in err and "Traceback" not in err


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
    assert len(list((out / "kernels").glob("*.c"))) == len(list(EXAMPLES.glob("*.loom")))
