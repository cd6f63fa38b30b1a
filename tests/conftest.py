"""Shared test fixtures: where the repository's demo designs live (nothing else)."""

from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
DEMO_DESIGNS = sorted((ROOT / "data" / "designs").glob("*.toml"))


@pytest.fixture(params=DEMO_DESIGNS, ids=lambda p: p.stem)
def demo_design_path(request) -> Path:
    """Each demo design file in data/designs/, one test per file."""
    return request.param
