"""Shared test fixtures: where the repository's demo designs live; the hypothesis profile.

The suite's verdict is reproducible: property tests draw the same examples on every run
(profile ``ci``, the default). ``HYPOTHESIS_PROFILE=explore`` draws fresh random examples, to
hunt for new counterexamples; a counterexample found so becomes an explicit test.
"""

import os
from pathlib import Path

import pytest
from hypothesis import settings

settings.register_profile("ci", derandomize=True)
settings.register_profile("explore", derandomize=False)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "ci"))

ROOT = Path(__file__).resolve().parents[1]
DEMO_DESIGNS = sorted((ROOT / "data" / "designs").glob("*.toml"))


@pytest.fixture(params=DEMO_DESIGNS, ids=lambda p: p.stem)
def demo_design_path(request) -> Path:
    """Each demo design file in data/designs/, one test per file."""
    return request.param
