"""`fluxloom bench FILE [--cells N] [--steps K] [--json]`: how fast the kernels run.

Reports cell-updates per second of the generated C (at -O2 and -O3) and numpy
kernels, of the hand-written kernels of the same scheme where there is one, and
of two streaming references (a sweep over the step's inputs and output, and a
plain copy), for three velocity fields, plus the ratios the project's
speed targets are stated in. Nothing here is a test: speed is only measured.
"""
from __future__ import annotations

import json
import sys

from fluxloom.compiler import LoomError

from ..speed import OPT_LEVELS, VELOCITY_FIELDS, measure, targets
from .common import add_set_option, add_spec_argument, scheme_from_args

MIN_CELLS = 64


def register(sub) -> None:
    parser = sub.add_parser(
        "bench", help="measure kernel speed (cell-updates per second)",
        description="Time the generated C and numpy kernels against hand-written kernels of "
                    "the same scheme and streaming references, for smooth (sign-changing), "
                    "constant-sign and random-sign face velocities.")
    add_spec_argument(parser)
    add_set_option(parser)
    parser.add_argument("--cells", type=int, default=1_000_000, metavar="N",
                        help="interior cells (default: 1000000)")
    parser.add_argument("--steps", type=int, default=20, metavar="K",
                        help="steps per timed run; the best of 5 runs counts (default: 20)")
    parser.add_argument("--json", action="store_true", help="print JSON instead of tables")
    parser.add_argument("--dims", type=int, choices=(1, 2), default=1,
                        help="2: time the generated sweeps on a SIZE x SIZE array against "
                             "hand-written C sweeps and a 2-D copy (default 1)")
    parser.add_argument("--size", type=int, default=4096, metavar="SIZE",
                        help="--dims 2: cells per side (default 4096)")
    parser.add_argument("--threads", type=int, default=2, metavar="T",
                        help="--dims 2: OpenMP threads compared with one (default 2)")
    parser.add_argument("--tracers", type=int, default=10, metavar="K",
                        help="--dims 2: tracers in one call compared with K calls (default 10)")
    parser.set_defaults(run=run)


COLUMN = 19  # wide enough for "-O3 -march=native"


def _mega(value) -> str:
    return f"{'-':>{COLUMN - 1}}" if value is None else f"{value / 1e6:{COLUMN - 1}.1f}"


def render(result, found, params=()) -> str:
    lines = [f"{result.scheme}: {result.cells} cells, best of 5 runs of {result.steps} steps, "
             "double precision" + "".join(f", {p.name} = {p.value}" for p in params),
             f"hand-written counterpart: {result.counterpart or 'none (generated kernels only)'}",
             "speed in million cell-updates per second"]
    label_width = 44
    for f in result.fields:
        lines.append("")
        title = f"velocity {f.field} ({f.sign_changes} sign changes)"
        lines.append(f"{title:<{label_width}}" + "".join(f"{opt:>{COLUMN}}" for opt in OPT_LEVELS))
        rows = [("generated C", f.generated_c), ("hand-written C", f.handwritten_c),
                ("streaming sweep (q, u_face -> out)", f.sweep),
                ("streaming copy (q -> out)", f.stream)]
        for label, values in rows:
            if values:
                lines.append(f"  {label:<{label_width - 2}}" + "".join(
                    f" {_mega(values.get(opt))}" for opt in OPT_LEVELS))
        lines.append(f"  {'generated numpy (no flags)':<{label_width - 2}} {_mega(f.generated_numpy)}")
        if f.handwritten_numpy is not None:
            lines.append(f"  {'hand-written numpy':<{label_width - 2}} {_mega(f.handwritten_numpy)}")
    lines.append("")
    lines.append("numpy peak extra memory (arrays of the domain's size):")
    for key, value in result.numpy_memory.items():
        lines.append(f"  {key:<28} {value:6.2f}")
    lines.append("")
    lines.append("targets (ratio from this run, target; (info) lines compare, they are not targets)")
    for t in found:
        verdict = {True: "met   ", False: "MISSED", None: "(info)"}[t.met]
        lines.append(f"  {verdict} {t.value:6.2f} >= {t.target:4.2f}  {t.what}")
    return "\n".join(lines)


def as_json(result, found, params=()) -> dict:
    return {
        "scheme": result.scheme,
        "cells": result.cells,
        "steps": result.steps,
        "precision": "double",
        "params": {p.name: str(p.value) for p in params},
        "unit": "cell-updates per second",
        "counterpart": result.counterpart,
        "fields": [{
            "velocity": f.field,
            "sign_changes": f.sign_changes,
            "generated_c": f.generated_c,
            "handwritten_c": f.handwritten_c or None,
            "sweep": f.sweep,
            "stream": f.stream,
            "generated_numpy": f.generated_numpy,
            "handwritten_numpy": f.handwritten_numpy,
        } for f in result.fields],
        "numpy_peak_extra_arrays": result.numpy_memory,
        "targets": [{"what": t.what, "ratio": t.value, "target": t.target, "met": t.met,
                     "binding": t.binding}
                    for t in found],
    }


def run_sweeps(args) -> int:
    from ..build import openmp_supported
    from ..sweep_bench import measure_sweeps, render_sweeps

    for option, value, least in (("--size", args.size, 8), ("--threads", args.threads, 1),
                                 ("--tracers", args.tracers, 1)):
        if value < least:
            raise LoomError(f"{option} must be at least {least}, given {value}", file=option)
    scheme = scheme_from_args(args)
    if not openmp_supported():
        raise LoomError("bench --dims 2 needs a C compiler that builds with -fopenmp",
                        file="--dims")

    def progress(text):
        print(f"measuring {scheme.name} sweeps: {text}", file=sys.stderr, flush=True)
    found = measure_sweeps(scheme, args.size, args.threads, args.tracers,
                           progress=None if args.json else progress)
    print(json.dumps(found, indent=2) if args.json else render_sweeps(found), end="\n"
          if args.json else "")
    return 0


def run(args) -> int:
    if args.dims == 2:
        return run_sweeps(args)
    if args.cells < MIN_CELLS:
        raise LoomError(f"--cells must be at least {MIN_CELLS}, given {args.cells}", file="--cells")
    if args.steps < 1:
        raise LoomError(f"--steps must be at least 1, given {args.steps}", file="--steps")
    scheme = scheme_from_args(args)
    def progress(text):
        print(f"measuring {scheme.name}: {text}", file=sys.stderr, flush=True)
    result = measure(scheme, args.cells, args.steps, fields=VELOCITY_FIELDS,
                     progress=None if args.json else progress)
    limited_single_step = scheme.limited and scheme.time == "euler"
    found = targets(result, limited_single_step)
    if args.json:
        print(json.dumps(as_json(result, found, scheme.params), indent=2))
    else:
        print(render(result, found, scheme.params))
    return 0
