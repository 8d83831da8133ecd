"""Shared fixtures."""

from __future__ import annotations

from pathlib import Path

import pytest

import rootsim

CEREAL = Path(__file__).resolve().parents[1] / "params" / "cereal_fibrous.toml"


@pytest.fixture(scope="session")
def cereal_plant():
    """One plant of the shipped cereal-like stand at the stand's spacing (same architecture, faster to grow)."""
    spec = rootsim.load_spec(CEREAL)
    spec = spec.model_copy(update={"stand": spec.stand.model_copy(update={"rows": 1, "plants_per_row": 1})})
    return rootsim.grow(spec, progress=False)
