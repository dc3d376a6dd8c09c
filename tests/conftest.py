"""Shared fixtures for the metasim test suite."""

import warnings

import numpy as np
import pytest

warnings.filterwarnings("ignore", module="colour")


@pytest.fixture
def rng():
    """A seeded generator: tests never depend on unseeded randomness."""
    return np.random.default_rng(20261202)
