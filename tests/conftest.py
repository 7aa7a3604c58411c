"""Shared test fixtures: where the bundled examples live."""
import os
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
EXAMPLES = ROOT / "examples"
EXAMPLE_FILES = sorted(EXAMPLES.glob("*.loom"))


@pytest.fixture(params=EXAMPLE_FILES, ids=[p.stem for p in EXAMPLE_FILES])
def example_path(request) -> Path:
    return request.param


def outputs_under_hash_seeds(script: str, args, seeds) -> set[str]:
    """The stripped stdout of `python -c script *args` run once per PYTHONHASHSEED."""
    import os
    import subprocess
    import sys

    outputs = set()
    for seed in seeds:
        env = dict(os.environ, PYTHONHASHSEED=seed)
        done = subprocess.run([sys.executable, "-c", script, *args], env=env,
                              capture_output=True, text=True, check=True)
        outputs.add(done.stdout.strip())
    return outputs


def require_mpi_or_skip() -> None:
    """Skip a module of MPI tests where MPI is absent (the rest of the suite still runs),
    but fail under CI, whose set-up (.ci/install) installs MPI: there a skip would hide
    that the decomposed runs were never checked."""
    from fluxloom.runtime.decomposed.launch import missing_mpi

    why = missing_mpi()
    if why is None:
        return
    if os.environ.get("CI"):
        pytest.fail(f"CI installs MPI (.ci/install), yet: {why}", pytrace=False)
    pytest.skip(why, allow_module_level=True)
