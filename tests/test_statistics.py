"""The statistics layer: definitions against numpy, resampled replicates, interval coverage, comparisons."""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

import metasim
from metasim.errors import StatisticsError
from metasim.statistics import (
    percentile_interval,
    pooled_replicates,
    population_statistics,
    quantiles,
    resample_counts,
    share_above_threshold,
    weighted_mean,
)
from metasim.statistics.comparison import edge_warnings, observers_needed, paired_comparison, rank_designs
from metasim.statistics.headline import comparison_headline, design_headline, population_advice, sweep_headline


def _differences(rng, observers: int, stimuli: int, spread: float = 0.4) -> np.ndarray:
    """Invented per-observer x stimulus differences: an observer scale times a gamma spread."""
    return rng.lognormal(0.0, spread, (observers, 1)) * rng.gamma(2.0, 1.0, (observers, stimuli))


def _table(values: np.ndarray, **coords) -> xr.DataArray:
    dims = ("observer", "stimulus") if values.ndim == 2 else ("design", "observer", "stimulus")
    return xr.DataArray(values, dims=dims, attrs={"units": "1"}).assign_coords(**coords)


def test_weighted_quantiles_equal_numpy_inverted_cdf(rng):
    for _ in range(100):
        n = int(rng.integers(1, 60))
        values = rng.normal(size=(n, 4))
        weights = rng.uniform(0.0, 3.0, n)
        weights[rng.random(n) < 0.2] = 0.0
        if weights.sum() == 0:
            continue
        levels = [*rng.uniform(0, 1, 5), 0.0, 0.5, 0.95, 1.0]
        expected = np.stack([np.quantile(values[:, j], levels, weights=weights, method="inverted_cdf")
                             for j in range(4)], axis=1)
        assert np.array_equal(quantiles(values, levels, weights), expected)  # numpy >= 2.0 weighted quantile
        assert np.array_equal(quantiles(values, levels), np.quantile(values, levels, axis=0))  # numpy.quantile
        assert np.allclose(weighted_mean(values, weights), np.average(values, axis=0, weights=weights),
                           rtol=1e-14, atol=0)  # numpy.average


def test_nan_values_are_left_out_as_numpy_does(rng):
    values = rng.normal(size=(50, 3))
    values[rng.random((50, 3)) < 0.2] = np.nan
    assert np.allclose(quantiles(values, [0.5, 0.95]), np.nanquantile(values, [0.5, 0.95], axis=0))  # numpy
    assert np.allclose(weighted_mean(values), np.nanmean(values, axis=0))  # numpy.nanmean
    assert np.allclose(share_above_threshold(values, [0.0])[0],
                       np.nanmean(np.where(np.isnan(values), np.nan, values > 0), 0))  # numpy.nanmean



def test_share_beyond_is_the_old_name_of_share_above_threshold(rng):
    from metasim.statistics import summaries

    values = _differences(rng, 40, 6)
    weights = rng.uniform(0.5, 1.5, 40)
    new = share_above_threshold(values, (1.0, 2.0), weights)
    for module in (metasim.statistics, summaries):
        with pytest.warns(DeprecationWarning, match=r"share_beyond\(\) is renamed share_above_threshold\(\)"):
            old = module.share_beyond(values, (1.0, 2.0), weights)
        assert np.array_equal(old, new)
    w = np.repeat(weights, 6)
    expected = [np.average(values.ravel() > t, weights=w) for t in (1.0, 2.0)]
    assert np.allclose(share_above_threshold(values.ravel(), (1.0, 2.0), w), expected)  # numpy.average
    assert "share_beyond" not in metasim.statistics.__all__ and "share_beyond" not in summaries.__all__

