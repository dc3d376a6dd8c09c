"""Batch sweeps: per-design summaries equal single mismatch() calls; chunked stores resume; schedulers agree.

Kept small (30 observers, 7 stimuli, 8 designs) so the file runs in well under a minute.
"""

import os
import re
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

import metasim
from metasim import emitters
from metasim.errors import SweepError
from metasim.sweep import chunk_display, design_grid, design_list, read_manifest, run_sweep
from test_cli import run

ROOT = Path(__file__).resolve().parents[1]
DEMO_SWEEP = ROOT / "data" / "demo" / "sweep_red_laser.toml"


@pytest.fixture(scope="module")
def viewers():
    return metasim.observer_population(30, seed=11, age_years=(20, 70))


@pytest.fixture(scope="module")
def designs():
    return design_grid("laser", peaks_nm={"R": [625, 640], "G": [525, 535], "B": [460]}, fwhm_nm=[1.0, 3.0])


@pytest.fixture(scope="module")
def swept(tmp_path_factory, designs, monitor, viewers, stimuli):
    store = tmp_path_factory.mktemp("sweep") / "store"
    events = []
    result = run_sweep(designs, monitor, viewers, stimuli, store=store, chunk_size=3, scheduler="serial",
                       progress=events.append)
    return store, result, events


def test_grid_is_the_cartesian_product(designs):
    assert designs.dims == ("design", "primary", "wavelength")
    assert designs.sizes["design"] == 8 and list(designs.primary.values) == ["R", "G", "B"]
    combos = {(r, g, w) for r, g, w in zip(designs["R_peak_nm"].values, designs["G_peak_nm"].values,
                                          designs["fwhm_nm"].values)}
    assert len(combos) == 8
    assert designs["R_peak_nm"].attrs["units"] == "nm" and designs.attrs["units"]
    one = designs.isel(design=5)
    expected = emitters.laser_line([float(one.R_peak_nm), float(one.G_peak_nm), 460.0], float(one.fwhm_nm))
    np.testing.assert_allclose(one.values, expected.values, atol=1e-15)  # the emitter itself (no outside reference)


def test_grid_keeps_the_base_primaries():
    base = metasim.calibrate_white(metasim.make_display(emitters.laser_line([465, 500, 532, 639], 1.0,
                                                                            name=["B", "C", "G", "R"])), "cie1931_2")
    grid = design_grid("laser", peaks_nm={"R": [620, 630]}, fwhm_nm=1.0, base=base)
    assert list(grid.primary.values) == ["B", "C", "G", "R"]
    uncalibrated = emitters.laser_line([465, 500, 532, 639], 1.0, name=["B", "C", "G", "R"])
    np.testing.assert_allclose(grid.isel(design=1).sel(primary="C").values, uncalibrated.sel(primary="C").values,
                               rtol=1e-12)  # gains undone exactly (no outside reference)
    assert grid.attrs["display_settings"]["transfer"] == base.transfer


def test_bad_grids_are_refused():
    with pytest.raises(SweepError, match="kind='led'"):
        design_grid("led", peaks_nm={"R": [620]})
    with pytest.raises(SweepError, match="peaks_nm\\['R'\\]"):
        design_grid("laser", peaks_nm={"R": [-3]})


