"""A finished store is gathered into sweep.nc one chunk at a time, and ranked in blocks of designs.

The combined file must hold exactly what gathering every chunk in memory with xarray gives, while
the combine step never holds two chunks (nor all of them) at once; the ranks computed block by
block must equal the ranks of the whole resample × design array.
"""

from __future__ import annotations

import gc
import weakref

import numpy as np
import pytest
import scipy.stats
import xarray as xr

import metasim
from metasim import emitters
from metasim.metamerism import primaries_and_secondaries
from metasim.statistics.comparison import rank_designs
from metasim.sweep import design_grid, run_sweep
from metasim.sweep import store as store_module
from metasim.sweep.ranking import rank_in_blocks, ranking_variables
from metasim.sweep.store import chunk_name, combine_sweep, open_sweep


@pytest.fixture(scope="module")
def swept(tmp_path_factory):
    """A 6-design sweep with intervals in chunks of 2 designs (3 chunk files)."""
    monitor = metasim.calibrate_white(metasim.make_display(
        emitters.gaussian([612, 548, 455], [38, 42, 28], name=["R", "G", "B"])), "cie1931_2", white="D65", luminance=100)
    viewers = metasim.observer_population(4, seed=5, age_years=(20, 70))
    designs = design_grid("laser", peaks_nm={"R": [625, 640, 655], "G": [520, 540], "B": [465]}, fwhm_nm=[1.0])
    store = tmp_path_factory.mktemp("combine") / "store"
    result = run_sweep(designs, monitor, viewers, primaries_and_secondaries(), store=store, chunk_size=2,
                       scheduler="serial", intervals=True, resamples=200, per_stimulus=True)
    return store, result


def test_the_combined_file_equals_the_chunks_gathered_in_memory(swept):
    store, result = swept
    chunks = [metasim.load_dataset(store / chunk_name(i)) for i in range(3)]
    gathered = xr.concat(chunks, dim="design", data_vars="minimal", coords="minimal", compat="equals",
                         combine_attrs="drop_conflicts")  # xarray's concat: the in-memory gather
    combined = metasim.load_dataset(store / "sweep.nc")
    for name, variable in gathered.variables.items():
        assert combined[name].dims == variable.dims
        np.testing.assert_array_equal(combined[name].values, variable.values)  # bit for bit, xarray's concat
        assert combined[name].attrs == variable.attrs, name
    for key in ("chunk", "design_start", "design_stop"):
        assert key not in combined.attrs
    kept = {k: v for k, v in gathered.attrs.items() if k not in ("chunk", "design_start", "design_stop", "model")}
    assert {k: combined.attrs[k] for k in kept} == kept
    assert combined.attrs["engine_model"] == gathered.attrs["model"]
    # the ranks and Pareto ranks of the whole sweep, in memory, are those of the file
    ranked, attrs = ranking_variables(gathered)
    for name, value in ranked.items():
        np.testing.assert_array_equal(combined[name].values, value.values)
    assert {k: combined.attrs[k] for k in attrs} == attrs
    xr.testing.assert_identical(result.load(), combined)  # run_sweep returns the file's contents


def test_run_sweep_returns_the_file_with_values_read_on_use(swept):
    store, result = swept
    assert result.encoding["source"] == str(store / "sweep.nc")
    with open_sweep(store / "sweep.nc") as opened:
        assert not opened["delta_e_2000_overall"].variable._in_memory  # nothing read yet (xarray's lazy arrays)
        np.testing.assert_array_equal(opened["delta_e_2000_overall"].values, result["delta_e_2000_overall"].values)


def test_the_combine_holds_one_chunk_at_a_time(swept, monkeypatch):
    store, _ = swept
    reference = metasim.load_dataset(store / "sweep.nc")
    alive, loaded, largest = [], [], []
    read_chunk = store_module._checked_chunk

    def watched(folder, manifest, chunk):
        gc.collect()
        alive.append(sum(ref() is not None for ref in loaded))  # earlier chunks still held
        part = read_chunk(folder, manifest, chunk)
        loaded.append(weakref.ref(part))
        largest.append(part.sizes["design"])
        return part

    def no_concat(*args, **kwargs):
        raise AssertionError("the combine gathers chunks with xr.concat")

    monkeypatch.setattr(store_module, "_checked_chunk", watched)
    monkeypatch.setattr(xr, "concat", no_concat)
    combined = combine_sweep(store)
    assert len(loaded) == 3 and alive == [0, 0, 0]  # no chunk outlives its turn
    assert largest == [2, 2, 2]  # every array read holds one chunk's designs
    xr.testing.assert_identical(combined.load(), reference)