def test_pooled_statistics_equal_numpy_on_all_pairs(rng):
    values = _differences(rng, 240, 25)
    weights = rng.uniform(0.2, 2.0, 240)
    plain = population_statistics(_table(values), thresholds=(1.0, 2.0))
    flat = values.ravel()
    stats = plain["statistics"].sel(statistic=["mean", "median", "p95", "max"]).values
    assert np.allclose(stats, [flat.mean(), *np.quantile(flat, [0.5, 0.95]), flat.max()], rtol=1e-14, atol=0)  # numpy
    assert np.allclose(plain["share_above_threshold"].values, [(flat > 1).mean(), (flat > 2).mean()])  # numpy
    weighted = population_statistics(_table(values, weight=("observer", weights)))
    w = np.repeat(weights, 25)
    expected = np.quantile(flat, [0.5, 0.95], weights=w, method="inverted_cdf")  # numpy >= 2.0
    assert np.array_equal(weighted["statistics"].sel(statistic=["median", "p95"]).values, expected)
    assert np.isclose(float(weighted["statistics"].sel(statistic="mean")), np.average(flat, weights=w))  # numpy
    assert weighted.attrs["observer_weights"].startswith("the observers' weights")
    assert plain.attrs["pooled_over"] == "observer x stimulus pairs" and plain.attrs["includes_white"] == "no"


def test_every_resample_equals_numpy_on_the_copied_observers(rng):
    values = _differences(rng, 150, 30)
    weights = rng.uniform(0.5, 1.5, 150)
    counts = resample_counts(150, 200, seed=4)
    assert np.array_equal(counts.sum(axis=1), np.full(200, 150))  # each resample draws every slot once
    plain = pooled_replicates(values, quantiles=(0.5, 0.95), thresholds=(2.0,), counts=counts)
    weighted = pooled_replicates(values, weights=weights, quantiles=(0.5, 0.95), counts=counts)
    for r in range(0, 200, 7):
        copied = np.repeat(values, counts[r].astype(int), axis=0).ravel()  # the resample, built by copying rows
        assert np.allclose(plain["quantiles"][:, r + 1], np.quantile(copied, [0.5, 0.95]), rtol=0, atol=1e-12)  # numpy
        assert np.isclose(plain["mean"][r + 1], copied.mean())  # numpy
        assert np.isclose(plain["share_above_threshold"][0, r + 1], (copied > 2.0).mean())  # numpy
        w = np.repeat(counts[r] * weights, 30)
        expected = np.quantile(values.ravel(), [0.5, 0.95], weights=w, method="inverted_cdf")  # numpy >= 2.0
        assert np.array_equal(weighted["quantiles"][:, r + 1], expected)


def test_resampled_quantiles_with_ties_and_subsets(rng):
    values = np.round(_differences(rng, 120, 12))  # heavy ties
    counts = resample_counts(120, 200, seed=9)
    members = np.flatnonzero(rng.random(120) < 0.4)
    out = pooled_replicates(values, members=members, quantiles=(0.0, 0.5, 0.95, 1.0), counts=counts)
    for r in range(0, 200, 11):
        copied = np.repeat(values[members], counts[r, members].astype(int), axis=0).ravel()
        assert np.allclose(out["quantiles"][:, r + 1], np.quantile(copied, [0, 0.5, 0.95, 1]), atol=1e-12)  # numpy


def test_intervals_of_mean_and_p95_cover_the_truth():
    # standard resampling theory (Efron & Tibshirani 1993, ch. 13): 95 % percentile intervals contain
    # the population value in about 95 % of samples; 400 samples of 300 observers against a
    # 100,000-observer population taken as the truth
    rng = np.random.default_rng(1)
    truth = _differences(rng, 100_000, 20, spread=0.3)
    true_mean, true_p95 = truth.mean(), np.quantile(truth, 0.95)
    hits = np.zeros(2)
    for sample in range(400):
        table = population_statistics(_table(_differences(rng, 300, 20, spread=0.3)), interval=True, seed=sample)
        bounds = table["statistics_interval"].sel(statistic=["mean", "p95"]).values
        hits += (bounds[0] <= [true_mean, true_p95]) & ([true_mean, true_p95] <= bounds[1])
    coverage = hits / 400
    assert np.all((coverage >= 0.93) & (coverage <= 0.97)), coverage  # Efron & Tibshirani 1993