def test_combined_sweep_equals_single_mismatch_calls(swept, designs, monitor, viewers, stimuli):
    store, result, _ = swept
    assert result.sizes["design"] == 8
    assert result.attrs["observer_seed"] == 11 and result.attrs["metasim_version"] == metasim.__version__
    assert result.attrs["spec_hash"] == read_manifest(store)["spec_hash"]
    settings = {"transfer": "bt1886", "gamma": 2.2, "peak_luminance": 100.0, "black_luminance": 0.0, "white": "D65",
                "calibration_observer": "cie1931_2"}
    for i in (0, 3, 7):
        spectra = designs.isel(design=i).drop_vars([c for c in designs.coords if designs[c].dims == ("design",)])
        display = chunk_display(spectra.expand_dims(design=[i]), settings)
        alone = metasim.mismatch(monitor, display, viewers, stimuli)
        de = alone["delta_e_2000"].isel(design=0).values.ravel()
        expected = [de.mean(), np.median(de), np.quantile(de, 0.95), de.max()]
        # the same numbers computed once by numpy on a one-design mismatch() (no outside reference)
        np.testing.assert_allclose(result["delta_e_2000_overall"].isel(design=i).values, expected, atol=1e-9)
        np.testing.assert_allclose(result["share_of_pairs_above_threshold"].isel(design=i).values,
                                   [(de > t).mean() for t in (1, 2, 3)], atol=1e-9)
        ages = viewers["age_years"].values
        band = alone["delta_e_2000"].isel(design=0).values[(ages >= 40) & (ages < 50)].ravel()
        np.testing.assert_allclose(result["delta_e_2000_by_age"].isel(design=i).sel(age_band="40-49").values,
                                   [band.mean(), np.median(band), np.quantile(band, 0.95), band.max()], atol=1e-9)
        white = alone["delta_e_white"].isel(design=0).values
        np.testing.assert_allclose(float(result["delta_e_white_overall"].isel(design=i).sel(statistic="p95")),
                                   np.quantile(white, 0.95), atol=1e-9)
        gamut = metasim.chromaticity_gamut(display, observer=metasim.standard_observer("cie1931_2"))
        np.testing.assert_allclose(float(result["gamut_area_xy"].isel(design=i)), float(gamut["area"].squeeze()),
                                   atol=1e-12)
        coverage = metasim.gamut_coverage(gamut, "bt2020")
        np.testing.assert_allclose(float(result["gamut_coverage"].isel(design=i).sel(reference_gamut="bt2020")),
                                   float(coverage.squeeze()), atol=1e-12)
    np.testing.assert_array_equal(result["R_peak_nm"].values, designs["R_peak_nm"].values)
    assert result["delta_e_2000_overall"].attrs["long_name"] and result["gamut_coverage"].attrs["units"] == "1"
    back = metasim.load_dataset(store / "sweep.nc")
    xr.testing.assert_identical(back, result)


def test_resume_recomputes_only_missing_chunks(swept, designs, monitor, viewers, stimuli):
    store, first, events = swept
    assert [e["kind"] for e in events].count("computed") == 3
    os.remove(store / "chunk-00001.nc")
    kept = (store / "chunk-00000.nc").stat().st_mtime_ns
    again = []
    time.sleep(0.01)
    result = run_sweep(designs, monitor, viewers, stimuli, store=store, chunk_size=3, scheduler="serial",
                       progress=again.append)
    computed = [e["chunk"] for e in again if e["kind"] == "computed"]
    assert computed == [1]
    assert sorted(e["chunk"] for e in again if e["kind"] == "skipped") == [0, 2]
    assert (store / "chunk-00000.nc").stat().st_mtime_ns == kept
    xr.testing.assert_identical(result, first)


def test_a_store_of_another_spec_is_refused(swept, designs, monitor, viewers, stimuli):
    store = swept[0]
    with pytest.raises(SweepError, match="different spec"):
        run_sweep(designs.isel(design=slice(0, 4)), monitor, viewers, stimuli, store=store, chunk_size=3)
    with pytest.raises(SweepError, match="chunk size 3"):
        run_sweep(designs, monitor, viewers, stimuli, store=store, chunk_size=2)
    with pytest.raises(SweepError, match="scheduler 'fast'"):
        run_sweep(designs, monitor, viewers, stimuli, store=store, scheduler="fast")


def test_threads_equal_serial(tmp_path, swept, designs, monitor, viewers, stimuli):
    result = run_sweep(designs, monitor, viewers, stimuli, store=tmp_path / "threads", chunk_size=2,
                       scheduler="threads", workers=2)
    serial = swept[1]
    for name in ("delta_e_2000_overall", "delta_e_2000_by_age", "delta_e_white_overall", "gamut_coverage",
                 "share_of_pairs_above_threshold"):
        np.testing.assert_array_equal(result[name].values, serial[name].values)


