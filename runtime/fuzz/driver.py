"""The fuzz driver: feeds inputs to worker processes under a time and memory limit.

Each worker is a separate Python process with its address space capped; an input
that takes longer than the time limit gets its worker killed (and replaced) and
counts as an escape, as does a worker that dies.
"""
from __future__ import annotations

import base64
import json
import os
import select
import shutil
import signal
import subprocess
import sys
import tempfile
import time
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path

from .inputs import make_input, seed_corpus
from .outcome import ESCAPES, classify

READY_SECONDS = 120  # a worker's imports on a busy machine


@dataclass
class Escape:
    index: int
    kind: str
    outcome: str
    why: str
    data: bytes


@dataclass
class Summary:
    stage: str
    seed: int
    start: int
    timeout: float = 10.0  # CPU seconds allowed per input
    memory_mb: int = 1024  # address-space cap of a worker
    tried: int = 0
    outcomes: Counter = field(default_factory=Counter)
    kinds: Counter = field(default_factory=Counter)
    escapes: list[Escape] = field(default_factory=list)
    slowest: list[tuple[float, int]] = field(default_factory=list)
    peak_rss_mb: float = 0.0
    seconds: float = 0.0

    @property
    def escaped(self) -> int:
        return sum(self.outcomes[o] for o in ESCAPES)

    def to_json(self) -> dict:
        return {"stage": self.stage, "seed": self.seed, "start": self.start, "tried": self.tried,
                "timeout_cpu_seconds": self.timeout, "memory_mb": self.memory_mb,
                "escapes": self.escaped, "outcomes": dict(self.outcomes), "kinds": dict(self.kinds),
                "slowest": [{"index": i, "seconds": s} for s, i in self.slowest],
                "peak_rss_mb": self.peak_rss_mb, "seconds": round(self.seconds, 1),
                "escaped": [{"index": e.index, "kind": e.kind, "outcome": e.outcome,
                             "why": e.why} for e in self.escapes]}


