"""Shared fixtures: a seeded generator and paths to the open records."""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

# validation/ (fixtures shared by scripts and tests, not shipped) lives at the repository root.
sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

OPEN_RR = Path(__file__).resolve().parents[2] / "shared" / "data" / "open-rr"


@pytest.fixture
def rng() -> np.random.Generator:
    """A seeded generator: every statistical test is reproducible."""
    return np.random.default_rng(20261202)


@pytest.fixture
def open_rr() -> Path:
    """The open long-term records shipped beside the repository (skip when absent)."""
    if not (OPEN_RR / "records.csv").exists():
        pytest.skip(f"open records not found at {OPEN_RR} (shared data folder absent)")
    return OPEN_RR