def test_per_stimulus_summaries_equal_numpy_per_design(tmp_path, swept, designs, monitor, viewers, stimuli):
    result = run_sweep(designs, monitor, viewers, stimuli, store=tmp_path / "per-stimulus", chunk_size=3,
                       scheduler="serial", per_stimulus=True)
    assert result["delta_e_2000_by_stimulus"].dims == ("design", "statistic", "stimulus")
    assert list(result["stimulus"].values) == list(stimuli["stimulus"].values)
    assert result.attrs["spec_hash"] != swept[1].attrs["spec_hash"]  # another spec: its own store
    np.testing.assert_array_equal(result["delta_e_2000_overall"].values, swept[1]["delta_e_2000_overall"].values)
    settings = {"transfer": "bt1886", "gamma": 2.2, "peak_luminance": 100.0, "black_luminance": 0.0, "white": "D65",
                "calibration_observer": "cie1931_2"}
    i = 5
    spectra = designs.isel(design=i).drop_vars([c for c in designs.coords if designs[c].dims == ("design",)])
    alone = metasim.mismatch(monitor, chunk_display(spectra.expand_dims(design=[i]), settings), viewers, stimuli)
    de = alone["delta_e_2000"].isel(design=0).transpose("observer", "stimulus").values
    # numpy's mean / median / quantile (linear) / max over the observers of each stimulus
    expected = np.stack([de.mean(0), np.median(de, 0), np.quantile(de, 0.95, axis=0), de.max(0)])
    np.testing.assert_allclose(result["delta_e_2000_by_stimulus"].isel(design=i).values, expected, atol=1e-9)
    np.testing.assert_allclose(result["share_of_observers_above_threshold"].isel(design=i).sel(threshold=2.0).values, (de > 2.0).mean(0))



def test_weighted_observers_take_the_general_route_and_equal_numpy(tmp_path, designs, monitor, viewers, stimuli):
    weights = np.linspace(0.5, 2.0, viewers.sizes["observer"])
    weighted = viewers.assign_coords(weight=("observer", weights))
    result = run_sweep(designs, monitor, weighted, stimuli, store=tmp_path / "weighted", chunk_size=4,
                       scheduler="serial", per_stimulus=True)
    settings = {"transfer": "bt1886", "gamma": 2.2, "peak_luminance": 100.0, "black_luminance": 0.0, "white": "D65",
                "calibration_observer": "cie1931_2"}
    i = 6
    spectra = designs.isel(design=i).drop_vars([c for c in designs.coords if designs[c].dims == ("design",)])
    alone = metasim.mismatch(monitor, chunk_display(spectra.expand_dims(design=[i]), settings), viewers, stimuli)
    de = alone["delta_e_2000"].isel(design=0).transpose("observer", "stimulus").values
    pair_weights = np.repeat(weights, de.shape[1])
    # numpy's weighted average and weighted quantile (numpy >= 2.0, inverted_cdf) over all pairs
    np.testing.assert_allclose(result["share_of_pairs_above_threshold"].isel(design=i).values,
                               [np.average(de.ravel() > t, weights=pair_weights) for t in (1, 2, 3)], atol=1e-12)
    np.testing.assert_allclose(result["share_of_observers_above_threshold"].isel(design=i).sel(threshold=2.0).values,
                               np.average(de > 2.0, axis=0, weights=weights), atol=1e-12)
    np.testing.assert_allclose(result["delta_e_2000_overall"].isel(design=i).sel(statistic=["median", "p95"]).values,
                               np.quantile(de.ravel(), [0.5, 0.95], weights=pair_weights, method="inverted_cdf"),
                               atol=1e-9)
    assert result["share_of_pairs_above_threshold"].attrs["observer_weights"].startswith("the observers' weights")

def test_explicit_design_list_and_objects_reference(tmp_path, viewers):
    spectra = [emitters.laser_line([red, 532, 465], 1.0, name=["R", "G", "B"]) for red in (615, 630, 645)]
    designs = design_list(spectra, red_nm=[615, 630, 645])
    result = run_sweep(designs, "surfaces", viewers, metasim.metamerism.cie_13_3_samples(), store=tmp_path / "objects",
                       chunk_size=2, scheduler="serial", lab_volume=True)
    assert list(result["red_nm"].values) == [615, 630, 645]
    assert (result["lab_volume"].values > 0).all()
    assert result.attrs["reference_kind"] == "surfaces"


def test_missing_distributed_gives_the_install_hint(monkeypatch, tmp_path, designs, monitor, viewers, stimuli):
    monkeypatch.setitem(sys.modules, "distributed", None)
    with pytest.raises(SweepError, match=r'pip install -e "\.\[distributed\]"'):
        run_sweep(designs.isel(design=slice(0, 2)), monitor, viewers, stimuli, store=tmp_path / "dask",
                  scheduler="tcp://127.0.0.1:1")


