"""Running decomposed cases under mpiexec from an ordinary (non-MPI) process.

The parent writes a job directory (job.json and inputs.npz), runs
`mpiexec -n N python -m fluxloom.runtime.decomposed.worker DIR` and reads the
gathered results back. mpiexec is looked up beside the running Python first
(the `mpich` wheel installs it there), then on PATH. Nothing here imports mpi4py,
so a missing MPI is a clear message rather than an import error.
"""
from __future__ import annotations

import importlib.util
import json
import os
import shutil
import signal
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np

from fluxloom.compiler import LoomError

INSTALL_HINT = ("install the MPI extra: pip install 'fluxloom[mpi]' (mpi4py, and the mpich "
                "wheel that provides mpiexec)")
MAX_RANKS = 64
"""verify launches every rank on this machine; more than this is refused."""
TIMEOUT = 1800.0  # seconds; a hung exchange ends as an error, never a hung command


def find_mpiexec() -> str | None:
    here = os.path.dirname(sys.executable)
    return shutil.which("mpiexec", path=os.pathsep.join([here, os.environ.get("PATH", "")]))


def missing_mpi() -> str | None:
    """Why decomposed runs cannot start here, or None when they can."""
    if importlib.util.find_spec("mpi4py") is None:
        return f"mpi4py is not installed; {INSTALL_HINT}"
    if find_mpiexec() is None:
        return f"mpiexec was not found beside {sys.executable} or on PATH; {INSTALL_HINT}"
    return None


def require_mpi(ranks: int) -> str:
    """mpiexec's path, or a LoomError saying what is missing or wrong."""
    if not 1 <= ranks <= MAX_RANKS:
        raise LoomError(f"--ranks must be between 1 and {MAX_RANKS} (every rank runs on this "
                        f"machine), given {ranks}", file="--ranks")
    reason = missing_mpi()
    if reason is not None:
        raise LoomError(f"decomposed runs need MPI: {reason}", file="--ranks")
    return find_mpiexec()


def run_cases(kernels: list[dict], cases: list[dict], arrays: dict[str, np.ndarray], ranks: int,
              timeout: float = TIMEOUT) -> tuple[list[np.ndarray], list[float], list]:
    """Run the cases on `ranks` processes; (final global states, exchanges per step, block
    sizes per axis) per case.

    kernels: `stages.kernel_sources` of each kernel; a case names one by its index."""
    mpiexec = require_mpi(ranks)
    with tempfile.TemporaryDirectory(prefix="fluxloom-mpi-") as folder:
        job = Path(folder)
        (job / "job.json").write_text(json.dumps({"kernels": kernels, "cases": cases}))
        np.savez(job / "inputs.npz", **arrays)
        command = [mpiexec, "-n", str(ranks), sys.executable, "-m",
                   "fluxloom.runtime.decomposed.worker", str(job)]
        process = subprocess.Popen(command, stdin=subprocess.DEVNULL, stdout=subprocess.PIPE,
                                   stderr=subprocess.PIPE, text=True, start_new_session=True)
        try:
            out, err = process.communicate(timeout=timeout)
        except subprocess.TimeoutExpired:
            os.killpg(process.pid, signal.SIGKILL)
            process.communicate()
            raise RuntimeError(f"the decomposed run on {ranks} processes did not finish within "
                               f"{timeout:.0f} s") from None
        if process.returncode != 0 or not (job / "results.json").exists():
            tail = "\n".join((err or out).strip().splitlines()[-15:])
            raise RuntimeError(f"mpiexec -n {ranks} failed (exit status {process.returncode}):\n"
                               f"{tail}")
        reported = json.loads((job / "results.json").read_text())
        with np.load(job / "results.npz") as results:
            finals = [results[f"q{i}"] for i in range(len(cases))]
    return finals, reported["exchanges_per_step"], reported["splits"]