def test_interval_attributes_and_no_interval_of_the_maximum(rng):
    table = population_statistics(_table(_differences(rng, 80, 10)), interval=True, seed=3)
    interval = table["statistics_interval"]
    assert list(interval["bound"].values) == ["lower", "upper"]
    assert interval.attrs["interval_level"] == 0.95 and interval.attrs["interval_resamples"] >= 200
    assert "Efron & Tibshirani 1993" in interval.attrs["interval_method"]
    assert np.isnan(interval.sel(statistic="max")).all()
    point = table["statistics"].sel(statistic=["mean", "median", "p95"])
    assert ((interval.sel(bound="lower", statistic=point.statistic) <= point)
            & (point <= interval.sel(bound="upper", statistic=point.statistic))).all()
    again = population_statistics(_table(_differences(np.random.default_rng(20261202), 80, 10)), interval=True, seed=3)
    assert again["statistics_interval"].identical(population_statistics(
        _table(_differences(np.random.default_rng(20261202), 80, 10)), interval=True, seed=3)["statistics_interval"])


def test_per_stimulus_and_per_group_tables(rng):
    values = _differences(rng, 90, 6)
    per_stimulus = population_statistics(_table(values), over="observer", interval=True)
    assert np.allclose(per_stimulus["statistics"].sel(statistic="p95").values,
                       np.quantile(values, 0.95, axis=0))  # numpy
    assert per_stimulus.attrs["pooled_over"] == "observers (per stimulus)"
    per_observer = population_statistics(_table(values), over="stimulus")
    assert np.allclose(per_observer["statistics"].sel(statistic="median").values, np.median(values, axis=1))  # numpy
    labels = np.where(np.arange(90) < 30, "20-39", "40-59")
    by_age = population_statistics(_table(values), group=xr.DataArray(labels, dims="observer", name="age_band"))
    assert np.isclose(float(by_age["statistics"].sel(age_band="20-39", statistic="p95")),
                      np.quantile(values[:30], 0.95))  # numpy
    with pytest.raises(StatisticsError, match="must include 'observer'"):
        population_statistics(_table(values), over="stimulus", interval=True)
    with pytest.raises(StatisticsError, match="resamples=50"):
        population_statistics(_table(values), interval=True, resamples=50)
    with pytest.raises(StatisticsError, match="level=1.5"):
        population_statistics(_table(values), interval=True, level=1.5)


def test_paired_comparison_of_a_design_with_itself_is_zero(rng):
    values = _table(_differences(rng, 120, 15))
    same = paired_comparison(values, values)
    assert np.all(same["difference"].values == 0)  # identity: the same numbers on both sides
    assert np.all(same["difference_interval"].sel(statistic=["mean", "median", "p95"]).values == 0)
    assert float(same["share_second_closer"]) == 0.5  # every observer a tie, counted half


def test_paired_comparison_recovers_a_known_shift(rng):
    base = _differences(rng, 200, 15)
    shifted = paired_comparison(_table(base), _table(base + 0.75))
    diff = shifted["difference"].sel(statistic=["mean", "median", "p95", "max"]).values
    assert np.allclose(diff, 0.75, atol=1e-12)  # statistics of location move with a constant shift
    assert np.allclose(shifted["difference_interval"].sel(statistic=["mean", "median", "p95"]).values, 0.75,
                       atol=1e-12)
    assert float(shifted["share_second_closer"]) == 0.0
    per_observer = rng.normal(-0.2, 0.5, (200, 1))  # a different shift for each observer
    mixed = paired_comparison(_table(base), _table(base + per_observer), labels=("old", "new"), seed=5)
    assert np.isclose(float(mixed["difference"].sel(statistic="mean")), per_observer.mean())  # arithmetic
    assert np.isclose(float(mixed["share_second_closer"]), (per_observer < 0).mean())  # arithmetic
    thresholds = mixed["threshold"].values
    shares = [[(values > t).mean() for t in thresholds] for values in (base, base + per_observer)]
    assert np.allclose(mixed["share_above_threshold"].values, shares)  # numpy
    assert np.allclose(mixed["share_above_threshold_difference"].values, np.subtract(shares[1], shares[0]))  # numpy
    interval = mixed["share_above_threshold_difference_interval"].values
    assert interval.shape == (2, thresholds.size) and np.all(interval[0] <= interval[1])
    counts = resample_counts(200, 400, seed=5)
    expected = percentile_interval(counts @ per_observer[:, 0] / 200)  # the same resamples of the mean shift
    assert np.allclose(mixed["difference_interval"].sel(statistic="mean").values, expected)
    text = comparison_headline(mixed, "the monitor")
    assert text.startswith("new differs from the monitor less than old for ") and "95th percentile" in text


