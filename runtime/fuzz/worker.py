"""A fuzz worker: runs inputs through one stage of fluxloom, one at a time, under limits.

Started by the driver as `python -m fluxloom.runtime.fuzz.worker --stage S --memory MB`.
It reads one JSON request per line on stdin ({"index", "data" in base64}), writes the
input to a file, runs the stage as the command line would (exit status 0, 2 for bad
input, 3 for an internal error), and answers one JSON line: the exit status, the
first part of stderr, the seconds taken and the peak resident memory of that input.
The address space is capped (RLIMIT_AS) and each input gets the CPU seconds given
(RLIMIT_CPU: the kernel stops the worker with SIGXCPU past them), so the limits do
not depend on how busy the machine is; the driver also kills a worker that gives
no answer within a generous wall-clock time, and starts another.
"""
from __future__ import annotations

import argparse
import base64
import contextlib
import io
import json
import math
import os
import resource
import shutil
import sys
import time
from pathlib import Path

STAGES = ("front", "check", "build")
STDERR_KEPT = 8000


def run_stage(stage: str, path: Path, index: int, outdir: Path) -> int:
    """Exit status of one input through one stage, as the command line reports it."""
    from fluxloom.runtime.cli import main

    if stage == "check":
        return main(["check", str(path)] + (["--json"] if index % 2 else []))
    if stage == "build":
        shutil.rmtree(outdir, ignore_errors=True)  # nothing left over from the last input
        status = main(["build", str(path), "-o", str(outdir), "--force"])
        if status == 0:
            _compile_python(outdir)
        return status
    return _front(path)


def _front(path: Path) -> int:
    """Parse, check and lower only: the front end's share of `check`."""
    from fluxloom.compiler import LoomError, load_scheme

    try:
        load_scheme(path)
    except LoomError as err:
        print(err.render(), file=sys.stderr)
        return 2
    except Exception as err:  # noqa: BLE001 - the escape being looked for
        print(f"fluxloom: internal error: {type(err).__name__}: {err}", file=sys.stderr)
        return 3
    return 0


def _compile_python(outdir: Path) -> None:
    """The generated numpy module must at least be valid Python (it is not imported here)."""
    for source in outdir.glob("*.py"):
        compile(source.read_text("utf-8"), str(source), "exec")


def _limit_cpu(seconds: float) -> None:
    """Allow this input `seconds` of CPU time from now (whole seconds, rounded up)."""
    if not seconds:
        return
    usage = resource.getrusage(resource.RUSAGE_SELF)
    used = usage.ru_utime + usage.ru_stime
    _, hard = resource.getrlimit(resource.RLIMIT_CPU)
    soft = math.ceil(used + seconds)
    resource.setrlimit(resource.RLIMIT_CPU, (soft, hard if hard == resource.RLIM_INFINITY
                                             else max(soft, hard)))


def _peak_rss_mb() -> float:
    with open("/proc/self/status", encoding="ascii") as status:
        for line in status:
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) / 1024
    return 0.0


def _reset_peak() -> None:
    with contextlib.suppress(OSError):
        with open("/proc/self/clear_refs", "w", encoding="ascii") as refs:
            refs.write("5")  # Linux: reset VmHWM to the current resident size


def serve(stage: str, memory_mb: int, work: Path, cpu_seconds: float) -> None:
    # The protocol gets its own copy of stdout; fd 1 itself goes to /dev/null so that
    # nothing a stage prints (or a C compiler writes) can corrupt the answers.
    answers = os.fdopen(os.dup(1), "w", buffering=1, encoding="utf-8")
    devnull = os.open(os.devnull, os.O_WRONLY)
    os.dup2(devnull, 1)
    sys.stdout = open(os.devnull, "w", encoding="utf-8")  # noqa: SIM115 - lives as long as we do
    os.environ["FLUXLOOM_CACHE"] = str(work / "cache")
    import fluxloom.compiler.analysis  # noqa: F401 - import before the cap, and before timing
    import fluxloom.runtime.cli  # noqa: F401

    if memory_mb:
        cap = memory_mb * 1024 * 1024
        resource.setrlimit(resource.RLIMIT_AS, (cap, cap))
    work.mkdir(parents=True, exist_ok=True)
    path, outdir = work / "fuzz.loom", work / "out"
    answers.write(json.dumps({"ready": True, "path": str(path)}) + "\n")
    for line in sys.stdin:
        request = json.loads(line)
        path.write_bytes(base64.b64decode(request["data"]))
        stderr = io.StringIO()
        _reset_peak()
        _limit_cpu(cpu_seconds)
        start, cpu = time.perf_counter(), time.process_time()
        with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(stderr):
            try:
                status = run_stage(stage, path, request["index"], outdir)
            except MemoryError:
                status, stderr = 3, io.StringIO("fluxloom fuzz: MemoryError past the memory cap")
            except BaseException as err:  # noqa: BLE001 - report, never die quietly
                status = 3
                stderr.write(f"fluxloom fuzz: {type(err).__name__} escaped the command: {err}")
        answers.write(json.dumps({
            "index": request["index"], "exit": status,
            "stderr": stderr.getvalue()[:STDERR_KEPT],
            "seconds": round(time.perf_counter() - start, 4),
            "cpu_seconds": round(time.process_time() - cpu, 4),
            "peak_rss_mb": round(_peak_rss_mb(), 1),
        }) + "\n")


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--stage", choices=STAGES + ("probe",), default="front")
    parser.add_argument("--memory", type=int, default=1024, help="address-space cap in MB (0: none)")
    parser.add_argument("--cpu", type=float, default=10.0, help="CPU seconds per input (0: none)")
    parser.add_argument("--workdir", type=Path, required=True,
                        help="a folder of this worker's own (inputs, outputs, build cache)")
    args = parser.parse_args(argv)
    if args.stage == "probe":
        global run_stage  # noqa: PLW0603 - the harness's own self-test stage
        run_stage = _probe
    serve(args.stage, args.memory, args.workdir, args.cpu)


def _probe(stage: str, path: Path, index: int, outdir: Path) -> int:
    """A stage that misbehaves on request, so tests can see the driver catch each escape."""
    command = path.read_bytes().decode("utf-8", "replace").strip()
    if command == "sleep":
        time.sleep(3600)
    if command == "spin":
        while True:
            pass
    if command == "exit":
        os._exit(7)
    if command == "allocate":
        return len(bytearray(1 << 40))
    if command == "raise":
        raise RuntimeError("a probe raised")
    if command == "unlocated":
        print("fuzz.loom: error: no location", file=sys.stderr)
        return 2
    if command == "located":
        print(f"{path}:1:1: error: a located probe\n  located\n  ^", file=sys.stderr)
        return 2
    return 0


if __name__ == "__main__":
    main()
