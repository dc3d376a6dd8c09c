"""Pareto ranks of sweep results: non-dominated sorting against a brute-force dominance check; the
pareto_rank variable of a combined sweep; the Pareto section of the sweep report."""

import itertools

import numpy as np
import pytest
import xarray as xr

import metasim
from metasim import emitters
from metasim.errors import SweepError
from metasim.metamerism import primaries_and_secondaries
from metasim.report import render_report, report_figures
from metasim.sweep import design_grid, run_sweep
from metasim.sweep.pareto import pareto_front, pareto_ranks


def brute_force_ranks(points, senses):
    """Ranks by the definition: peel the points no remaining point dominates (Deb et al. 2002)."""
    signed = np.asarray(points, dtype=float) * np.array([1.0 if s == "min" else -1.0 for s in senses])
    ranks = np.zeros(len(signed), dtype=int)
    remaining = set(range(len(signed)))
    rank = 0
    while remaining:
        rank += 1
        front = [i for i in remaining if not any(
            np.all(signed[j] <= signed[i]) and np.any(signed[j] < signed[i]) for j in remaining)]
        for i in front:
            ranks[i] = rank
        remaining -= set(front)
    return ranks


def test_hand_made_set_with_ties():
    points = [[1, 5], [2, 2], [3, 3], [4, 1], [2, 2], [5, 5], [3, 3], [1, 6]]
    # by hand: (1,5), (2,2) twice, (4,1) on the front; (3,3) twice and (1,6) next; (5,5) last
    assert pareto_ranks(points).tolist() == [1, 1, 2, 1, 1, 3, 2, 2]  # definition of Pareto dominance (Deb et al. 2002)
    assert pareto_ranks(points).tolist() == brute_force_ranks(points, ["min", "min"]).tolist()


def test_maximised_objective_and_nan():
    points = [[1.0, 0.9], [2.0, 0.95], [1.5, 0.8], [np.nan, 1.0], [0.5, 0.5]]
    ranks = pareto_ranks(points, ["min", "max"])
    assert ranks[3] == 0  # a missing objective: not ranked
    expected = brute_force_ranks(np.delete(points, 3, axis=0), ["min", "max"])
    assert np.delete(ranks, 3).tolist() == expected.tolist()  # definition of Pareto dominance (Deb et al. 2002)


@pytest.mark.parametrize("k", [1, 2, 3, 4])
def test_random_sets_equal_brute_force(k):
    rng = np.random.default_rng(k)
    for trial in range(20):
        n = int(rng.integers(1, 40))
        points = rng.integers(0, 4, size=(n, k)).astype(float)  # few distinct values: many ties
        senses = list(rng.choice(["min", "max"], size=k))
        assert pareto_ranks(points, senses).tolist() == brute_force_ranks(points, senses).tolist()  # Deb et al. 2002


def test_every_front_point_is_undominated_and_every_other_dominated():
    rng = np.random.default_rng(5)
    points = rng.normal(size=(300, 3))
    ranks = pareto_ranks(points)
    for i, j in itertools.product(np.flatnonzero(ranks == 1), range(len(points))):
        assert not (np.all(points[j] <= points[i]) and np.any(points[j] < points[i]))  # definition, Deb et al. 2002
    for i in np.flatnonzero(ranks > 1):  # a rank-r point is dominated by some rank r-1 point
        before = points[ranks == ranks[i] - 1]
        assert np.any(np.all(before <= points[i], axis=1) & np.any(before < points[i], axis=1))


def test_bad_objectives_are_refused():
    ds = xr.Dataset({"cost": ("design", [1.0, 2.0])})
    with pytest.raises(SweepError, match="nothing|holds no 'lab_volume'"):
        pareto_front(ds, {"lab_volume": "max"})
    with pytest.raises(SweepError, match="sense 'best'"):
        pareto_front(ds, {"cost": "best"})
    with pytest.raises(SweepError, match="shape"):
        pareto_ranks([1.0, 2.0])


@pytest.fixture(scope="module")
def sweep(tmp_path_factory):
    monitor = metasim.calibrate_white(metasim.make_display(emitters.gaussian([612, 548, 455], [38, 42, 28],
                                                                             name=["R", "G", "B"])), "cie1931_2")
    viewers = metasim.observer_population(12, seed=4, age_years=(20, 70))
    designs = design_grid("laser", peaks_nm={"R": [615, 635, 655], "G": [520, 540], "B": [465]}, fwhm_nm=1.0)
    store = tmp_path_factory.mktemp("pareto") / "store"
    return run_sweep(designs, monitor, viewers, primaries_and_secondaries().isel(stimulus=slice(0, 4)), store=store,
                     scheduler="serial")


def test_sweep_carries_pareto_rank_over_default_objectives(sweep):
    assert "pareto_rank" in sweep and "white_efficacy" in sweep
    values = np.stack([sweep["delta_e_2000_overall"].sel(statistic="p95").values,
                       sweep["gamut_coverage"].sel(reference_gamut="bt2020").values,
                       sweep["white_efficacy"].values], axis=1)
    expected = brute_force_ranks(values, ["min", "max", "max"])
    assert sweep["pareto_rank"].values.tolist() == expected.tolist()  # definition of Pareto dominance
    assert (sweep["pareto_rank"] == 1).any()


def test_white_efficacy_equals_colour_science(sweep):
    import colour

    # the efficacy of the first design's calibrated white, recomputed from its spectrum by colour-science
    from metasim.sweep import chunk_display

    designs = design_grid("laser", peaks_nm={"R": [615], "G": [520], "B": [465]}, fwhm_nm=1.0)
    from metasim.sweep.grid import DEFAULT_DISPLAY_SETTINGS

    white = chunk_display(designs, DEFAULT_DISPLAY_SETTINGS).white_spectrum().isel(design=0)
    sd = colour.SpectralDistribution(white.values, white["wavelength"].values)
    expected = colour.luminous_efficacy(sd)
    assert float(sweep["white_efficacy"].values[0]) == pytest.approx(expected, rel=2e-3)  # colour-science


def test_report_shows_front_and_table(sweep):
    figures = report_figures(sweep)
    assert "pareto" in figures
    page = render_report(sweep)
    assert "<h2>Pareto front</h2>" in page
    front = int((sweep["pareto_rank"] == 1).sum())
    assert f"{front} of {sweep.sizes['design']} designs are on the Pareto front" in page
    # the table holds one row per front design, naming its design number
    section = page.split("<h2>Pareto front</h2>", 1)[1].split("<h2>", 1)[0]
    assert section.count("<tr>") == front + 1
