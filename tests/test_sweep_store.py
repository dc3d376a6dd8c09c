"""The sweep store keeps what it holds safe: one writer at a time, every chunk checked, nothing deleted unasked.

Tiny sweeps (2-4 laser designs, 4 observers, the 6 primaries and secondaries) keep the file quick.
"""

from __future__ import annotations

import json
import os
import re
import shutil
import socket
import threading
import time
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

import metasim
from metasim.errors import ChunkSetAsideWarning, MetasimWarning, StoreIntegrityError, StoreLockedError, SweepError
from metasim.sweep import combine_sweep, design_grid, read_manifest, run_sweep
from metasim.sweep.store import LOCK, file_checksum, store_lock


@pytest.fixture(scope="module")
def viewers():
    return metasim.observer_population(4, seed=5, age_years=(20, 70))


def grid(*red_nm):
    return design_grid("laser", peaks_nm={"R": list(red_nm), "G": [532], "B": [465]}, fwhm_nm=[1.0])


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


@pytest.fixture(scope="module")
def reference_sweep(tmp_path_factory, monitor, viewers, stimuli):
    """An uninterrupted sweep of three designs in three chunks: (store, result)."""
    store = tmp_path_factory.mktemp("reference") / "store"
    return store, run_sweep(grid(625, 635, 645), monitor, viewers, stimuli, store=store, chunk_size=1,
                            scheduler="serial")


def copy_store(source: Path, target: Path) -> Path:
    shutil.copytree(source, target)
    (target / "sweep.nc").unlink()
    return target


def flip_a_value(path: Path) -> None:
    """Change one byte of a stored number (a silent corruption: the file still reads)."""
    value = float(metasim.load_dataset(path)["delta_e_2000_overall"].sel(statistic="p95").values[0])
    data = bytearray(path.read_bytes())
    at = data.find(np.float64(value).tobytes())
    assert at > 0
    data[at + 6] ^= 0x01  # the exponent's low bit: the value doubles or halves
    path.write_bytes(bytes(data))


CORRUPTIONS = {
    "swapped": lambda store: shutil.copyfile(store / "chunk-00000.nc", store / "chunk-00001.nc"),
    "bit-flipped": lambda store: flip_a_value(store / "chunk-00001.nc"),
    "truncated": lambda store: (store / "chunk-00001.nc").write_bytes((store / "chunk-00001.nc").read_bytes()[:900]),
}


@pytest.mark.parametrize("corruption", list(CORRUPTIONS))
def test_a_corrupted_chunk_is_set_aside_and_computed_again(corruption, tmp_path, reference_sweep, monitor, viewers,
                                                           stimuli):
    source, expected = reference_sweep
    store = copy_store(source, tmp_path / "store")
    CORRUPTIONS[corruption](store)
    damaged = (store / "chunk-00001.nc").read_bytes()
    events = []
    with pytest.warns(ChunkSetAsideWarning, match="chunk-00001.nc.*set aside as chunk-00001.nc.set-aside") as seen:
        result = run_sweep(grid(625, 635, 645), monitor, viewers, stimuli, store=store, chunk_size=1,
                           scheduler="serial", progress=events.append)
    assert len([w for w in seen if issubclass(w.category, ChunkSetAsideWarning)]) == 1
    assert [e["kind"] for e in events] == ["skipped", "skipped", "computed", "combined"]
    xr.testing.assert_identical(result, expected)  # as an uninterrupted sweep, bit for bit
    assert (store / "chunk-00001.nc.set-aside").read_bytes() == damaged  # kept, not deleted
    assert read_manifest(store)["chunks"][1]["sha256"] == file_checksum(store / "chunk-00001.nc")


def test_combining_checks_every_chunk(tmp_path, reference_sweep):
    store = copy_store(reference_sweep[0], tmp_path / "store")
    CORRUPTIONS["swapped"](store)
    with pytest.raises(StoreIntegrityError, match="chunk-00001.nc.*run the sweep again"):
        combine_sweep(store)
    assert (store / "chunk-00001.nc.set-aside").exists() and not (store / "chunk-00001.nc").exists()


