"""Shared test fixtures: where the bundled examples live."""
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
EXAMPLES = ROOT / "examples"
EXAMPLE_FILES = sorted(EXAMPLES.glob("*.loom"))


@pytest.fixture(params=EXAMPLE_FILES, ids=[p.stem for p in EXAMPLE_FILES])
def example_path(request) -> Path:
    return request.param
