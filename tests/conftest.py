"""Shared fixtures for the core checks (grids, Legendre functions, transforms, Harmonics)."""
from __future__ import annotations

import os
import sys

import numpy as np
import pytest

# the reference implementations sit beside the tests (tests/_reference.py)
sys.path.insert(0, os.path.dirname(__file__))


@pytest.fixture
def rng() -> np.random.Generator:
    """Seeded generator: every random check is reproducible."""
    return np.random.default_rng(20261201)