@pytest.mark.parametrize("edit, expected", [
    (lambda m: m["chunks"].pop(), "2 chunks listed"),
    (lambda m: m.update(chunk_size="1"), "chunk_size = '1' is not a whole number"),
    (lambda m: m["chunks"][1].update(start=0), "chunk entry 1"),
    (lambda m: m["chunks"][0].update(sha256="beef"), "not a SHA-256"),
    (lambda m: m.update(design_count=7), "chunks listed"),
])
def test_an_edited_manifest_is_refused_in_one_line(edit, expected, tmp_path, reference_sweep, monitor, viewers,
                                                   stimuli):
    store = copy_store(reference_sweep[0], tmp_path / "store")
    manifest = json.loads((store / "manifest.json").read_text())
    edit(manifest)
    (store / "manifest.json").write_text(json.dumps(manifest))
    before = {p.name: p.read_bytes() for p in store.iterdir()}
    with pytest.raises(StoreIntegrityError, match=re.escape(expected)) as info:
        run_sweep(grid(625, 635, 645), monitor, viewers, stimuli, store=store, chunk_size=1, scheduler="serial")
    assert "\n" not in str(info.value) and "replace=True" in str(info.value)
    assert {p.name: p.read_bytes() for p in store.iterdir()} == before


def test_a_second_writer_is_refused_or_waits(tmp_path, reference_sweep, monitor, viewers, stimuli):
    store = copy_store(reference_sweep[0], tmp_path / "store")
    with store_lock(store):
        holder = json.loads((store / LOCK).read_text())
        assert holder["pid"] == os.getpid() and holder["host"] == socket.gethostname()
        with pytest.raises(StoreLockedError, match=f"process {os.getpid()} on {socket.gethostname()}"):
            run_sweep(grid(625, 635, 645), monitor, viewers, stimuli, store=store, chunk_size=1, scheduler="serial")
    assert not (store / LOCK).exists()

    held, events = threading.Event(), []

    def other_run():
        with store_lock(store):
            held.set()
            time.sleep(1.0)

    thread = threading.Thread(target=other_run)
    thread.start()
    held.wait()
    result = run_sweep(grid(625, 635, 645), monitor, viewers, stimuli, store=store, chunk_size=1, scheduler="serial",
                       wait=True, progress=events.append)
    thread.join()
    assert events[0]["kind"] == "waiting" and str(os.getpid()) in events[0]["message"]
    xr.testing.assert_identical(result, reference_sweep[1])


def test_the_lock_of_a_killed_run_is_taken_over(tmp_path, reference_sweep, monitor, viewers, stimuli):
    store = copy_store(reference_sweep[0], tmp_path / "store")
    (store / LOCK).write_text(json.dumps({"pid": 999999999, "host": socket.gethostname(), "started": "earlier"}))
    with pytest.warns(MetasimWarning, match="taking over the lock of process 999999999"):
        result = run_sweep(grid(625, 635, 645), monitor, viewers, stimuli, store=store, chunk_size=1,
                           scheduler="serial")
    xr.testing.assert_identical(result, reference_sweep[1])
    assert not (store / LOCK).exists()


def test_a_new_name_is_taken_on_resume(tmp_path, reference_sweep, monitor, viewers, stimuli):
    store = copy_store(reference_sweep[0], tmp_path / "store")
    result = run_sweep(grid(625, 635, 645), monitor, viewers, stimuli, store=store, chunk_size=1, scheduler="serial",
                       attrs={"sweep_name": "Red line, second look", "sweep_description": "renamed"})
    assert result.attrs["spec"]["sweep_name"] == "Red line, second look"
    assert read_manifest(store)["spec"]["sweep_description"] == "renamed"
    assert result.attrs["spec_hash"] == reference_sweep[1].attrs["spec_hash"]  # the numbers' identity is unchanged
