"""Time `fluxloom check` on every example (target: at most 3 s each).

Each example runs in a fresh process, as a user would run it, so the time
includes start-up and imports; nothing is cached between runs. Wall time
depends on what else the machine is doing, so the child's CPU time is shown
too, and the analysis alone (in this process, caches cleared) for comparison.
Not a test: run it by hand, `python benchmarks/bench_check.py [--repeat N]`.
"""
from __future__ import annotations

import argparse
import os
import resource
import statistics
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
TARGET_SECONDS = 3.0


def _children_cpu() -> float:
    usage = resource.getrusage(resource.RUSAGE_CHILDREN)
    return usage.ru_utime + usage.ru_stime


def time_check(path: Path) -> tuple[float, float]:
    """(wall, cpu) seconds of one `fluxloom check --json` in a fresh process."""
    cpu_before, start = _children_cpu(), time.perf_counter()
    done = subprocess.run([sys.executable, "-m", "fluxloom.runtime.cli", "check", str(path), "--json"],
                          capture_output=True, text=True)
    wall, cpu = time.perf_counter() - start, _children_cpu() - cpu_before
    if done.returncode != 0:
        raise SystemExit(f"check failed on {path.name}:\n{done.stderr}")
    return wall, cpu


def time_analysis(path: Path) -> float:
    """CPU seconds of load + analyse + to_json in this process, analysis cache cleared."""
    from fluxloom.compiler import load_scheme
    from fluxloom.compiler import analysis

    analysis._CACHE.clear()
    start = time.process_time()
    analysis.analyse(load_scheme(path)).to_json()
    return time.process_time() - start


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=1, help="runs per example (median is shown)")
    args = parser.parse_args()
    worst = 0.0
    print(f"load average {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores; target {TARGET_SECONDS:g} s")
    print(f"{'example':<18} {'wall s':>8} {'cpu s':>8} {'analysis s':>11}")
    for path in sorted((ROOT / "examples").glob("*.loom")):
        runs = [time_check(path) for _ in range(args.repeat)]
        wall = statistics.median(r[0] for r in runs)
        cpu = statistics.median(r[1] for r in runs)
        worst = max(worst, wall)
        flag = "" if wall <= TARGET_SECONDS else "  over target (wall)"
        print(f"{path.stem:<18} {wall:8.2f} {cpu:8.2f} {time_analysis(path):11.2f}{flag}")
    print(f"{'slowest (wall)':<18} {worst:8.2f}")
    return 0 if worst <= TARGET_SECONDS else 1


if __name__ == "__main__":
    sys.exit(main())