def test_ranks_and_best_set(rng):
    base = _differences(rng, 150, 12)
    scales = np.array([1.3, 1.2, 1.0, 1.0, 1.15])  # designs 2 and 3 equal, the rest clearly worse
    values = _table(base[None] * scales[:, None, None], design=[f"d{i}" for i in range(5)])
    table = population_statistics(values, replicates=True, interval=True)
    p95 = table["statistics_replicates"].sel(statistic="p95")
    ranking = rank_designs(p95, table["statistics"].sel(statistic="p95"))
    assert set(ranking.attrs["best_set"].split(", ")) == {"d2", "d3"}
    assert np.isclose(float(ranking["best_probability"].sum()), 1.0)
    assert float(ranking["best_probability"].sel(design=["d2", "d3"]).sum()) == 1.0
    assert list(ranking["rank_interval"].sel(design="d0").values) == [5, 5]
    text = sweep_headline(ranking, table["statistics"].sel(statistic="p95"),
                          table["statistics_interval"].sel(statistic="p95"))
    assert "cannot be told apart at 95 %" in text


def test_edge_warning_only_for_a_best_design_on_the_edge():
    peaks = np.arange(610.0, 651.0, 5.0)
    widths = np.ones_like(peaks)
    edge = edge_warnings({"R_peak_nm": peaks, "fwhm_nm": widths}, best=8, units={"R_peak_nm": "nm"})
    assert edge == ["the best design has R_peak_nm = 650 nm, the upper end of the swept range 610-650 nm: "
                    "extend the range beyond 650 nm"]
    assert "extend the range below 610" in edge_warnings({"R_peak_nm": peaks}, best=0)[0]
    assert edge_warnings({"R_peak_nm": peaks, "fwhm_nm": widths}, best=4) == []  # interior optimum


def test_population_size_advice_follows_the_square_root_law(rng):
    assert observers_needed(0.2, 1000, 0.1) == 4000  # half-widths shrink as 1/sqrt(n) (Efron & Tibshirani 1993)
    values = _differences(rng, 4000, 10)
    small = population_statistics(_table(values[:1000]), interval=True)
    large = population_statistics(_table(values), interval=True)
    def width(table):
        return float(np.diff(table["statistics_interval"].sel(statistic="p95").values)[0])

    assert 1.6 < width(small) / width(large) < 2.5  # four times the observers, about half the width
    advice = population_advice(small["statistics_interval"].sel(statistic="p95"), 1000, 0.05)
    assert advice.startswith("With 1000 observers the 95th percentile is known to ±")


def test_small_engine_study_through_the_statistics_layer():
    from metasim import emitters
    from metasim.metamerism import primaries_and_secondaries

    monitor = metasim.calibrate_white(metasim.make_display(emitters.gaussian([612, 548, 455], [38, 42, 28],
                                                                             name=["R", "G", "B"])),
                                      "cie1931_2", white="D65", luminance=100)
    lasers = metasim.make_display(emitters.laser_line([638, 532, 465], 1.0, name=["R", "G", "B"]))
    viewers = metasim.observer_population(60, seed=3, age_years=(20, 70))
    de = metasim.mismatch(monitor, lasers, viewers, primaries_and_secondaries())["delta_e_2000"]
    table = population_statistics(de, interval=True, pooled="white, primaries and secondaries")
    flat = de.transpose("observer", "stimulus").values.ravel()
    assert np.isclose(float(table["statistics"].sel(statistic="p95")), np.quantile(flat, 0.95))  # numpy
    assert table.attrs["pooled_stimuli"] == "white, primaries and secondaries"
    low, high = table["statistics_interval"].sel(statistic="p95").values
    assert low < float(table["statistics"].sel(statistic="p95")) < high
    assert "95th percentile of" in design_headline(table, "lasers", "the monitor")