class Worker:
    """One worker process and the input it is working on."""

    def __init__(self, stage: str, memory_mb: int, nice: int, workdir: Path, cpu: float):
        env = dict(os.environ, OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1",
                   PYTHONHASHSEED="0")
        self.process = subprocess.Popen(
            [sys.executable, "-m", "fluxloom.runtime.fuzz.worker", "--stage", stage,
             "--memory", str(memory_mb), "--workdir", str(workdir), "--cpu", str(cpu)],
            stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, env=env,
            start_new_session=True, preexec_fn=(lambda: os.nice(nice)) if nice else None)
        self.fd = self.process.stdout.fileno()
        self.buffer = b""
        self.job: tuple[int, str, bytes] | None = None
        self.deadline = time.monotonic() + READY_SECONDS
        self.ready = False
        self.path = ""  # the file the worker writes each input to

    def send(self, index: int, kind: str, data: bytes, timeout: float) -> None:
        self.job = (index, kind, data)
        request = {"index": index, "data": base64.b64encode(data).decode("ascii")}
        self.process.stdin.write((json.dumps(request) + "\n").encode())
        self.process.stdin.flush()
        self.deadline = time.monotonic() + timeout

    def read(self) -> dict | None:
        """The next answer if a whole line has arrived; raises EOFError when the worker died."""
        chunk = os.read(self.fd, 1 << 16)
        if not chunk:
            raise EOFError
        self.buffer += chunk
        if b"\n" not in self.buffer:
            return None
        line, self.buffer = self.buffer.split(b"\n", 1)
        return json.loads(line)

    def kill(self) -> None:
        try:
            os.killpg(self.process.pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
        self.process.wait()
        for stream in (self.process.stdin, self.process.stdout):
            try:
                stream.close()
            except OSError:
                pass

    def exit_status(self) -> int:
        status = self.process.wait()
        return status if status >= 0 else 128 - status


def run(stage: str = "front", count: int = 1000, seed: int = 1, start: int = 0, jobs: int = 1,
        timeout: float = 10.0, memory_mb: int = 1024, nice: int = 0, save: Path | None = None,
        progress=None, inputs=None, wall: float | None = None) -> Summary:
    """Run inputs start .. start+count-1 of `seed` (or the given (kind, bytes) list).

    timeout is in CPU seconds per input; a worker silent for `wall` seconds of wall-clock
    time (default max(60, 10 timeout)) is killed too.
    """
    corpus = seed_corpus()
    if inputs is None:
        pending = ((start + i, *make_input(seed, start + i, corpus)) for i in range(count))
    else:
        pending = ((start + i, kind, data) for i, (kind, data) in enumerate(inputs))
    summary = Summary(stage, seed, start, timeout, memory_mb)
    wall = wall or max(60.0, 10 * timeout)  # a safety net: the CPU limit is the real one
    began = time.monotonic()
    rundir = Path(tempfile.mkdtemp(prefix="fluxloom-fuzz-"))
    started = iter(range(1 << 62))

    def new_worker() -> Worker:
        return Worker(stage, memory_mb, nice, rundir / f"worker-{next(started)}", timeout)

    workers = [new_worker() for _ in range(max(1, jobs))]
    exhausted = False
    try:
        while True:
            for worker in workers:
                if worker.ready and worker.job is None and not exhausted:
                    item = next(pending, None)
                    if item is None:
                        exhausted = True
                    else:
                        worker.send(*item, wall)
            busy = [w for w in workers if w.job is not None or not w.ready]
            if exhausted and not any(w.job for w in workers):
                break
            now = time.monotonic()
            wait = max(0.0, min(w.deadline for w in busy) - now)
            readable, _, _ = select.select([w.fd for w in busy], [], [], wait)
            for i, worker in enumerate(workers):
                if worker.fd in readable:
                    try:
                        answer = worker.read()
                    except EOFError:
                        status = worker.exit_status()
                        if not worker.ready:
                            raise RuntimeError(f"a fuzz worker failed to start (exit {status})")
                        _record(summary, worker, status, "", timeout, 0.0, save, crashed=True)
                        worker.kill()
                        workers[i] = new_worker()
                        continue
                    if answer is None:
                        continue
                    if "ready" in answer:
                        worker.ready, worker.path = True, answer["path"]
                        continue
                    _record(summary, worker, answer["exit"], answer["stderr"],
                            answer["cpu_seconds"], answer["peak_rss_mb"], save)
                    worker.job = None
                    if progress and summary.tried % 500 == 0:
                        progress(summary)
                elif time.monotonic() >= worker.deadline:
                    if worker.job is None and not worker.ready:
                        raise RuntimeError("a fuzz worker did not start")
                    _record(summary, worker, None, "", wall, 0.0, save)
                    worker.kill()
                    workers[i] = new_worker()
    finally:
        for worker in workers:
            worker.kill()
        shutil.rmtree(rundir, ignore_errors=True)
    summary.seconds = time.monotonic() - began
    return summary


def _record(summary: Summary, worker: Worker, status, stderr: str, seconds: float, rss: float,
            save: Path | None, crashed: bool = False) -> None:
    if worker.job is None:
        return
    index, kind, data = worker.job
    outcome, why = classify(status, stderr, worker.path, data)
    if not crashed and status is not None and seconds > summary.timeout:
        outcome, why = "timeout", f"answered after {seconds:.2f} CPU seconds"
    elif crashed and status == 128 + signal.SIGXCPU:
        outcome, why = "timeout", "past the CPU time limit (SIGXCPU)"
    elif crashed:
        outcome, why = "crash", f"the worker died (exit status {status})"
    summary.tried += 1
    summary.outcomes[outcome] += 1
    summary.kinds[kind] += 1
    summary.peak_rss_mb = max(summary.peak_rss_mb, rss)
    summary.slowest = sorted(summary.slowest + [(seconds, index)], reverse=True)[:5]
    if outcome in ESCAPES:
        escape = Escape(index, kind, outcome, why, data)
        summary.escapes.append(escape)
        if save is not None:
            save.mkdir(parents=True, exist_ok=True)
            stem = save / f"escape-{summary.seed}-{index}"
            stem.with_suffix(".loom").write_bytes(data)
            stem.with_suffix(".txt").write_text(
                f"stage {summary.stage}, seed {summary.seed}, input {index} ({kind}): "
                f"{outcome}: {why}\n\n{stderr}", "utf-8")
