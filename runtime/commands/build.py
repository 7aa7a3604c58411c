"""`fluxloom build FILE --target TARGET -o DIR`: write a scheme's kernels to disk.

The targets are the registry's (compiler/emit/targets.py) and `all`. The files are
deterministic (same spec, same bytes). A file already in DIR that differs from
what would be written is the user's, so it is left alone unless --force is given;
nothing is written at all in that case. Arguments and printing only: the writing
is runtime/writing.py.
"""
from __future__ import annotations

from pathlib import Path

from fluxloom.compiler import LoomError, load_scheme, parse_overrides
from fluxloom.compiler.emit.targets import NAMES, TARGETS
from fluxloom.compiler.variants import renamed, variant_name

from ..writing import generated_files, plan_writes, recogniser, write_planned
from .common import add_set_option, add_spec_argument, scheme_from_args

PRECISIONS = ("double", "float")


def register(sub) -> None:
    files = "; ".join(f"{t.name}: {t.summary}" for t in TARGETS)
    parser = sub.add_parser(
        "build", help="write the generated kernels (C, Fortran, numpy)",
        description=f"Generate a scheme's kernels ({files}).")
    add_spec_argument(parser)
    parser.add_argument("--target", choices=(*NAMES, "all"), default="all",
                        help="which kernels to write (default: all)")
    parser.add_argument("--precision", choices=PRECISIONS, default="double",
                        help="real type fixed at generation (default: double)")
    add_set_option(parser)
    parser.add_argument("--openmp", action="store_true",
                        help="C target: the kernel requires OpenMP and threads its sweeps "
                             "across lines (compile and link NAME.c with -fopenmp)")
    parser.add_argument("-o", "--output", metavar="DIR", required=True,
                        help="directory to write into (created if missing)")
    parser.add_argument("--name", metavar="NAME",
                        help="the kernel's name (files and symbols) instead of the scheme's; "
                             "with --set the default is the scheme's name followed by each "
                             "param and value (lw_sweby_beta_3_2)")
    parser.add_argument("--force", action="store_true",
                        help="overwrite files in DIR that differ from what would be written")
    parser.set_defaults(run=run)


def kernel_name(scheme, args) -> str:
    """--name, else the variant's name when --set is given, else the scheme's."""
    if args.name is not None:
        return args.name
    overrides = parse_overrides(args.overrides)
    return variant_name(scheme, overrides) if overrides else scheme.name


def run(args) -> int:
    scheme = scheme_from_args(args)
    if args.openmp and args.target == "numpy":
        raise LoomError("--openmp threads the C kernel's sweeps; use it with --target c or all",
                        file="--openmp")
    name = kernel_name(scheme, args)
    if name != scheme.name:
        scheme = renamed(scheme, name, "--name" if args.name is not None else "--set")

    def regenerate(params: dict) -> dict[str, str]:
        """The files as written for the same spec and name with other param values."""
        earlier = load_scheme(args.file, parse_overrides(f"{k}={v}" for k, v in params.items()))
        if earlier.name != name:
            earlier = renamed(earlier, name)
        return generated_files(earlier, args.target, args.precision, args.openmp)

    files = generated_files(scheme, args.target, args.precision, args.openmp)
    directory = Path(args.output)
    plan = plan_writes(directory, files, args.force, recogniser(regenerate))
    write_planned(directory, plan)
    words = {"write": "wrote", "replace": "replaced", "unchanged": "unchanged"}
    for path, _, action in plan:
        print(f"{words[action]}  {path}")
    return 0