def test_a_combine_without_writing_leaves_no_file(swept, tmp_path):
    store, result = swept
    copy = tmp_path / "copy"
    copy.mkdir()
    for path in store.iterdir():
        if path.name != "sweep.nc":
            (copy / path.name).write_bytes(path.read_bytes())
    combined = combine_sweep(copy, write=False)
    assert sorted(p.name for p in copy.iterdir()) == sorted(p.name for p in store.iterdir() if p.name != "sweep.nc")
    xr.testing.assert_identical(combined, result.load())


@pytest.mark.parametrize("block_bytes", [1, 6 * 8 * 50 * 3, 1 << 30])
def test_ranks_in_blocks_equal_the_ranks_of_the_whole_array(block_bytes, tmp_path):
    rng = np.random.default_rng(3)
    designs, resamples = 23, 50
    reps = rng.normal(5.0, 0.3, (resamples, designs)).round(1)  # rounded: many ties within a resample
    reps[:, 4] = reps[:, 9]  # two designs equal in every resample
    reps[7, 11] = np.nan  # a missing replicate never ranks first
    point = np.median(reps, axis=0)
    point[[2, 16]] = np.nanmin(point) - 0.5  # tied best point values: the first one is best
    whole = rank_designs(xr.DataArray(reps, dims=("resample", "design")), point, level=0.9)
    ranking, best, together = rank_in_blocks(lambda a, b: reps[:, a:b], designs, resamples, point, level=0.9,
                                             block_bytes=block_bytes, scratch=tmp_path)
    for name in ("best_probability", "rank", "rank_interval", "indistinguishable_from_best"):
        np.testing.assert_array_equal(ranking[name].values, whole[name].values)  # bit for bit
        assert ranking[name].attrs == whole[name].attrs
    assert str(best) == whole.attrs["best_design"] and best == 2
    assert ", ".join(map(str, np.flatnonzero(together))) == whole.attrs["best_set"]
    # ranks within each resample: scipy's ordinal ranks (ties in design order), their percentile interval
    filled = np.where(np.isnan(reps), np.inf, reps)
    ranks = np.array([scipy.stats.rankdata(row, method="ordinal") for row in filled])  # scipy
    expected = np.quantile(ranks, [0.05, 0.95], axis=0, method="inverted_cdf")  # numpy
    np.testing.assert_array_equal(ranking["rank_interval"].values, expected)
    assert not list(tmp_path.iterdir())  # scratch files removed


def _grown_store(folder, template_store, template_manifest, count: int, chunk: int):
    """A valid store of ``count`` designs whose chunk files take the template chunk's layout with seeded
    values, written through the store's own functions (checksums and design ranges in the manifest)."""
    from metasim.sweep.store import chunk_ranges, write_chunk, write_manifest

    template = metasim.load_dataset(template_store / chunk_name(0))
    manifest = {**template_manifest, "design_count": count, "chunk_size": chunk,
                "chunks": [{"index": i, "start": a, "stop": b, "file": chunk_name(i), "sha256": None}
                           for i, (a, b) in enumerate(chunk_ranges(count, chunk))]}
    folder.mkdir()
    write_manifest(folder, manifest)
    for entry in manifest["chunks"]:
        rng = np.random.default_rng(entry["index"])
        part = template.isel(design=np.arange(entry["stop"] - entry["start"]) % template.sizes["design"])
        part = part.assign_coords(design=np.arange(entry["start"], entry["stop"]))
        for name, variable in template.data_vars.items():
            if "design" in variable.dims and variable.dtype.kind == "f":
                values = part[name].values * (1 + 0.05 * rng.standard_normal(part[name].shape))
                part[name] = xr.DataArray(values, dims=variable.dims, attrs=variable.attrs)
        write_chunk(folder, manifest, entry["index"], part)
    return folder


