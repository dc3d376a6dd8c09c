"""Shared fixtures for the metasim test suite."""

import warnings

import numpy as np
import pytest

warnings.filterwarnings("ignore", module="colour")


@pytest.fixture
def rng():
    """A seeded generator: tests never depend on unseeded randomness."""
    return np.random.default_rng(20261202)


@pytest.fixture(scope="session")
def monitor():
    """A three-primary monitor (Gaussian primaries) calibrated to D65 at 100 cd/m² for the CIE 1931
    observer: the reference display of the sweep tests."""
    import metasim
    from metasim import emitters

    spectra = emitters.gaussian([612, 548, 455], [38, 42, 28], name=["R", "G", "B"])
    return metasim.calibrate_white(metasim.make_display(spectra), "cie1931_2", white="D65", luminance=100)


@pytest.fixture(scope="session")
def stimuli():
    """The six primaries and secondaries: the stimulus set of the sweep tests."""
    from metasim.metamerism import primaries_and_secondaries

    return primaries_and_secondaries()


def pytest_configure(config):
    """Before collection: on an empty kernel cache, start compiling every kernel in helper processes
    (metasim._warmup.EVERY, as the command does for a study's) while pytest imports the test modules.
    With test workers (``-n``), only the main process starts them (see :func:`pytest_sessionstart`)."""
    from metasim import _warmup

    if not hasattr(config, "workerinput"):
        _warmup.start(_warmup.EVERY)


def pytest_sessionstart(session):
    """With test workers, the main process waits for its helpers before the workers start: every
    worker then loads the kernels from the cache instead of compiling them again."""
    from metasim import _warmup

    if getattr(session.config.option, "numprocesses", None) and not hasattr(session.config, "workerinput"):
        _warmup.finish()


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
