"""The demo: check, build, verify and compare the bundled examples in one scenario, into
a Markdown report (rendered from compiler/emit/templates/demo_report.md.j2) with
tables and figures, plus the generated kernels.

Everything the demo does is set by one `DemoSettings` object (tests pass small
ones). Files already in the output folder are replaced only when fluxloom wrote
them (or they are the same bytes); anything else of the user's is left alone and
the demo stops before doing any work.
"""
from __future__ import annotations

import time
from dataclasses import dataclass, field
from pathlib import Path

from fluxloom.compiler import LoomError, load_scheme
from fluxloom.compiler.analysis.claims import read_claims
from fluxloom.compiler.analysis.wording import (bounded_text, order_text, stability_text,
                                                verdict_text, yes_no)
from fluxloom.compiler.ir import parse_override

from .compare_report import notes, tables
from .comparison import DEFAULT_GRIDS, CompareSettings, Comparison, Variant, compare, \
    expand_variants
from .costs import TimingSettings
from .findings import NO_CLAIM, Options, Prediction, verify_kernel
from .report import MARKER, check_writable, prepare_directory, table, write_text, \
    write_verification
from .rules import AGREE, measured_set_text

SOURCE_ROOT = Path(__file__).resolve().parents[1]   # runtime/demo.py -> the source tree

VERIFY_SELECTION = (
    ("upwind", 0.5), ("lax_wendroff", 0.5), ("quickest", 0.5),
    ("ftcs", 0.5), ("kappa_rk3", 0.5), ("lw_vanleer", 0.5),
    ("lw_overreach", 0.8), ("lw_fct", 0.5), ("ftcs_clip", 0.5),
)


@dataclass(frozen=True)
class DemoSettings:
    """What the demo runs; `fluxloom demo` uses the defaults (and its --backend)."""

    examples: Path | None = None          # None: examples/ of the fluxloom source tree
    backend: str = "numpy"
    courant: float = 0.5
    verify_selection: tuple[tuple[str, float], ...] = VERIFY_SELECTION
    bounds_comparison: tuple[str, ...] = ("lax_wendroff", "lw_clip", "lw_fct", "lw_vanleer",
                                          "ftcs_clip")
    family: tuple[str, str] = ("kappa_rk3", "kappa=-1,0,1/3,1/2")
    analysis_figures: tuple[str, ...] = ("lax_wendroff", "lw_vanleer")
    compare_cells: int = 100
    grids: tuple[int, ...] = DEFAULT_GRIDS
    target_error: float = 0.01            # l1, smooth bell: "1 % of the hump"
    timing: TimingSettings = field(default_factory=TimingSettings)

    def examples_folder(self) -> Path:
        return examples_directory(self.examples or SOURCE_ROOT / "examples")

    def compare_settings(self) -> CompareSettings:
        return CompareSettings(backend=self.backend, courant=self.courant,
                               cells=self.compare_cells, grids=self.grids, timing=self.timing,
                               target_error=self.target_error)


def examples_directory(folder: Path) -> Path:
    """The bundled examples, or a clear error where they are not."""
    if not folder.is_dir() or not any(folder.glob("*.loom")):
        raise LoomError(f"the bundled examples were not found at {folder}; the demo needs the "
                        "examples/ folder of the fluxloom source tree (install fluxloom from "
                        "its source tree, e.g. pip install -e .)", file="demo")
    return folder


def figure_names(settings: DemoSettings) -> dict[str, str]:
    """The comparison figures, by role (file names under figures/)."""
    scheme, setting = settings.family
    param = setting.partition("=")[0].strip()
    return {"bounds_profiles": "compare-bounds.png",
            "bounds_accuracy": "compare-bounds-accuracy-cost.png",
            "family_profiles": "compare-kappa.png",
            "family_measures": f"compare-family-{scheme}-{param}.png"}


def planned_files(directory: Path, settings: DemoSettings) -> list[Path]:
    """The report and figures the demo writes (kernels are checked by the build step)."""
    files = [directory / "report.md"]
    files += [directory / "figures" / name for name in figure_names(settings).values()]
    for name, _ in settings.verify_selection:
        files += [directory / "verify" / f"{name}-{suffix}" for suffix in
                  ("convergence.png", "profiles.png", "stability.png", "verify.json",
                   "verify.md")]
    return files


# ---- the parts ---------------------------------------------------------------------

