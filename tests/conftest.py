"""Shared fixtures: the sample parts on disk and the builders under tests/fixtures/."""

from pathlib import Path

import pytest

SAMPLES = Path(__file__).resolve().parents[1] / "sample_meshes"


@pytest.fixture
def sample_meshes() -> Path:
    """The folder of sample parts written by `surfcheck demo` (committed under sample_meshes/)."""
    return SAMPLES
