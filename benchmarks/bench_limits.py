"""`fluxloom check` on specs at the front end's documented limits (target: < 10 s, < 1 GB).

Each spec sits at a limit of compiler/limits.py (the largest file, the widest stencil
with every time method, the deepest nesting, the most nodes, the largest exponent)
and runs in a fresh process, as a user would run it. Shown: exit status, wall and
CPU seconds, and the child's peak resident memory. The target is judged on CPU
seconds (start-up included): on a shared machine the wall clock mostly measures
the neighbours. Plus one line per front-end
scaling run (lets: 1,000 to 4,000 lines) to show the cost grows linearly.
Not a test: run it by hand, `python benchmarks/bench_limits.py`.
"""
from __future__ import annotations

import os
import random
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from fluxloom.compiler.check import TIME_METHODS
from fluxloom.compiler.limits import MAX_DEPTH, MAX_EXPRESSION_NODES, MAX_FILE_BYTES, MAX_OFFSET
from fluxloom.compiler.ir import MAX_EXPONENT

TARGET_SECONDS, TARGET_MB = 10.0, 1024.0


def padded(text: str) -> str:
    """text followed by comment lines up to exactly MAX_FILE_BYTES."""
    room = MAX_FILE_BYTES - len(text.encode())
    lines = []
    while room > 0:
        line = "#" + "x" * min(78, room - 2) + "\n" if room >= 2 else "\n"
        lines.append(line)
        room -= len(line)
    return text + "".join(lines)


def many_lets() -> str:
    lines, k = [], 0
    while True:
        line = f"  let a{k} = q[{k % (2 * MAX_OFFSET + 1) - MAX_OFFSET}] + {k}\n"
        if sum(map(len, lines)) + len(line) + 64 > MAX_FILE_BYTES:
            break
        lines.append(line)
        k += 1
    return f"scheme many {{\n{''.join(lines)}  flux = u * (q[0] + a{k - 1} / 1000)\n}}\n"


def widest(method: str, limited: bool) -> str:
    rng = random.Random(method)
    terms = " + ".join(f"{rng.randint(-9, 9)}/{rng.randint(1, 9)} * q[{k}]"
                       for k in range(-MAX_OFFSET, MAX_OFFSET + 1))
    limiter = ""
    body = f"q[0] + ({terms}) / 100"
    if limited:
        limiter = "  limiter vl(r) = (r + abs(r)) / (1 + abs(r))\n"
        body = (f"q[0] + vl(ratio(q[0] - q[-{MAX_OFFSET}], q[{MAX_OFFSET}] - q[0])) * "
                f"({terms}) / 100")
    return f"scheme wide {{\n  time {method}\n{limiter}  flux = u * ({body})\n}}\n"


def largest_accepted(spec, start: int = 1) -> str:
    """spec(n) for the largest n the front end accepts (spec grows with n)."""
    from fluxloom.compiler import LoomError, scheme_from_text

    n = start
    while True:
        try:
            scheme_from_text(spec(n + 1))
        except LoomError:
            return spec(n)
        n += 1


def deepest() -> str:
    """A nonlinear face nested as deep as the front end allows."""
    def spec(levels: int) -> str:
        inner = "q[1] - q[0]"
        for level in range(levels):
            k = level % 3 - 1
            inner = (f"abs({inner} - q[{k}])" if level % 2 else
                     f"({inner}) / (1 + q[{k}]^2)")
        return f"scheme deep {{\n  flux = u * (q[0] + {inner})\n}}\n"
    return largest_accepted(spec)


