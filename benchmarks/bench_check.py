"""Time `fluxloom check` on every example (target: at most 3 s each).

Each example runs in a fresh process, as a user would run it, so the time
includes start-up and imports; nothing is cached between runs. Not a test:
run it by hand, `python benchmarks/bench_check.py [--repeat N]`.
"""
from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
TARGET_SECONDS = 3.0


def time_check(path: Path) -> float:
    start = time.perf_counter()
    done = subprocess.run([sys.executable, "-m", "fluxloom.runtime.cli", "check", str(path), "--json"],
                          capture_output=True, text=True)
    elapsed = time.perf_counter() - start
    if done.returncode != 0:
        raise SystemExit(f"check failed on {path.name}:\n{done.stderr}")
    return elapsed


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=1, help="runs per example (median is shown)")
    args = parser.parse_args()
    worst = 0.0
    print(f"{'example':<18} {'seconds':>8}  target {TARGET_SECONDS:g} s")
    for path in sorted((ROOT / "examples").glob("*.loom")):
        seconds = statistics.median(time_check(path) for _ in range(args.repeat))
        worst = max(worst, seconds)
        flag = "" if seconds <= TARGET_SECONDS else "  OVER TARGET"
        print(f"{path.stem:<18} {seconds:8.2f}{flag}")
    print(f"{'slowest':<18} {worst:8.2f}")
    return 0 if worst <= TARGET_SECONDS else 1


if __name__ == "__main__":
    sys.exit(main())
