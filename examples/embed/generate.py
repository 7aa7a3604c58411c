"""Write one scheme's generated kernel files into a directory.

    python3 generate.py SPEC.loom OUTDIR [--precision double|float] [--target c|fortran|...]

Target c (the default) writes NAME.h, NAME.c and NAME_mod.f90; the targets are
those of `fluxloom build --target`.

The embedding hosts' Makefile calls this; a model's own build can do the same.
"""
from __future__ import annotations

import argparse
import sys
from pathlib import Path

from fluxloom.compiler import LoomError, load_scheme
from fluxloom.compiler.emit.targets import NAMES
from fluxloom.compiler.outputs import target_files


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.strip().splitlines()[0])
    parser.add_argument("spec", help="the scheme's .loom file")
    parser.add_argument("outdir", help="directory for the generated files")
    parser.add_argument("--precision", choices=("double", "float"), default="double")
    parser.add_argument("--target", choices=NAMES, default="c")
    args = parser.parse_args(argv)
    try:
        scheme = load_scheme(args.spec)
    except LoomError as err:
        print(err.render(), file=sys.stderr)
        return 2
    out = Path(args.outdir)
    out.mkdir(parents=True, exist_ok=True)
    for name, text in target_files(scheme, args.target, args.precision).items():
        path = out / name
        # Rewrite only on change, so make does not rebuild what is up to date.
        if not path.exists() or path.read_text() != text:
            path.write_text(text)
    return 0


if __name__ == "__main__":
    sys.exit(main())
