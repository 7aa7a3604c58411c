"""`fluxloom compare A.loom B.loom ...`: several schemes, or `--set` variants of one,
side by side: what the analysis predicts and what the kernels measure, with speed.
"""
from __future__ import annotations

import itertools
import json
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import sympy

from fluxloom.compiler import LoomError, load_scheme
from fluxloom.compiler.ir import parse_override

from fluxloom.compiler.analysis.wording import stability_text, verdict_text

from .. import harness, plots
from ..measurements import in_clip_range
from ..profiles import BELL, MIXED, SQUARE
from ..report import check_writable, json_safe, table
from .common import parse_courant
from .verify import add_kernel_options, load_for_measuring, predict, progress_printer


def register(sub) -> None:
    parser = sub.add_parser(
        "compare", help="put several schemes (or --set variants) side by side",
        description="Analyse and measure several schemes at one Courant number and grid: "
                    "predicted order, stability limit and TVD interval beside measured errors, "
                    "new extrema, mass drift and kernel speed.")
    parser.add_argument("files", nargs="+", metavar="FILE", help=".loom scheme files")
    parser.add_argument("--set", dest="overrides", action="append", default=[],
                        metavar="NAME=V1,V2,...",
                        help="param values; a list expands into one variant per value "
                             "(--set kappa=0,1/3,1/2); repeatable")
    add_kernel_options(parser)
    parser.add_argument("--cells", type=int, default=100, metavar="N",
                        help="cells for the error columns (default 100)")
    parser.add_argument("--sort", metavar="COLUMN", choices=sorted(SORT_KEYS),
                        help=f"sort rows by a column: {', '.join(sorted(SORT_KEYS))}")
    parser.add_argument("--json", action="store_true", help="print the table as JSON")
    parser.add_argument("--plot", metavar="FILE.png",
                        help="write a PNG overlaying the final profiles against the exact one")
    parser.add_argument("--force", action="store_true",
                        help="let --plot replace a file fluxloom did not write")
    parser.set_defaults(run=run)


# ---- variants ---------------------------------------------------------------------

@dataclass(frozen=True)
class Variant:
    label: str
    scheme: object


def _value_text(value) -> str:
    return str(sympy.nsimplify(value))


def expand_variants(paths, override_texts) -> list[Variant]:
    """One variant per file and per combination of the --set values its params take."""
    lists = [parse_override(text) for text in override_texts]
    variants, used = [], set()
    for path in paths:
        base = load_scheme(path)
        own = [(name, values) for name, values in lists if name in {p.name for p in base.params}]
        used.update(name for name, _ in own)
        for combo in itertools.product(*[values for _, values in own]):
            overrides = {name: value for (name, _), value in zip(own, combo)}
            scheme = load_scheme(path, overrides)
            suffix = ", ".join(f"{k}={_value_text(v)}" for k, v in overrides.items())
            variants.append(Variant(f"{scheme.name} ({suffix})" if suffix else scheme.name, scheme))
    unused = [name for name, _ in lists if name not in used]
    if unused:
        raise LoomError(f"--set {unused[0]}: none of the schemes has a param '{unused[0]}'",
                        file="--set")
    return variants


# ---- one row --------------------------------------------------------------------------

@dataclass(frozen=True)
class Row:
    label: str
    order: int | None
    stable_max: float | None     # upper end of the stable interval nearest 0 (sorting)
    stability_kind: str | None
    stability: str               # the stable set in words, islands included
    tvd: str                     # the TVD verdict in words, islands included
    l1: float | None             # smooth bell, one revolution
    l2: float | None
    linf: float | None
    square_l1: float | None      # square wave, one revolution
    new_extrema: int
    bounded: bool
    mass_drift: float
    speed: float                 # million cell-updates per second
    finals: dict = field(default_factory=dict, compare=False, repr=False)

    def to_json(self) -> dict:
        return json_safe({k: getattr(self, k) for k in COLUMNS})


COLUMNS = ("label", "order", "stable_max", "stability", "tvd", "l1", "l2", "linf", "square_l1",
           "new_extrema", "bounded", "mass_drift", "speed")
HEADERS = ("scheme", "order", "stability", "TVD", "l1", "l2", "linf", "l1 square",
           "new extrema", "bounded", "mass drift", "Mcell/s")
# column -> (key, descending): errors ascending, speed descending
SORT_KEYS = {"name": ("label", False), "order": ("order", True),
             "stability": ("stable_max", True), "l1": ("l1", False), "l2": ("l2", False),
             "linf": ("linf", False), "square": ("square_l1", False),
             "extrema": ("new_extrema", False), "drift": ("mass_drift", False),
             "speed": ("speed", True)}


