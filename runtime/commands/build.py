"""`fluxloom build FILE --target c|numpy|all -o DIR`: write a scheme's kernels to disk.

The files are deterministic (same spec, same bytes). A file already in DIR that
differs from what would be written is the user's, so it is left alone unless
--force is given; nothing is written at all in that case.
"""
from __future__ import annotations

from pathlib import Path

from fluxloom.compiler import LoomError
from fluxloom.compiler.emit import c_files
from fluxloom.compiler.emit.numpy_ import numpy_source

from .common import add_set_option, add_spec_argument, scheme_from_args

TARGETS = ("c", "numpy", "all")
PRECISIONS = ("double", "float")


def register(sub) -> None:
    parser = sub.add_parser(
        "build", help="write the C kernel, header, Fortran module and numpy module",
        description="Generate a scheme's kernels: NAME.h, NAME.c and NAME_mod.f90 (target c), "
                    "NAME.py (target numpy).")
    add_spec_argument(parser)
    parser.add_argument("--target", choices=TARGETS, default="all",
                        help="which kernels to write (default: all)")
    parser.add_argument("--precision", choices=PRECISIONS, default="double",
                        help="real type fixed at generation (default: double)")
    add_set_option(parser)
    parser.add_argument("--openmp", action="store_true",
                        help="C target: the kernel requires OpenMP and threads its sweeps "
                             "across lines (compile and link NAME.c with -fopenmp)")
    parser.add_argument("-o", "--output", metavar="DIR", required=True,
                        help="directory to write into (created if missing)")
    parser.add_argument("--force", action="store_true",
                        help="overwrite files in DIR that differ from what would be written")
    parser.set_defaults(run=run)


def generated_files(scheme, target: str, precision: str, openmp: bool = False) -> dict[str, str]:
    """{file name: text} for one target, in a fixed order."""
    files: dict[str, str] = {}
    if target in ("c", "all"):
        files.update(c_files(scheme, precision, openmp=openmp))
    if target in ("numpy", "all"):
        files[f"{scheme.name}.py"] = numpy_source(scheme, precision)
    return dict(sorted(files.items()))


def plan_writes(directory: Path, files: dict[str, str], force: bool) -> list[tuple[Path, str, str]]:
    """(path, text, action) per file, action 'write' or 'unchanged'; refuses to clobber."""
    if directory.exists() and not directory.is_dir():
        raise LoomError(f"'{directory}' exists and is not a directory", file="-o")
    plan, blocked = [], []
    for name, text in files.items():
        path = directory / name
        action = "write"
        if path.exists():
            if path.is_dir():
                raise LoomError(f"'{path}' is a directory; cannot write a file there", file="-o")
            try:
                current = path.read_text(encoding="utf-8")
            except (UnicodeDecodeError, OSError):
                current = None
            if current == text:
                action = "unchanged"
            elif not force:
                blocked.append(path)
        plan.append((path, text, action))
    if blocked:
        names = ", ".join(str(p) for p in blocked)
        raise LoomError(f"{names} already exist{'s' if len(blocked) == 1 else ''} and "
                        f"differ{'s' if len(blocked) == 1 else ''} from what would be written; "
                        "nothing was written (use --force to overwrite)", file="build")
    return plan


def run(args) -> int:
    scheme = scheme_from_args(args)
    if args.openmp and args.target == "numpy":
        raise LoomError("--openmp threads the C kernel's sweeps; use it with --target c or all",
                        file="--openmp")
    files = generated_files(scheme, args.target, args.precision, args.openmp)
    directory = Path(args.output)
    plan = plan_writes(directory, files, args.force)
    try:
        directory.mkdir(parents=True, exist_ok=True)
        for path, text, action in plan:
            if action == "write":
                path.write_text(text, encoding="utf-8", newline="\n")
    except OSError as err:
        raise LoomError(f"cannot write to '{directory}': {err.strerror or err}", file="build") from None
    for path, _, action in plan:
        print(f"{'wrote' if action == 'write' else 'unchanged'}  {path}")
    return 0
