"""`fluxloom demo [-o DIR]`: check, build, verify and compare the bundled examples in
one scenario, into a Markdown report with tables and figures plus the generated kernels.
Arguments and progress only; the demo itself is runtime/demo.py.
"""
from __future__ import annotations

import sys
import time

from fluxloom.compiler.emit.targets import BACKENDS

from ..demo import DemoSettings, run_demo

DEFAULT_DIRECTORY = "fluxloom-demo"


def register(sub) -> None:
    parser = sub.add_parser(
        "demo", help="check, build, verify and compare the bundled examples into a report",
        description="Run the whole tool chain over the bundled examples in a scenario of our "
                    "own and write a Markdown report with tables and figures, plus the "
                    "generated kernels, into DIR.")
    parser.add_argument("-o", "--output", metavar="DIR", default=DEFAULT_DIRECTORY,
                        help=f"where to write the demo (default ./{DEFAULT_DIRECTORY})")
    parser.add_argument("--backend", choices=BACKENDS, default="numpy",
                        help="which generated kernels the measurements run (default numpy)")
    parser.add_argument("--force", action="store_true",
                        help="replace files in DIR that fluxloom did not write")
    parser.set_defaults(run=run)


class Progress:
    """One line per step on stderr, with the elapsed time, for the long parts."""

    def __init__(self):
        self.start = time.perf_counter()

    def __call__(self, part: str, message: str) -> None:
        elapsed = time.perf_counter() - self.start
        print(f"[{elapsed:5.1f}s] {part}: {message}", file=sys.stderr, flush=True)


def run(args) -> int:
    report = run_demo(args.output, DemoSettings(backend=args.backend), args.force, Progress())
    print(report)
    return 0