def test_dask_threads_equal_serial(tmp_path, swept, designs, monitor, viewers, stimuli):
    pytest.importorskip("distributed")
    result = run_sweep(designs, monitor, viewers, stimuli, store=tmp_path / "dask", chunk_size=3,
                       scheduler="dask-threads", workers=2)
    np.testing.assert_array_equal(result["delta_e_2000_overall"].values, swept[1]["delta_e_2000_overall"].values)


def test_scheduler_address_with_worker_processes_equals_serial(tmp_path, swept, designs, monitor, viewers, stimuli):
    distributed = pytest.importorskip("distributed")
    # a real cluster: scheduler and two worker processes, reached through its tcp:// address
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None,
                                  scheduler_port=0) as cluster:
        address = cluster.scheduler_address
        assert address.startswith("tcp://")
        result = run_sweep(designs, monitor, viewers, stimuli, store=tmp_path / "cluster", chunk_size=3,
                           scheduler=address)
    for name in ("delta_e_2000_overall", "delta_e_2000_by_age", "gamut_coverage"):
        np.testing.assert_array_equal(result[name].values, swept[1][name].values)


def run_cli(*args):
    """The sweep command through metasim.cli.main in this process (test_cli.run)."""
    return run(*args, check=False)


def test_cli_sweep_writes_the_store(tmp_path):
    done = run_cli("sweep", DEMO_SWEEP, "--out", tmp_path / "red", "--size", 30, "--seed", 5,
                   "--stimuli", "primaries", "--chunk-size", 4)
    assert done.returncode == 0, done.stderr
    assert "combined 9 designs" in done.stderr and "result:" in done.stdout
    result = metasim.load_dataset(tmp_path / "red" / "sweep.nc")
    assert result.sizes["design"] == 9
    np.testing.assert_allclose(result["R_peak_nm"].values, np.arange(610, 651, 5))
    assert sorted(p.name for p in (tmp_path / "red").glob("chunk-*.nc")) == [f"chunk-0000{i}.nc" for i in range(3)]
    assert "sweep_spec_text" in result.attrs["spec"]
    # the report beside sweep.nc, as evaluate writes one beside study.nc
    page = (tmp_path / "red" / "report.html").read_text(encoding="utf-8")
    assert "data:image/png;base64," in page and "Best designs" in page
    assert (tmp_path / "red" / "figures" / "sweep.png").is_file()
    assert f"report:  {tmp_path / 'red' / 'report.html'}" in done.stdout
    # designs numbered from 1 like ranks, with the file's index beside the number
    best = int(np.argmin(result["delta_e_2000_overall"].sel(statistic="p95").values))
    first = next(line for line in done.stdout.splitlines() if line.startswith("#1: "))
    assert f"(design {best + 1}, index {best} in sweep.nc)" in first
    assert f"<tr><td>1</td><td>{best + 1}</td>" in page and "design N is index N − 1" in page
    assert "chunk 1/3 (designs 1-4) written" in done.stderr and "designs 0-" not in done.stderr


def test_cli_bad_sweep_spec_is_one_line(tmp_path):
    spec = tmp_path / "bad.toml"
    spec.write_text('[vary]\nkind = "laser"\n[vary.peaks_nm]\nR = {start = 650, stop = 610, step = 5}\n')
    done = run_cli("sweep", spec, "--out", tmp_path / "bad", "--size", 10)
    assert done.returncode != 0 and "Traceback" not in done.stderr
    progress = re.compile(r"^metasim: (?!error:).* \(\d+\.\d s\)$")  # progress lines come before the error
    lines = [line for line in done.stderr.splitlines() if line.strip() and not progress.match(line)]
    assert len(lines) == 1 and lines[0].startswith("metasim: error:") and "stop >= start" in lines[0]


def test_a_lazy_grid_is_the_array_made_block_by_block(designs):
    from metasim.sweep import spec_hash
    from metasim.sweep.grid import hashed_designs

    lazy = design_grid("laser", peaks_nm={"R": [625, 640], "G": [525, 535], "B": [460]}, fwhm_nm=[1.0, 3.0], lazy=True)
    assert lazy.sizes == dict(designs.sizes) and lazy.coordinate_names == ["R_peak_nm", "G_peak_nm", "B_peak_nm", "fwhm_nm"]
    xr.testing.assert_identical(lazy.block(0, 8), designs)  # the array design_grid makes at once
    xr.testing.assert_identical(lazy.block(3, 7), designs.isel(design=slice(3, 7)))
    # one sweep, one store, however given (as run_sweep hashes them: coordinates under their first names)
    assert spec_hash(lazy, "options") == spec_hash(hashed_designs(designs), "options")
    with pytest.raises(SweepError, match="outside the grid"):
        lazy.block(5, 9)