def test_study_tables_say_what_they_pool_and_agree():
    from metasim import emitters
    from metasim.metamerism import combine, neutral_ramp, primaries_and_secondaries
    from metasim.study import study_headlines

    def display(name, peaks, widths):
        spectra = emitters.gaussian(peaks, widths, name=["B", "G", "R"])
        return metasim.calibrate_white(metasim.make_display(spectra, name=name), "cie1931_2")

    monitor = display("monitor", [455, 535, 615], [25, 30, 35])
    narrow, broad = display("narrow", [465, 530, 630], [5, 5, 5]), display("broad", [460, 532, 620], [20, 20, 20])
    viewers = metasim.observer_population(80, seed=2, age_years=(20, 70))
    stimuli = combine(neutral_ramp(3), primaries_and_secondaries())
    study = metasim.run_study(monitor, [narrow, broad], viewers, stimuli, extra_peaks_nm=[500], white_categories=0,
                              resamples=200, seed=4)
    de = study["delta_e_2000"].sel(design="narrow").transpose("observer", "stimulus").values
    overall = study["delta_e_2000_overall"].sel(design="narrow")
    assert np.isclose(float(overall.sel(statistic="p95")), np.quantile(de, 0.95))  # numpy
    # the headline pools the stimuli only; the calibration table's white-pooled mean differs, and its
    # stimuli-only mean for the study's calibration observer is the headline mean (arithmetic)
    stimuli_only = study["calibration_mean_delta_e_stimuli"].sel(design="narrow", calibration_observer="cie1931_2")
    assert np.isclose(float(stimuli_only), float(overall.sel(statistic="mean")), rtol=1e-12)
    white = study["delta_e_white"].sel(design="narrow").values
    pooled = study["calibration_mean_delta_e"].sel(design="narrow", calibration_observer="cie1931_2")
    assert np.isclose(float(pooled), np.mean(np.column_stack([white, de])))  # numpy, white pooled
    assert study["delta_e_2000_overall"].attrs["includes_white"] == "no"
    assert study["calibration_mean_delta_e"].attrs["includes_white"].startswith("yes")
    assert "9 stimuli" in study["delta_e_2000_overall"].attrs["pooled_stimuli"]  # 3 + 7, white once
    for name in ("delta_e_2000_by_stimulus", "delta_e_2000_by_age", "share_of_observers_above_threshold",
                 "share_of_pairs_above_threshold"):
        assert study[name].attrs["pooled_over"]
    assert 0.0 <= float(study["comparison_share_second_closer"]) <= 1.0
    lines = study_headlines(study)
    assert "of viewers" in lines[0] and len(lines) == 5  # comparison, two designs, two advices


def test_sweep_ranks_designs_resampled_together(tmp_path):
    from metasim.emitters import gaussian, laser_line
    from metasim.metamerism import primaries_and_secondaries

    monitor = metasim.calibrate_white(metasim.make_display(gaussian([455, 535, 615], [25, 30, 35],
                                                                    name=["B", "G", "R"])), "cie1931_2")
    designs = metasim.design_grid("laser", {"R": [615, 630, 645]}, 1.0,
                                  base=laser_line([465, 532, 638], 1.0, name=["B", "G", "R"]))
    viewers = metasim.observer_population(40, seed=6, age_years=(20, 70))
    options = {"scheduler": "serial", "intervals": True, "resamples": 200, "interval_seed": 3}
    whole = metasim.run_sweep(designs, monitor, viewers, primaries_and_secondaries(), store=tmp_path / "a",
                              chunk_size=3, **options)
    split = metasim.run_sweep(designs, monitor, viewers, primaries_and_secondaries(), store=tmp_path / "b",
                              chunk_size=1, **options)
    # the same resamples in every chunk: a design's replicates do not depend on its chunk (paired)
    assert np.array_equal(whole["delta_e_2000_p95_replicates"].values, split["delta_e_2000_p95_replicates"].values)
    assert np.isclose(float(whole["best_probability"].sum()), 1.0)
    best = int(np.flatnonzero(whole["rank"].values == 1)[0])
    assert whole.attrs["best_design"] == str(whole["design"].values[best])
    on_edge = best in (0, 2)
    assert bool(whole.attrs["edge_warnings"]) == on_edge  # warned only at the ends of 615-645 nm
    lower, upper = whole["delta_e_2000_overall_interval"].sel(statistic="p95").isel(design=best).values
    assert lower <= float(whole["delta_e_2000_overall"].sel(statistic="p95").isel(design=best)) <= upper
