"""Shared fixtures for the metasim test suite."""

import warnings

import numpy as np
import pytest

warnings.filterwarnings("ignore", module="colour")


@pytest.fixture
def rng():
    """A seeded generator: tests never depend on unseeded randomness."""
    return np.random.default_rng(20261202)


def pytest_configure(config):
    """Before collection: on an empty kernel cache, start compiling every kernel in helper processes
    (metasim._warmup.EVERY, as the command does for a study's) while pytest imports the test modules."""
    from metasim import _warmup

    _warmup.start(_warmup.EVERY)


def pytest_unconfigure(config):
    from metasim import _warmup

    _warmup.stop()


@pytest.fixture(scope="session", autouse=True)
def compiled_kernels():
    """One warm-up of the compiled kernels before the first test.

    A small mismatch of a four-primary display loads the drive, integration, CIELAB and CIE 2000
    kernels in this process (waiting for the helpers of :func:`pytest_configure` where they are
    still compiling), and every kernel is in numba's cache before the first
    test: later tests and the command runs in subprocesses load them instead of compiling them
    again.
    """
    import metasim
    from metasim import _warmup
    from metasim.emitters import gaussian, laser_line
    from metasim.metamerism import neutral_ramp

    monitor = metasim.calibrate_white(metasim.make_display(gaussian([455, 535, 615], [25, 30, 35],
                                                                    name=["B", "G", "R"])), "cie1931_2")
    lasers = metasim.make_display(laser_line([465, 532, 589, 638], 1.0, name=["B", "G", "Y", "R"]))
    metasim.mismatch(monitor, lasers, metasim.observer_population(2, seed=1), neutral_ramp(3))
    _warmup.finish()
