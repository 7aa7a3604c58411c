"""`fluxloom` command line: check | build | verify | compare | bench | demo.

Bad input ends with a located message and exit status 2, never a traceback.
"""
from __future__ import annotations

import argparse
import importlib
import os
import sys
import warnings
from importlib import metadata

from fluxloom.compiler import LoomError

from .commands import ORDER, SUMMARIES

EXIT_BAD_INPUT = 2
EXIT_INTERNAL = 3


def version() -> str:
    try:
        return metadata.version("fluxloom")
    except metadata.PackageNotFoundError:  # running from a source tree
        return "0+unknown"


def build_parser(only: str | None = None) -> argparse.ArgumentParser:
    """The argument parser; with `only`, just that command's module is imported."""
    parser = argparse.ArgumentParser(
        prog="fluxloom",
        description="Analyse, generate and verify conservative flux-form transport schemes.")
    parser.add_argument("--version", action="version", version=f"fluxloom {version()}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in ORDER:
        if only is not None and name != only:
            sub.add_parser(name, help=SUMMARIES[name])
            continue
        try:
            module = importlib.import_module(f"fluxloom.runtime.commands.{name}")
        except ModuleNotFoundError as err:
            if err.name != f"fluxloom.runtime.commands.{name}":
                raise
            continue
        module.register(sub)
    return parser


def main(argv=None) -> int:
    argv = sys.argv[1:] if argv is None else list(argv)
    command = next((a for a in argv if not a.startswith("-")), None)
    parser = build_parser(only=command if command in ORDER else "")
    args = parser.parse_args(argv)
    if not getattr(args, "command", None):
        parser.print_help()
        return EXIT_BAD_INPUT
    try:
        with warnings.catch_warnings():
            # Library warnings (sympy, numpy round-off) are not the user's business;
            # FLUXLOOM_DEBUG=1 shows them.
            if not os.environ.get("FLUXLOOM_DEBUG"):
                warnings.simplefilter("ignore")
            status = args.run(args)
    except LoomError as err:
        print(err.render(), file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        print("fluxloom: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0
    except Exception as err:  # a bug in fluxloom, not the user's fault
        if os.environ.get("FLUXLOOM_DEBUG"):
            raise
        print(f"fluxloom: internal error: {type(err).__name__}: {err}\n"
              "This is a bug in fluxloom; rerun with FLUXLOOM_DEBUG=1 for the traceback.",
              file=sys.stderr)
        return EXIT_INTERNAL
    return int(status or 0)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