def check_part(examples, directory: Path, say, force: bool,
               settings: DemoSettings = DemoSettings()):
    """The analysis of every example as a table, figures for a few, and the documents."""
    from fluxloom.compiler.analysis import analyse

    from .analysis_plots import write_plots

    rows, docs = [], {}
    for i, path in enumerate(examples, 1):
        scheme = load_scheme(path)
        say("check", f"{scheme.name} ({i}/{len(examples)})")
        analysis = analyse(scheme, settings.courant)
        doc = analysis.to_json()
        docs[scheme.name] = (scheme, doc, analysis)
        claims = read_claims(doc)
        rows.append([scheme.name, scheme.time, order_text(claims.order, claims.courant),
                     stability_text(claims.stability), verdict_text(claims.monotone),
                     verdict_text(claims.tvd), yes_no(claims.conservative),
                     bounded_text(claims) if claims.bounds is not None else "-"])
    figures = []
    figure_dir = directory / "figures"
    for name in settings.analysis_figures:
        if name in docs:
            say("check", f"figures for {name}")
            figures += write_plots(docs[name][2], figure_dir, force=force)
    headers = ["scheme", "time", "order", "stability", "monotone", "TVD", "conservative",
               "bounded (clip, fct)"]
    return table(headers, rows, markdown=True), figures, docs


def build_part(examples, directory: Path, say, force: bool) -> list[Path]:
    from .writing import generated_files, plan_writes, write_planned

    kernel_dir = directory / "kernels"
    plans = []
    for i, path in enumerate(examples, 1):
        scheme = load_scheme(path)
        say("build", f"{scheme.name} ({i}/{len(examples)})")
        plans += plan_writes(kernel_dir, generated_files(scheme, "all", "double"), force)
    write_planned(kernel_dir, plans)
    return [target for target, _, _ in plans]


def verify_part(examples_dir: Path, directory: Path, say, settings: DemoSettings, force: bool):
    from fluxloom.compiler.analysis import analyse

    from .kernel import load_kernel

    results = []
    selection = settings.verify_selection
    for i, (name, courant) in enumerate(selection, 1):
        scheme = load_scheme(examples_dir / f"{name}.loom")
        say("verify", f"{name} at c = {courant:g} ({i}/{len(selection)})")
        prediction = Prediction.from_analysis(analyse(scheme, courant))
        kernel = load_kernel(scheme, backend=settings.backend)
        result = verify_kernel(kernel, prediction, Options(courant=courant))
        write_verification(result, directory / "verify", force)
        results.append(result)
    return results


def verify_table(results) -> str:
    rows = []
    for v in results:
        sine = v.convergence[0]
        st = v.stability
        agree = sum(f.verdict == AGREE for f in v.findings)
        unclaimed = sum(f.verdict == NO_CLAIM for f in v.findings)
        rows.append([f"[{v.scheme}](verify/{v.scheme}-verify.md)", f"{v.options.courant:g}",
                     f"{agree} agree, {unclaimed} no claim, {len(v.disagreements)} disagree",
                     "undecided" if v.prediction.order is None else str(v.prediction.order),
                     sine.finest_order["l1"],
                     stability_text(v.prediction.claims.stability),
                     ("grew at every c tried" if st and st.unstable_everywhere else
                      measured_set_text(st) if st else "not measured"),
                     "yes" if all(s.bounded and s.stopped_at is None for s in v.shapes) else "no",
                     max(s.new_extrema for s in v.shapes),
                     max(c.mass_drift for c in v.conservation)])
    headers = ["scheme", "c", "findings", "predicted order", "measured l1 order",
               "predicted stability", "measured stable for", "bounded", "new extrema",
               "mass drift"]
    return table(headers, rows, markdown=True)


@dataclass(frozen=True)
class ComparePart:
    bounds: Comparison
    family: Comparison
    figures: dict[str, Path]