def test_lazy_grid_sweep_and_blocks_inside_chunks_give_the_same_numbers(tmp_path, monkeypatch, swept, monitor,
                                                                         viewers, stimuli):
    import metasim.sweep.run as run

    lazy = design_grid("laser", peaks_nm={"R": [625, 640], "G": [525, 535], "B": [460]}, fwhm_nm=[1.0, 3.0], lazy=True)
    monkeypatch.setattr(run, "PAIRS_PER_BLOCK", 2 * viewers.sizes["observer"] * stimuli.sizes["stimulus"])
    result = run_sweep(lazy, monitor, viewers, stimuli, store=tmp_path / "lazy", chunk_size=3, scheduler="threads",
                       workers=2)  # chunks of 3 designs computed in blocks of 2 and 1
    for name in swept[1].data_vars:
        np.testing.assert_array_equal(result[name].values, swept[1][name].values)
    assert result.attrs["spec_hash"] == swept[1].attrs["spec_hash"]


def test_a_million_design_grid_runs_its_first_chunk_without_making_the_grid(monkeypatch, monitor, viewers, stimuli):
    from metasim.sweep import DesignGrid, evaluate_chunk
    from metasim.sweep.store import chunk_ranges

    peaks = {"R": np.linspace(600, 660, 100), "G": np.linspace(500, 560, 100), "B": np.linspace(430, 480, 100)}
    made = []
    original = DesignGrid.spectra

    def recorded(self, start, stop):
        values = original(self, start, stop)
        made.append(values.shape)
        return values

    monkeypatch.setattr(DesignGrid, "spectra", recorded)
    lazy = design_grid("laser", peaks_nm=peaks, fwhm_nm=1.0, lazy=True)
    count, primaries, wavelengths = lazy.sizes["design"], lazy.sizes["primary"], lazy.sizes["wavelength"]
    assert count == 1_000_000
    held = sum(table.nbytes for _, _, table in lazy._tables.values()) + sum(v.nbytes for _, v in lazy.axes)
    assert held < 2e6 < count * primaries * wavelengths * 8  # 300 spectra kept, not 10.6 GB of designs
    ranges = chunk_ranges(count, 64)
    assert len(ranges) == 15_625 and ranges[0] == (0, 64) and ranges[-1] == (999_936, 1_000_000)
    settings = {"transfer": "bt1886", "gamma": 2.2, "peak_luminance": 100.0, "black_luminance": 0.0, "white": "D65",
                "calibration_observer": "cie1931_2"}
    options = {"display_settings": settings, "lab_volume": False, "mismatch": {}}
    first = evaluate_chunk((lazy, *ranges[0]), monitor, viewers, stimuli, options)
    assert first.sizes["design"] == 64 and np.isfinite(first["delta_e_2000_overall"].values).all()
    np.testing.assert_array_equal(first["B_peak_nm"].values[:3], peaks["B"][:3])  # the last axis runs fastest
    assert made and max(shape[0] for shape in made) <= 64  # only the chunk's designs were made
    assert all(shape[1:] == (primaries, wavelengths) for shape in made)


def test_a_rerun_keeps_the_chunk_size_of_its_store(tmp_path, monitor, viewers, stimuli, designs):
    store = tmp_path / "store"
    run_sweep(designs, monitor, viewers, stimuli, store=store, chunk_size=5, scheduler="serial")
    events = []
    run_sweep(designs, monitor, viewers, stimuli, store=store, scheduler="serial", progress=events.append)
    assert [e["kind"] for e in events] == ["skipped", "skipped", "combined"]  # resumed, not refused
    assert read_manifest(store)["chunk_size"] == 5


def test_the_sweep_pass_is_called_with_its_declared_types(swept):
    # common practice, no source: the test suite's warm-up compiles the declared types ahead
    # (metasim._warmup.EVERY), so a sweep must call exactly those and compile nothing of its own
    from metasim import _warmup

    for name in ("metasim.sweep._kernels.designs:design_statistics", "metasim.sweep._kernels.designs:reference_columns",
                 "metasim.statistics._kernels.order:summarise_rows"):
        dispatcher, spelled = _warmup._kernel(name)
        assert list(dispatcher.overloads) == [_warmup._argument_types(spelled)], name
