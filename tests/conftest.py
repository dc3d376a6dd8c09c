"""Shared fixtures for the metasim test suite."""

import warnings

import numpy as np
import pytest

warnings.filterwarnings("ignore", module="colour")


@pytest.fixture
def rng():
    """A seeded generator: tests never depend on unseeded randomness."""
    return np.random.default_rng(20261202)


@pytest.fixture(scope="session", autouse=True)
def compiled_kernels():
    """One warm-up of the compiled kernels before the first test.

    A small mismatch of a four-primary display compiles (or loads from numba's cache) the drive,
    integration, CIELAB and CIE 2000 kernels once, in this process; later tests and the command
    runs in subprocesses then find them compiled and cached instead of each paying for it.
    """
    import metasim
    from metasim.emitters import gaussian, laser_line
    from metasim.metamerism import neutral_ramp

    monitor = metasim.calibrate_white(metasim.make_display(gaussian([455, 535, 615], [25, 30, 35],
                                                                    name=["B", "G", "R"])), "cie1931_2")
    lasers = metasim.make_display(laser_line([465, 532, 589, 638], 1.0, name=["B", "G", "Y", "R"]))
    metasim.mismatch(monitor, lasers, metasim.observer_population(2, seed=1), neutral_ramp(3))