def compare_part(examples_dir: Path, directory: Path, say, settings: DemoSettings,
                 force: bool) -> ComparePart:
    from .compare_plots import accuracy_cost_figure, family_figure, profiles_figure

    figure_dir = directory / "figures"
    figures = {role: figure_dir / name for role, name in figure_names(settings).items()}
    for path in figures.values():
        check_writable(path, force)
    figure_dir.mkdir(parents=True, exist_ok=True)
    options = settings.compare_settings()
    say("compare", "bounds: clamp against flux-corrected transport")
    bounds = compare([Variant(n, load_scheme(examples_dir / f"{n}.loom"))
                      for n in settings.bounds_comparison], options,
                     progress=lambda m: say("compare", m))
    profiles_figure(bounds, figures["bounds_profiles"])
    accuracy_cost_figure(bounds, figures["bounds_accuracy"])
    name, setting = settings.family
    parse_override(setting)  # validated like the command line's --set
    say("compare", f"the {name} family ({setting})")
    family = compare(expand_variants([examples_dir / f"{name}.loom"], [setting]), options,
                     progress=lambda m: say("compare", m))
    profiles_figure(family, figures["family_profiles"])
    if family.families:
        family_figure(family, family.families[0], figures["family_measures"])
    else:
        figures.pop("family_measures")
    return ComparePart(bounds, family, figures)


# ---- the report ----------------------------------------------------------------------

def _rel(path: Path, directory: Path) -> str:
    return path.relative_to(directory).as_posix()


def _headline(verified) -> str:
    disagree = [v for v in verified if not v.agree]
    if not disagree:
        return "Every finding of `verify` agrees with the analysis."
    return ("Findings that DISAGREE with the analysis: "
            + ", ".join(f"{v.scheme} ({', '.join(f.check for f in v.disagreements)})"
                        for v in disagree) + ". Each is a bug in fluxloom to look into.")


def _comparison_context(comparison: Comparison) -> dict:
    t = tables(comparison, markdown=True)
    return {"main_table": t["main"], "measures_table": t["measures"],
            "accuracy_table": t["accuracy"],
            "notes": [line.strip() for line in notes(comparison)]}


def report_context(directory: Path, settings: DemoSettings, check_table: str, check_figures,
                   kernels, verified, compared: ComparePart, seconds: float) -> dict:
    """Everything the report template shows, as strings and lists of strings."""
    figures = {role: _rel(path, directory) for role, path in compared.figures.items()}
    family_scheme, family_setting = settings.family
    return {
        "marker": f"<!-- {MARKER} demo -->",
        "headline": _headline(verified),
        "courant": f"{settings.courant:g}",
        "check_table": check_table,
        "check_figures": [{"name": f.stem, "path": _rel(f, directory)} for f in check_figures],
        "kernel_count": len(kernels),
        "kernel_examples": ", ".join(f"[{p.name}]({_rel(p, directory)})"
                                     for p in kernels if p.stem.startswith("lw_fct")),
        "verify_table": verify_table(verified),
        "verify_figures": [{"scheme": v.scheme, "path": f"verify/{v.scheme}-profiles.png"}
                           for v in verified],
        "compare_cells": settings.compare_cells,
        "grids": ", ".join(str(n) for n in compared.bounds.settings.ladder),
        "target_error": f"{settings.target_error:g}",
        "timing": f"median of {settings.timing.repeats} timings on {settings.timing.cells} "
                  "cells",
        "bounds": _comparison_context(compared.bounds),
        "family": _comparison_context(compared.family),
        "family_scheme": family_scheme,
        "family_setting": family_setting,
        "figures": figures,
        "family_measures_figures": [figures[k] for k in ("family_measures",) if k in figures],
        "bounds_files": " ".join(f"examples/{n}.loom" for n in settings.bounds_comparison),
        "seconds": f"{seconds:.0f}",
    }


def run_demo(directory: Path, settings: DemoSettings = DemoSettings(), force: bool = False,
             say=None) -> Path:
    """Run the whole demo into `directory`; returns the report's path."""
    from fluxloom.compiler.emit.reports import demo_report

    say = say or (lambda part, message: None)
    start = time.perf_counter()
    examples_dir = settings.examples_folder()
    examples = sorted(examples_dir.glob("*.loom"))
    directory = Path(directory)
    report_path = directory / "report.md"
    for path in planned_files(directory, settings):   # refuse before any work is done
        check_writable(path, force)
    directory = prepare_directory(directory)
    check_table, check_figures, _ = check_part(examples, directory, say, force, settings)
    kernels = build_part(examples, directory, say, force)
    verified = verify_part(examples_dir, directory, say, settings, force)
    compared = compare_part(examples_dir, directory, say, settings, force)
    seconds = time.perf_counter() - start
    context = report_context(directory, settings, check_table, check_figures, kernels,
                             verified, compared, seconds)
    write_text(report_path, demo_report(context), force)
    say("done", f"report in {report_path}")
    return report_path
