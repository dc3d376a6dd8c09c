"""The sweep store keeps what it holds safe: other sweeps are refused or replaced only when asked.

Tiny sweeps (2-4 laser designs, 4 observers, the 6 primaries and secondaries) keep the file quick.
"""

from __future__ import annotations

import pytest

import metasim
from metasim import emitters
from metasim.errors import SweepError
from metasim.metamerism import primaries_and_secondaries
from metasim.sweep import design_grid, run_sweep


@pytest.fixture(scope="module")
def monitor():
    spectra = emitters.gaussian([612, 548, 455], [38, 42, 28], name=["R", "G", "B"])
    return metasim.calibrate_white(metasim.make_display(spectra), "cie1931_2", white="D65", luminance=100)


@pytest.fixture(scope="module")
def viewers():
    return metasim.observer_population(4, seed=5, age_years=(20, 70))


@pytest.fixture(scope="module")
def stimuli():
    return primaries_and_secondaries()


def grid(*red_nm):
    return design_grid("laser", peaks_nm={"R": list(red_nm), "G": [532], "B": [465]}, width_nm=[1.0])


def test_a_store_of_another_sweep_is_replaced_only_when_asked(tmp_path, monitor, viewers, stimuli):
    store = tmp_path / "store"
    (tmp_path / "store").mkdir()
    (store / "notes.txt").write_text("the user's own file")
    run_sweep(grid(630, 640), monitor, viewers, stimuli, store=store, chunk_size=1, scheduler="serial")
    other = grid(620, 650, 660)
    with pytest.raises(SweepError, match="different spec.*replace=True"):
        run_sweep(other, monitor, viewers, stimuli, store=store, chunk_size=1, scheduler="serial")
    assert metasim.load_dataset(store / "sweep.nc").sizes["design"] == 2  # untouched
    result = run_sweep(other, monitor, viewers, stimuli, store=store, chunk_size=1, scheduler="serial", replace=True)
    assert result.sizes["design"] == 3
    assert sorted(p.name for p in store.iterdir()) == ["chunk-00000.nc", "chunk-00001.nc", "chunk-00002.nc",
                                                       "manifest.json", "notes.txt", "sweep.nc"]
    assert (store / "notes.txt").read_text() == "the user's own file"
