"""Time `fluxloom check` on every example and on the specs in benchmarks/specs/ (target: at
most 3 s each).

Each spec runs in a fresh process, as a user would run it, so the time includes
start-up and imports; nothing is cached between runs. Wall time depends on what
else the machine is doing, so the child's CPU time and peak resident memory are
shown too, with the analysis alone (in this process, caches cleared) and the
passes that went past their budget (there should be none at the default).
benchmarks/specs/ holds the fifth-order weighted reconstructions with the
customary eps = 1e-6 under SSP-RK3 and RK4.
Not a test: run it by hand, `python benchmarks/bench_check.py [--repeat N] [--budget S]`.
"""
from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
TARGET_SECONDS = 3.0


def time_check(path: Path, budget: str | None) -> tuple[float, float, float, int]:
    """(wall s, cpu s, peak MB, passes over budget) of one `fluxloom check --json`."""
    command = [sys.executable, "-m", "fluxloom.runtime.cli", "check", str(path), "--json"]
    if budget:
        command += ["--budget", budget]
    with tempfile.TemporaryFile() as errors:
        start = time.perf_counter()
        child = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=errors)
        out = child.stdout.read()
        _, status, usage = os.wait4(child.pid, 0)   # this child's own CPU time and peak memory
        wall = time.perf_counter() - start
        child.returncode = os.waitstatus_to_exitcode(status)
        child.stdout.close()
        if child.returncode != 0:
            errors.seek(0)
            raise SystemExit(f"check failed on {path.name}:\n{errors.read().decode()}")
    over = len(json.loads(out).get("budget", {}).get("exceeded", []))
    return wall, usage.ru_utime + usage.ru_stime, usage.ru_maxrss / 1024, over  # Linux: kB


def time_analysis(path: Path) -> float:
    """CPU seconds of load + analyse + to_json in this process, analysis cache cleared."""
    from fluxloom.compiler import analysis, load_scheme

    analysis._CACHE.clear()
    start = time.process_time()
    analysis.analyse(load_scheme(path)).to_json()
    return time.process_time() - start


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=1, help="runs per spec (median is shown)")
    parser.add_argument("--budget", help="pass --budget SECONDS to check")
    args = parser.parse_args()
    worst = 0.0
    specs = sorted((ROOT / "examples").glob("*.loom")) + sorted((ROOT / "benchmarks" / "specs").glob("*.loom"))
    print(f"load average {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores; target {TARGET_SECONDS:g} s")
    print(f"{'spec':<22} {'wall s':>7} {'cpu s':>7} {'peak MB':>8} {'analysis s':>11} {'over':>5}")
    for path in specs:
        runs = [time_check(path, args.budget) for _ in range(args.repeat)]
        wall = statistics.median(r[0] for r in runs)
        cpu = statistics.median(r[1] for r in runs)
        peak = max(r[2] for r in runs)
        over = max(r[3] for r in runs)
        worst = max(worst, wall)
        flag = "" if wall <= TARGET_SECONDS else "  over target (wall)"
        print(f"{path.stem:<22} {wall:7.2f} {cpu:7.2f} {peak:8.0f} {time_analysis(path):11.2f} "
              f"{over:5d}{flag}")
    print(f"{'slowest (wall)':<22} {worst:7.2f}")
    return 0 if worst <= TARGET_SECONDS else 1


if __name__ == "__main__":
    sys.exit(main())
