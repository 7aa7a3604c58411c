"""`fluxloom compare A.loom B.loom ...`: several schemes, or `--set` variants of one,
side by side. Arguments and printing only; the work is runtime/comparison.py, the
tables and JSON runtime/compare_report.py, the figures runtime/compare_plots.py.
"""
from __future__ import annotations

import json
import sys
from pathlib import Path

from fluxloom.compiler import LoomError

from ..comparison import (DEFAULT_GRIDS, SORT_KEYS, CompareSettings, compare, expand_variants,
                          families, sorted_comparison)
from ..costs import TimingSettings
from ..report import check_writable, prepare_directory
from .common import parse_courant
from .verify import add_kernel_options, progress_printer

PROFILES_FIGURE = "compare-profiles.png"
ACCURACY_FIGURE = "compare-accuracy-cost.png"


def register(sub) -> None:
    parser = sub.add_parser(
        "compare", help="put several schemes (or --set variants) side by side",
        description="Analyse and measure several schemes at one Courant number: predicted "
                    "order, stability and TVD beside measured errors, the measures modellers "
                    "judge by (peak retained, front width, overshoot, measured stability "
                    "limit, mass drift) and the cost per cell-update; accuracy against cost "
                    "over a ladder of grids, and the cheapest scheme for a target error.")
    parser.add_argument("files", nargs="+", metavar="FILE", help=".loom scheme files")
    parser.add_argument("--set", dest="overrides", action="append", default=[],
                        metavar="NAME=V1,V2,...",
                        help="param values; a list expands into one variant per value "
                             "(--set kappa=0,1/3,1/2); repeatable")
    add_kernel_options(parser)
    parser.add_argument("--cells", type=int, default=100, metavar="N",
                        help="cells for the per-scheme columns (default 100)")
    parser.add_argument("--grids", default=",".join(map(str, DEFAULT_GRIDS)), metavar="N1,N2,...",
                        help="the grids of the accuracy-against-cost ladder (default "
                             f"{','.join(map(str, DEFAULT_GRIDS))})")
    parser.add_argument("--target-error", metavar="E",
                        help="report the grid and cost each scheme needs for this error, and "
                             "the cheapest")
    parser.add_argument("--target-norm", choices=("l1", "linf"), default="l1",
                        help="the norm of --target-error (default l1)")
    parser.add_argument("--repeats", type=int, default=TimingSettings.repeats, metavar="R",
                        help=f"timings per kernel (default {TimingSettings.repeats})")
    parser.add_argument("--timing-cells", type=int, default=TimingSettings.cells, metavar="N",
                        help=f"cells of the timed domain (default {TimingSettings.cells})")
    parser.add_argument("--sort", metavar="COLUMN", choices=sorted(SORT_KEYS),
                        help=f"sort rows by a column: {', '.join(sorted(SORT_KEYS))}")
    parser.add_argument("--json", action="store_true", help="print the comparison as JSON")
    parser.add_argument("--plot", metavar="FILE.png",
                        help="write a PNG overlaying the final profiles against the exact one")
    parser.add_argument("--plots", metavar="DIR",
                        help=f"write every figure into DIR: {PROFILES_FIGURE}, {ACCURACY_FIGURE} "
                             "and, for a --set family, compare-family-SCHEME-PARAM.png")
    parser.add_argument("--force", action="store_true",
                        help="let --plot/--plots replace files fluxloom did not write")
    parser.set_defaults(run=run)


def _grids(text: str) -> tuple[int, ...]:
    try:
        grids = tuple(int(item) for item in text.split(","))
    except ValueError:
        raise LoomError(f"--grids expects whole numbers such as 25,50,100, given '{text}'",
                        file="--grids") from None
    return grids


def _target(text: str | None) -> float | None:
    if text is None:
        return None
    try:
        value = float(text)
    except ValueError:
        raise LoomError(f"--target-error expects a number such as 1e-3, given '{text}'",
                        file="--target-error") from None
    return value


def family_figure_name(family, index: int, taken: set) -> str:
    name = f"compare-family-{family.scheme}-{family.param}.png"
    if name in taken:
        name = f"compare-family-{family.scheme}-{family.param}-{index}.png"
    taken.add(name)
    return name


def figure_paths(args, variants) -> dict:
    """{what: path} of every figure asked for (known before any work is done)."""
    paths = {}
    if args.plot:
        paths["plot"] = Path(args.plot)
    if args.plots:
        folder = Path(args.plots)
        paths["profiles"] = folder / PROFILES_FIGURE
        paths["accuracy"] = folder / ACCURACY_FIGURE
        taken = set()
        for i, fam in enumerate(families(variants)):
            paths[("family", i)] = folder / family_figure_name(fam, i, taken)
    return paths


def run(args) -> int:
    settings = CompareSettings(
        backend=args.backend, precision=args.precision, courant=parse_courant(args.courant),
        cells=args.cells, grids=_grids(args.grids),
        timing=TimingSettings(cells=args.timing_cells, repeats=args.repeats),
        target_error=_target(args.target_error), target_norm=args.target_norm)
    settings.check()
    variants = expand_variants(args.files, args.overrides)
    paths = figure_paths(args, variants)
    if args.plots:
        prepare_directory(Path(args.plots))
    for path in paths.values():             # refuse before any work is done
        check_writable(path, args.force)
    say = progress_printer(sys.stderr.isatty() and not args.json, "compare")
    comparison = compare(variants, settings, say)
    shown = sorted_comparison(comparison, args.sort)
    if args.json:
        from ..compare_report import comparison_json

        print(json.dumps(comparison_json(shown), indent=2))
    else:
        from ..compare_report import comparison_text

        print(comparison_text(shown), end="")
    write_figures(comparison, paths)
    return 0


def write_figures(comparison, paths: dict) -> None:
    if not paths:
        return
    from ..compare_plots import accuracy_cost_figure, family_figure, profiles_figure

    for key in ("plot", "profiles"):
        if key in paths:
            profiles_figure(comparison, paths[key])
    if "accuracy" in paths:
        accuracy_cost_figure(comparison, paths["accuracy"])
    for i, fam in enumerate(comparison.families):
        if ("family", i) in paths:
            family_figure(comparison, fam, paths[("family", i)])
