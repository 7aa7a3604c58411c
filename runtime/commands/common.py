"""Options and helpers shared by several commands."""
from __future__ import annotations

import argparse
import math
import re

from fluxloom.compiler import LoomError, Scheme, load_scheme, parse_overrides

_DECIMAL = r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?"
_COURANT = re.compile(rf"\s*({_DECIMAL})\s*(?:/\s*({_DECIMAL})\s*)?")
MAX_COURANT_TEXT = 64


def add_spec_argument(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", metavar="FILE", help="a .loom scheme file")


def add_set_option(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--set", dest="overrides", action="append", default=[],
                        metavar="NAME=VALUE",
                        help="override a param's default (exact: --set kappa=1/3); repeatable")


def scheme_from_args(args: argparse.Namespace, path: str | None = None) -> Scheme:
    return load_scheme(path or args.file, parse_overrides(args.overrides))


def parse_courant(text: str, option: str = "--courant") -> float:
    """A Courant number as the user writes it: 0.5, 1e-3 or a rational such as 3/5.

    Positive and finite, or a LoomError naming the option (exit status 2). Parsed
    as floats, never as exact integers, so `1e999999999` costs nothing."""
    match = _COURANT.fullmatch(text) if len(text) <= MAX_COURANT_TEXT else None
    if match is None:
        raise LoomError(f"{option} expects a number such as 0.5, 1e-3 or 3/5, given '{text}'",
                        file=option)
    top = float(match.group(1))
    bottom = float(match.group(2)) if match.group(2) is not None else 1.0
    if bottom == 0:
        raise LoomError(f"{option} {text}: division by zero", file=option)
    value = top / bottom if math.isfinite(top) and math.isfinite(bottom) else math.inf
    if not math.isfinite(value):
        raise LoomError(f"{option} {text} is not a finite number", file=option)
    if value <= 0:
        raise LoomError(f"{option} must be a positive number, given '{text}'", file=option)
    return value


def add_courant_option(parser: argparse.ArgumentParser, help_text: str,
                       default: str = "0.5") -> None:
    """--courant C, kept as text and read with parse_courant (rationals allowed)."""
    parser.add_argument("--courant", default=default, metavar="C", help=help_text)


# ---- split schemes (--dims, --split) ----------------------------------------------------

DEFAULT_SPLIT = "strang"


def add_split_option(parser: argparse.ArgumentParser) -> None:
    from fluxloom.compiler.splittings import NAMES

    parser.add_argument("--split", choices=NAMES, default=None,
                        help="how a multi-dimensional step sweeps the axes: lie (x then y), "
                             "alternating (x then y, then y then x), strang (x/2, y, x/2) "
                             f"(default {DEFAULT_SPLIT}; needs --dims 2 or 3)")


def parse_dims_split(dims: int, split: str | None, largest: int = 3) -> tuple[int, str | None]:
    """(dims, splitting) from --dims and --split; LoomError (exit 2) on a bad combination."""
    if not 1 <= dims <= largest:
        allowed = ", ".join(str(d) for d in range(1, largest))
        raise LoomError(f"--dims {dims}: choose {allowed} or {largest}", file="--dims")
    if dims == 1:
        if split is not None:
            raise LoomError(f"--split {split} splits a multi-dimensional step; give --dims 2 "
                            "or 3 with it", file="--split")
        return 1, None
    return dims, split or DEFAULT_SPLIT