def kernel_speed(kernel, courant: float, cells: int = 100_000, seconds: float = 0.15) -> float:
    """Million cell-updates per second of whole steps on a periodic domain."""
    rng = np.random.default_rng(7)
    halo = kernel.halo
    q = np.zeros(cells + 2 * halo, dtype=kernel.dtype)
    q[halo:halo + cells] = rng.random(cells)
    out = q.copy()
    u_face = harness.periodic_faces(np.ones(cells + 1, dtype=kernel.dtype),
                                    getattr(kernel, "face_halo", 0))
    kernel.step(q, u_face, courant, out=out)  # warm up (first call may build caches)
    steps, start = 0, time.perf_counter()
    while True:
        harness.fill_periodic(q, halo)
        kernel.step(q, u_face, courant, out=out)
        q, out = out, q
        steps += 1
        elapsed = time.perf_counter() - start
        if elapsed >= seconds and steps >= 3:
            return cells * steps / elapsed / 1e6


def measure_variant(variant: Variant, backend: str, precision: str, courant: float,
                    cells: int, speed_cells: int = 100_000) -> Row:
    scheme = variant.scheme
    pred = predict(scheme, courant)
    claims = pred.claims
    main = next((p for p in claims.stability.stable.parts if not p.is_point), None)
    kernel = load_for_measuring(scheme, backend, precision)
    clip = pred.clip


    def in_range(profile):
        return in_clip_range(profile, clip)
    smooth = harness.convergence(kernel, in_range(BELL), courant, 1.0, (cells,)).rows[0]
    square = harness.convergence(kernel, in_range(SQUARE), courant, 1.0, (cells,)).rows[0]
    shapes = [harness.shape(kernel, in_range(p), courant, 1.0, cells) for p in (SQUARE, MIXED)]
    drifts = [harness.conservation(kernel, in_range(MIXED), courant, v, cells).mass_drift
              for v in ("+1", "varying")]
    e = smooth.errors
    return Row(
        label=variant.label, order=pred.order, stable_max=main.hi if main else None,
        stability_kind=claims.stability.kind, stability=stability_text(claims.stability),
        tvd=verdict_text(claims.tvd),
        l1=e.l1 if e else None, l2=e.l2 if e else None, linf=e.linf if e else None,
        square_l1=square.errors.l1 if square.errors else None,
        new_extrema=max(s.new_extrema for s in shapes),
        bounded=all(s.bounded and s.stopped_at is None for s in shapes),
        mass_drift=max(drifts),
        speed=kernel_speed(kernel, min(courant, 1.0), speed_cells),
        finals={"bell": (smooth.final, smooth.exact), "square": (square.final, square.exact),
                "mixed": (shapes[1].final, shapes[1].exact)})


def compare(variants, backend="numpy", precision="double", courant=0.5, cells=100,
            sort=None, progress=None, speed_cells: int = 100_000) -> list[Row]:
    rows = []
    for i, variant in enumerate(variants, 1):
        if progress:
            progress(f"{variant.label} ({i}/{len(variants)})")
        rows.append(measure_variant(variant, backend, precision, courant, cells, speed_cells))
    return sort_rows(rows, sort)


def sort_rows(rows, column):
    if not column:
        return rows
    key, descending = SORT_KEYS[column]
    present = [r for r in rows if getattr(r, key) is not None]
    missing = [r for r in rows if getattr(r, key) is None]
    return sorted(present, key=lambda r: getattr(r, key), reverse=descending) + missing


def table_rows(rows):
    return [[r.label, "undecided" if r.order is None else str(r.order), r.stability, r.tvd,
             r.l1, r.l2, r.linf, r.square_l1, r.new_extrema, "yes" if r.bounded else "no",
             r.mass_drift, r.speed] for r in rows]


def compare_table(rows, markdown: bool = False) -> str:
    return table(HEADERS, table_rows(rows), markdown=markdown)


def overlay(rows, path: Path, courant: float, cells: int) -> Path:
    entries = [(r.label, r.finals) for r in rows]
    return plots.overlay_figure(entries, path,
                                f"one revolution, N = {cells}, c = {courant:g}")


def run(args) -> int:
    if args.cells < 8:
        raise LoomError(f"--cells must be at least 8, given {args.cells}", file="--cells")
    courant = parse_courant(args.courant)
    harness.check_run_size(args.cells, courant)
    variants = expand_variants(args.files, args.overrides)
    if args.plot:
        check_writable(Path(args.plot), args.force)
    say = progress_printer(sys.stderr.isatty() and not args.json, "compare")
    rows = compare(variants, args.backend, args.precision, courant, args.cells, args.sort, say)
    if args.json:
        print(json.dumps({"courant": courant, "cells": args.cells, "backend": args.backend,
                          "precision": args.precision,
                          "rows": [r.to_json() for r in rows]}, indent=2))
    else:
        print(f"compare at c = {courant:g}, N = {args.cells} (errors after one revolution: "
              f"l1/l2/linf on the smooth bell, l1 on the square wave; mass drift: the larger of "
              f"a steady and a sign-changing flow; speed on {args.backend} {args.precision})")
        print(compare_table(rows))
    if args.plot:
        overlay(rows, Path(args.plot), courant, args.cells)
    return 0