def test_the_end_of_a_combine_holds_a_few_numbers_per_design(tmp_path, monkeypatch):
    """After the chunks are streamed into sweep.nc, the combine reads the file in blocks of designs
    (only the objectives' columns) and its allocations (numpy's and the compiled sort's, as tracemalloc
    sees them) grow by a few numbers per design: from 4,000 to 16,000 designs the peak grows by at most
    12 eight-byte numbers per added design (the objectives (3), their lexicographic order, the ranks,
    the sort's copies of the points in their fronts (3 and the fronts' part-filled blocks), the file's
    design index; about 10 measured). The stacked objective columns and sorted copies before took about 20."""
    import tracemalloc

    from xarray.backends.netCDF4_ import NetCDF4ArrayWrapper

    from metasim.sweep import pareto as pareto_module
    from metasim.sweep.store import read_manifest

    monitor = metasim.calibrate_white(metasim.make_display(
        emitters.gaussian([612, 548, 455], [38, 42, 28], name=["R", "G", "B"])), "cie1931_2", white="D65", luminance=100)
    designs = design_grid("laser", peaks_nm={"R": [625, 640, 655], "G": [520, 540], "B": [465]}, fwhm_nm=[1.0])
    template = tmp_path / "template"
    run_sweep(designs, monitor, metasim.observer_population(3, seed=5), primaries_and_secondaries(), store=template,
              chunk_size=6, scheduler="serial")
    manifest = read_manifest(template)
    block = 500
    monkeypatch.setattr(pareto_module, "READ_DESIGNS", block)
    reads, peaks, phase = [], {}, {"end": False}
    read = NetCDF4ArrayWrapper._getitem

    def watched_read(self, key):
        values = read(self, key)
        if phase["end"] and self.variable_name != "design" and "design" in self.get_array().dimensions:
            reads.append((self.variable_name, np.size(values)))  # (the design index: xarray reads it on opening)
        return values

    add, finish = store_module.CombinedWriter.add, store_module.CombinedWriter.finish

    opened = xr.open_dataset

    def streamed(self, part, start):
        add(self, part, start)
        phase["streamed"] = self.count == self.expected  # the last chunk is in

    def reopened(*args, **kwargs):
        if phase.pop("streamed", False):  # the file opened again after the last chunk: the end phase begins
            phase["end"] = True
            tracemalloc.reset_peak()
            phase["base"] = tracemalloc.get_traced_memory()[0]
        return opened(*args, **kwargs)

    def finished(self, variables, attrs):
        finish(self, variables, attrs)
        phase["end"] = False
        phase["peak"] = tracemalloc.get_traced_memory()[1] - phase["base"]

    monkeypatch.setattr(NetCDF4ArrayWrapper, "_getitem", watched_read)
    monkeypatch.setattr(store_module.CombinedWriter, "add", streamed)
    monkeypatch.setattr(store_module.CombinedWriter, "finish", finished)
    monkeypatch.setattr(xr, "open_dataset", reopened)
    pareto_module.pareto_ranks([[1.0, 2.0], [2.0, 1.0]])  # the compiled sort loaded before anything is measured
    for count in (4000, 16000):
        store = tmp_path / f"store-{count}"
        if not store.exists():
            _grown_store(store, template, manifest, count, 2000)
        monkeypatch.setattr(store_module.CombinedWriter, "expected", count, raising=False)
        tracemalloc.start()
        try:
            combined = combine_sweep(store)
        finally:
            tracemalloc.stop()
        peaks[count] = phase["peak"]
        assert combined.sizes["design"] == count and (combined["pareto_rank"] >= 1).all()
        values, senses, _, _ = pareto_module.objective_values(combined)  # the whole columns at once, in memory
        np.testing.assert_array_equal(combined["pareto_rank"].values, pareto_module.pareto_ranks(values, senses))
        combined.close()
        assert reads and max(size for _, size in reads) <= block  # one objective column, one block at a time
        assert {name for name, _ in reads} == {"delta_e_2000_overall", "gamut_coverage", "white_efficacy"}
        reads.clear()
    assert peaks[16000] - peaks[4000] <= 12 * 8 * 12000, peaks
