"""`python -m fluxloom.runtime.fuzz`: run any number of fuzz inputs and report escapes.

Exit status 0 when nothing escaped, 1 otherwise. Inputs are numbered: a run of
--count inputs from --start with --seed can be split into chunks and repeated.
"""
from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from .driver import run
from .inputs import make_input, seed_corpus
from .worker import STAGES


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(prog="python -m fluxloom.runtime.fuzz", description=__doc__)
    parser.add_argument("--stage", choices=STAGES, default="check",
                        help="front: parse, check and lower; check: `fluxloom check` (text and "
                             "--json in turn); build: `fluxloom build` of every target "
                             "(default: check)")
    parser.add_argument("--count", type=int, default=1000, help="number of inputs (default 1000)")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--start", type=int, default=0, help="number of the first input")
    parser.add_argument("--jobs", type=int, default=1, help="worker processes (default 1)")
    parser.add_argument("--timeout", type=float, default=10.0,
                        help="CPU seconds per input before it counts as a hang (default 10)")
    parser.add_argument("--memory", type=int, default=1024,
                        help="address-space cap of a worker in MB (default 1024)")
    parser.add_argument("--nice", type=int, default=0, help="niceness of the workers")
    parser.add_argument("--save", type=Path, metavar="DIR",
                        help="write each escaping input and what happened to DIR")
    parser.add_argument("--show", action="store_true",
                        help="print the inputs instead of running them (to reproduce one)")
    parser.add_argument("--json", action="store_true", help="print the summary as JSON")
    args = parser.parse_args(argv)

    if args.show:
        corpus = seed_corpus()
        for index in range(args.start, args.start + args.count):
            kind, data = make_input(args.seed, index, corpus)
            print(f"--- input {index} ({kind}) ---")
            print(data.decode("utf-8", "backslashreplace"))
        return 0

    def progress(summary):
        print(f"{summary.tried} tried, {summary.escaped} escaped "
              f"({dict(summary.outcomes)})", file=sys.stderr, flush=True)

    summary = run(args.stage, args.count, args.seed, args.start, args.jobs, args.timeout,
                  args.memory, args.nice, args.save, progress)
    if args.json:
        print(json.dumps(summary.to_json(), indent=2))
    else:
        print(f"stage {summary.stage}, seed {summary.seed}, inputs {summary.start}.."
              f"{summary.start + summary.tried - 1}: {summary.tried} tried, "
              f"{summary.escaped} escaped")
        print("outcomes: " + ", ".join(f"{k} {v}" for k, v in sorted(summary.outcomes.items())))
        print("kinds: " + ", ".join(f"{k} {v}" for k, v in sorted(summary.kinds.items())))
        print(f"slowest: {', '.join(f'#{i} {s:.2f} s' for s, i in summary.slowest)}; "
              f"peak memory of one input {summary.peak_rss_mb:.0f} MB; {summary.seconds:.0f} s")
        for escape in summary.escapes:
            print(f"escape #{escape.index} ({escape.kind}): {escape.outcome}: {escape.why}")
    return 1 if summary.escaped else 0


if __name__ == "__main__":
    sys.exit(main())
