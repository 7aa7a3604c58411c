"""Options and helpers shared by several commands."""
from __future__ import annotations

import argparse

from fluxloom.compiler import Scheme, load_scheme, parse_overrides


def add_spec_argument(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", metavar="FILE", help="a .loom scheme file")


def add_set_option(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--set", dest="overrides", action="append", default=[],
                        metavar="NAME=VALUE",
                        help="override a param's default (exact: --set kappa=1/3); repeatable")


def scheme_from_args(args: argparse.Namespace, path: str | None = None) -> Scheme:
    return load_scheme(path or args.file, parse_overrides(args.overrides))
