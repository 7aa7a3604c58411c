"""`fluxloom verify FILE`: measure a scheme's kernel and hold it against the analysis.

Exit status 0 when every finding agrees with the analysis, 1 when any disagrees,
2 for bad input.
"""
from __future__ import annotations

import json
import sys
from pathlib import Path

from fluxloom.compiler.emit.targets import BACKENDS

from ..findings import Options, Prediction, verify_kernel
from ..prediction import analysis_document, split_analysis_document
from ..report import verification_json, verification_text, write_verification
from .common import (add_courant_option, add_set_option, add_spec_argument, add_split_option,
                     parse_courant, parse_dims_split, scheme_from_args)

VELOCITIES = ("+1", "-1", "varying")


def register(sub) -> None:
    parser = sub.add_parser(
        "verify", help="measure a scheme's kernel against what the analysis predicts",
        description="Run the generated kernel on standard profiles (convergence, bounds, new "
                    "extrema, total variation, conservation, stability, velocity sign) and "
                    "print each finding as predicted vs measured. Exit 1 if any disagrees.")
    add_spec_argument(parser)
    add_kernel_options(parser)
    parser.add_argument("--velocity", choices=VELOCITIES, default="+1",
                        help="face velocity: +1, -1, or 'varying' (conservation then also with "
                             "a sign-changing field; convergence and bounds need a constant one "
                             "and use +1) (default +1)")
    add_set_option(parser)
    parser.add_argument("--json", action="store_true", help="print the findings as JSON")
    parser.add_argument("--report", metavar="DIR",
                        help="also write a Markdown report, JSON and PNG figures into DIR")
    parser.add_argument("--force", action="store_true",
                        help="let --report replace files fluxloom did not write")
    add_decomposed_options(parser)
    add_split_options(parser)
    parser.set_defaults(run=run)


def add_decomposed_options(parser) -> None:
    parser.add_argument("--ranks", type=int, metavar="N",
                        help="also run the scheme decomposed over N MPI processes (launched with "
                             "mpiexec; needs fluxloom[mpi]) and compare it with the single-domain "
                             "run bit for bit; with --dims 2 on a 2-D process grid, split")
    parser.add_argument("--dims", type=int, default=1, metavar="D",
                        help="dimensions of the domain: 1, 2 to also run the 2-D cases "
                             "(rotation, swirling flow) or 3 the 3-D cases (uniform diagonal "
                             "flow, deformational flow) through split sweeps (default 1)")


GRIDS = ("uniform", "stretched", "perturbed")
BOUNDARIES = ("periodic", "wall", "open")


def add_split_options(parser) -> None:
    add_split_option(parser)
    parser.add_argument("--grid", choices=GRIDS, default="uniform",
                        help="also measure convergence on non-uniform cells (smoothly "
                             "stretched, a = 0.2 and 0.4, or 10%% random widths) beside the "
                             "uniform grid, through the sweep's per-cell dt/dx (default uniform)")
    parser.add_argument("--boundary", choices=BOUNDARIES, default="periodic",
                        help="domain edges: periodic (default), wall (also a wall-bounded "
                             "basin: mass drift, mirror image) or open (also an inflow/outflow "
                             "channel: outflow reflection); 2-D or 3-D cases too with --dims 2 or 3")


def check_split_options(args) -> tuple[int, str | None]:
    """(dims, splitting) of the run; LoomError (exit 2) for what is not built yet."""
    from fluxloom.compiler import LoomError

    dims, method = parse_dims_split(args.dims, args.split)
    if args.grid != "uniform" and dims > 1:
        raise LoomError(f"--grid {args.grid} with --dims {dims}: the {dims}-D cases run on "
                        "uniform cells; --grid measures 1-D convergence on non-uniform cells",
                        file="--grid")
    return dims, method


def add_kernel_options(parser) -> None:
    parser.add_argument("--backend", choices=BACKENDS, default="numpy",
                        help="which generated kernel to measure (default numpy)")
    parser.add_argument("--precision", choices=("double", "float"), default="double")
    add_courant_option(parser, "Courant number |u| dt/dx of the runs, e.g. 0.5 or 3/5 "
                               "(default 0.5)")