def most_nodes() -> str:
    """A nonlinear face of as many nodes as the front end allows, built from lets."""
    offsets = range(-MAX_OFFSET + 1, MAX_OFFSET)
    base = [f"  let t{k + MAX_OFFSET} = min(q[{k}] - q[{k - 1}], q[{k + 1}] - q[{k}])\n"
            for k in offsets]

    def spec(terms: int) -> str:
        lets = list(base)
        for i in range(terms):
            a, b, c = (f"t{(m * i + 1) % len(base) + 1}" for m in (1, 3, 7))
            lets.append(f"  let p{i} = abs({a}) * {b} + {a} / (1 + {b}^2) + min({a}, {c}) * {c}\n")
        groups = [" + ".join(f"p{i}" for i in range(j, min(j + 30, terms)))
                  for j in range(0, terms, 30)]
        total = " + ".join(f"({g})" for g in groups) or "0"
        return f"scheme nodes {{\n{''.join(lets)}  flux = u * (q[0] + ({total}) / 1000)\n}}\n"

    return largest_accepted(spec, start=100)


def exponent() -> str:
    return (f"scheme power {{\n  flux = u * (q[0] + (q[1] - q[0])^{MAX_EXPONENT} * "
            f"(q[0] - q[-1])^{MAX_EXPONENT} / (1 + (q[2] - q[1])^{MAX_EXPONENT}))\n}}\n")


def cases() -> dict[str, str]:
    limited = open(Path(__file__).resolve().parents[1] / "examples" / "lw_vanleer.loom").read()
    out = {"largest file (lets)": many_lets(), "largest file (comments)": padded(limited),
           "deepest nesting": deepest(), "most nodes": most_nodes(), "largest exponent": exponent()}
    for method in TIME_METHODS:
        out[f"widest stencil, {method}"] = widest(method, False)
    out["widest stencil, limited, euler"] = widest("euler", True)
    out["widest stencil, limited, ssp_rk3"] = widest("ssp_rk3", True)
    return out


def run_check(path: Path) -> tuple[int, float, float, float, str]:
    """(exit status, wall s, cpu s, peak MB, first line of stderr) of `fluxloom check`."""
    start = time.perf_counter()
    process = subprocess.Popen([sys.executable, "-m", "fluxloom.runtime.cli", "check", str(path)],
                               stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    _, status, usage = os.wait4(process.pid, 0)
    wall = time.perf_counter() - start
    err = process.stderr.read()
    process.stderr.close()
    code = os.waitstatus_to_exitcode(status)
    return code, wall, usage.ru_utime + usage.ru_stime, usage.ru_maxrss / 1024, err.split("\n")[0]


def front_end_scaling() -> list[tuple[int, float]]:
    from fluxloom.compiler import scheme_from_text

    rows = []
    for lets in (1000, 2000, 4000):
        body = "".join(f"  let a{k} = q[0] + {k}\n" for k in range(lets))
        text = f"scheme many {{\n{body}  flux = u * a{lets - 1}\n}}\n"
        start = time.perf_counter()
        scheme_from_text(text)
        rows.append((lets, time.perf_counter() - start))
    return rows


def main() -> int:
    worst_ok = True
    with tempfile.TemporaryDirectory() as folder:
        print(f"{'case':36} {'exit':>4} {'wall s':>7} {'cpu s':>7} {'peak MB':>8}  bytes")
        for name, text in cases().items():
            path = Path(folder) / "limit.loom"
            path.write_text(text)
            code, wall, cpu, mb, err = run_check(path)
            ok = code == 0 and cpu < TARGET_SECONDS and mb < TARGET_MB
            worst_ok &= ok
            print(f"{name:36} {code:>4} {wall:7.2f} {cpu:7.2f} {mb:8.0f}  {len(text.encode())}"
                  + ("" if code == 0 else f"  {err}"), flush=True)
    print("\nfront end (parse, check, lower) on n let lines:")
    for lets, seconds in front_end_scaling():
        print(f"  {lets:6d} lets: {seconds:6.2f} s ({seconds / lets * 1e6:6.0f} us per let)")
    print(f"\ntarget: every case exits 0 in < {TARGET_SECONDS:g} CPU s and < {TARGET_MB:g} MB: "
          f"{'met' if worst_ok else 'MISSED'}")
    return 0 if worst_ok else 1


if __name__ == "__main__":
    sys.exit(main())