def load_for_measuring(scheme, backend: str, precision: str):
    from ..kernel import load_kernel

    return load_kernel(scheme, backend=backend, precision=precision)


def progress_printer(enabled: bool, prefix: str):
    if not enabled:
        return None

    def say(message: str) -> None:
        print(f"{prefix}: {message} ...", file=sys.stderr, flush=True)
    return say


def run(args) -> int:
    courant = parse_courant(args.courant)
    options = Options(courant=courant, velocity=args.velocity)
    options.check_size()            # before any work: tiny Courant numbers are refused
    dims, method = check_split_options(args)
    if args.ranks is not None:  # bad options before any work
        from ..decomposed.finding import check_options
        check_options(args.ranks, args.dims)
    if dims > 1:
        from ..multidim.findings import check_split_run
        from ..multidim.cases import grids_for
        check_split_run(grids_for(dims), courant, dims)
    if args.boundary != "periodic":
        from ..boundary_cases import boundary_steps
        boundary_steps(courant)
    scheme = scheme_from_args(args)
    if dims > 1:
        prediction = Prediction.from_document(split_analysis_document(scheme, courant, dims,
                                                                      method))
    else:
        prediction = Prediction.from_document(analysis_document(scheme, courant))
    kernel = load_for_measuring(scheme, args.backend, args.precision)
    if args.grid != "uniform":
        from ..grid_findings import check_grid_kernel
        check_grid_kernel(kernel, args.grid)
    say = progress_printer(sys.stderr.isatty() and not args.json, f"verify {scheme.name}")
    verification = verify_kernel(kernel, prediction, options, progress=say)
    decomposed = None
    if args.ranks is not None:
        from ..decomposed.finding import verify_decomposed, with_decomposed
        if say:
            say(f"decomposed run on {args.ranks} processes")
        decomposed = verify_decomposed(scheme, args.backend, args.precision, args.ranks,
                                       dims, options.courant, args.velocity, method=method)
        verification = with_decomposed(verification, decomposed)
    split = None
    if dims > 1:
        from ..multidim.findings import verify_split, with_split
        split = verify_split(kernel, prediction, method, courant, progress=say)
        verification = with_split(verification, split)
    grids = None
    if args.grid != "uniform":
        from ..grid_findings import verify_grids, with_grids
        grids = verify_grids(kernel, prediction, args.grid, courant, progress=say)
        verification = with_grids(verification, grids)
    boundary = None
    if args.boundary != "periodic":
        from ..boundary_cases import verify_boundary, with_boundary
        boundary = verify_boundary(scheme, prediction, args.boundary, args.backend,
                                   args.precision, courant, dims, method, progress=say)
        verification = with_boundary(verification, boundary)
    if args.report:
        written = write_verification(verification, Path(args.report), args.force)
        if split is not None:
            from ..multidim.report import write_split_report
            written += write_split_report(split, scheme.name, Path(args.report), args.force)
        if not args.json:
            print(f"report: {', '.join(str(p) for p in written)}", file=sys.stderr)
    if args.json:
        document = verification_json(verification)
        if decomposed is not None:
            document["decomposed"] = decomposed.to_json()
        if split is not None:
            from ..multidim.report import split_json
            document.update(split_json(split))
        if grids is not None:
            document["grids"] = grids.to_json()
        if boundary is not None:
            from ..boundary_cases import boundary_json
            document.update(boundary_json(boundary))
        print(json.dumps(document, indent=2))
    else:
        print(verification_text(verification), end="")
        if split is not None:
            from ..multidim.report import split_text
            print()
            print(split_text(split), end="")
        if grids is not None:
            from ..grid_findings import grids_text
            print()
            print(grids_text(grids), end="")
        if boundary is not None:
            from ..boundary_cases import boundary_text
            print()
            print(boundary_text(boundary), end="")
    return 0 if verification.agree else 1
