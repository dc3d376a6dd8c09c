"""Seeded observer populations and observer categories."""

from __future__ import annotations

import json

import numpy as np
import pytest
import xarray as xr

import metasim
from metasim.errors import ObserverError
from metasim.metamerism.categories import observer_categories
from metasim.observers import DEFAULT_SD, DEVIATIONS, cie2006_observer, observer_population
from metasim.spectra import wavelength_grid

COARSE = wavelength_grid(390, 830, 5)


@pytest.fixture(scope="module")
def large():
    return observer_population(20_000, seed=7, age_years=(20, 80), field_size_deg=(1, 10), wavelengths=COARSE)


def test_sampled_standard_deviations_match_the_configured_ones(large):
    for name in DEVIATIONS:
        sampled = float(large[name].std())
        assert sampled == pytest.approx(DEFAULT_SD[name], rel=0.03), name  # issue 3 sampling check
        assert abs(float(large[name].mean())) < 4 * DEFAULT_SD[name] / np.sqrt(20_000)
    assert 20 <= float(large["age_years"].min()) and float(large["age_years"].max()) <= 80
    assert 1 <= float(large["field_size_deg"].min()) and float(large["field_size_deg"].max()) <= 10


def test_default_standard_deviations_are_the_documented_ones():
    # Asano, Fairchild & Blondé (2016), from memory (DESIGN.md)
    assert DEFAULT_SD == {"lens_density_pct": 18.7, "macular_density_pct": 36.5, "l_density_pct": 9.0,
                          "m_density_pct": 9.0, "s_density_pct": 7.4, "l_shift_nm": 2.0,
                          "m_shift_nm": 1.5, "s_shift_nm": 1.3}


def test_configured_standard_deviations_are_used():
    pop = observer_population(4000, seed=3, sd_l_shift_nm=4.0, sd_lens_density_pct=0, wavelengths=COARSE)
    assert float(pop["l_shift_nm"].std()) == pytest.approx(4.0, rel=0.05)  # common practice, no source
    assert (pop["lens_density_pct"] == 0).all()


def test_same_seed_same_population_different_seed_differs():
    a = observer_population(50, seed=11, age_years=(20, 80), wavelengths=COARSE)
    b = observer_population(50, seed=11, age_years=(20, 80), wavelengths=COARSE)
    c = observer_population(50, seed=12, age_years=(20, 80), wavelengths=COARSE)
    xr.testing.assert_identical(a, b)
    assert not np.array_equal(a["lms"].values, c["lms"].values)
    assert not np.array_equal(a["age_years"].values, c["age_years"].values)


def test_generator_seed_is_accepted_and_recorded():
    pop = observer_population(5, seed=np.random.default_rng(5), wavelengths=COARSE)
    assert pop.attrs["seed"] == "numpy Generator" and "state" in json.loads(pop.attrs["generator_state"])


def test_each_member_is_the_individual_observer_of_its_parameters():
    pop = observer_population(4, seed=2, age_years=(25, 70), field_size_deg=(2, 8))
    for i in range(4):
        member = pop.isel(observer=i)
        one = cie2006_observer(**{k: float(member[k]) for k in ["age_years", "field_size_deg", *DEVIATIONS]})
        np.testing.assert_allclose(member["lms"].values, one["lms"].values, atol=1e-15)


def test_zero_standard_deviations_give_the_cie_170_1_observer():
    zero = {f"sd_{name}": 0.0 for name in DEVIATIONS}
    pop = observer_population(3, seed=0, age_years=55, field_size_deg=4, **zero)
    np.testing.assert_array_equal(pop["lms"].values[1], cie2006_observer(55, 4)["lms"].values)  # CIE 170-1:2006


def test_age_histograms():
    pop = observer_population(6000, seed=4, age_years={25: 1, (60, 70): 3}, wavelengths=COARSE)
    ages = pop["age_years"].values
    assert set(np.unique(ages[ages < 50])) == {25.0}
    assert ((ages >= 60) & (ages <= 70) | (ages == 25)).all()
    assert np.mean(ages == 25) == pytest.approx(0.25, abs=0.02)  # binomial sampling, common practice
    weights = xr.DataArray([1.0, 1.0], dims="age_years", coords={"age_years": [30.0, 70.0]})
    pop = observer_population(2000, seed=4, age_years=weights, wavelengths=COARSE)
    assert set(np.unique(pop["age_years"].values)) == {30.0, 70.0}


def test_dataset_layout_and_provenance():
    pop = observer_population(6, seed=9, age_years=(30, 40), wavelengths=COARSE)
    assert pop["lms"].dims == ("observer", "cone", "wavelength")
    assert pop["cmf"].dims == ("observer", "xyz", "wavelength")
    for name in ["lms", "cmf", "age_years", "field_size_deg", *DEVIATIONS]:
        assert {"units", "long_name"} <= set(pop[name].attrs)
    for name in ["age_years", "field_size_deg", *DEVIATIONS]:
        assert pop[name].dims == ("observer",)
    assert pop.attrs["seed"] == 9 and pop.attrs["metasim_version"] == metasim.__version__
    assert "CIE 170-1" in pop.attrs["model"]
    parameters = json.loads(pop.attrs["parameters"])
    assert parameters["age_years"] == {"distribution": "uniform", "low": 30.0, "high": 40.0}
    assert parameters["sd_macular_density_pct"] == 36.5


def test_netcdf_round_trip(tmp_path):
    pop = observer_population(7, seed=1, age_years=(20, 80), field_size_deg=(1, 10), wavelengths=COARSE)
    path = tmp_path / "population.nc"
    metasim.save_dataset(pop, path)
    xr.testing.assert_identical(metasim.load_dataset(path), pop)
    plain = tmp_path / "plain.nc"  # plain xarray too: every attribute is netCDF-native
    pop.to_netcdf(plain, engine="netcdf4")
    with xr.open_dataset(plain, engine="netcdf4") as back:
        np.testing.assert_array_equal(back["lms"].values, pop["lms"].values)


@pytest.mark.parametrize("kwargs, words", [
    (dict(age_years=15), ["age_years=15", "20-80"]),
    (dict(age_years=(20, 95)), ["age_years=95", "20-80"]),
    (dict(field_size_deg=0.5), ["field_size_deg=0.5", "1-10"]),
    (dict(field_size_deg=(2, 20)), ["field_size_deg=20", "1-10"]),
    (dict(sd_lens_density_pct=-1.0), ["sd_lens_density_pct=-1.0", ">= 0"]),
    (dict(sd_s_shift_nm=-0.1), ["sd_s_shift_nm=-0.1", ">= 0"]),
    (dict(age_years={30: -1}), ["weight -1", ">= 0"]),
    (dict(seed=-1), ["seed=-1", "integer >= 0"]),
])
def test_bad_population_settings(kwargs, words):
    kwargs = {"seed": 0, **kwargs}
    with pytest.raises(ObserverError) as info:
        observer_population(10, wavelengths=COARSE, **kwargs)
    assert all(w in str(info.value) for w in words)


def test_bad_population_size():
    with pytest.raises(ObserverError, match="n=0"):
        observer_population(0, seed=1)


# -- categories ----------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def mixed():
    return observer_population(800, seed=21, age_years=(20, 80), field_size_deg=(1, 10), wavelengths=COARSE)


def test_categories_are_population_members_with_weights(mixed):
    cats = observer_categories(mixed, 6, seed=0)
    assert cats.sizes["observer"] == 6
    assert float(cats["weight"].sum()) == pytest.approx(1.0)
    assert np.all(np.diff(cats["weight"].values) <= 0)
    assert {"units", "long_name"} <= set(cats["weight"].attrs)
    members = mixed.sel(observer=cats["observer"].values)
    np.testing.assert_array_equal(cats["lms"].values, members["lms"].values)
    np.testing.assert_array_equal(cats["age_years"].values, members["age_years"].values)
    xr.testing.assert_identical(cats, observer_categories(mixed, 6, seed=0))


def test_categories_separate_clearly_different_groups():
    quiet = {f"sd_{name}": DEFAULT_SD[name] / 10 for name in DEVIATIONS}
    pop = observer_population(300, seed=5, age_years={22: 2, 78: 1}, wavelengths=COARSE, **quiet)
    cats = observer_categories(pop, 2, seed=1)
    assert sorted(cats["age_years"].values) == [22.0, 78.0]  # lens ageing dominates (van de Kraats & van Norren 2007)
    share_young = float(cats["weight"].where(cats["age_years"] == 22, drop=True).item())
    assert share_young == float((pop["age_years"] == 22).mean())


def test_k_equal_n_and_bad_k(mixed):
    small = mixed.isel(observer=slice(0, 5))
    cats = observer_categories(small, 5, seed=0)
    np.testing.assert_allclose(cats["weight"].values, 0.2)
    assert np.allclose(cats["category_rms_delta_e"].values, 0.0)
    with pytest.raises(ObserverError) as info:
        observer_categories(small, 6, seed=0)
    assert "k=6" in str(info.value) and "1-5" in str(info.value)
    with pytest.raises(ObserverError, match="k=0"):
        observer_categories(small, 0, seed=0)
    with pytest.raises(ObserverError, match="cmf"):
        observer_categories(small["lms"], 2, seed=0)


def test_observer_checks_accept_what_metasim_makes(large):
    from metasim.observers import check_observers
    from metasim.observers.files import X_BAR_NEGATIVE_SHARE

    assert check_observers(large, wavelengths=COARSE) is large  # 20,000 observers aged 20-80, 1-10 degrees
    x_bar = large["cmf"].sel(xyz="X")
    dip = float((x_bar.min("wavelength") / x_bar.max("wavelength")).min())
    assert -X_BAR_NEGATIVE_SHARE < dip < 0  # the CIE 170-2 transform dips below zero; the allowance covers it
    check_observers(observer_categories(large.isel(observer=slice(0, 400)), 5, seed=1))
    for name in metasim.observers.STANDARD_OBSERVERS:
        check_observers(metasim.standard_observer(name).expand_dims(observer=[name]))


def test_a_population_too_large_for_the_memory_is_refused_first(monkeypatch):
    from metasim.errors import NotEnoughMemoryError
    from metasim.metamerism.engine import check_mismatch_memory

    monkeypatch.setattr("metasim._memory.available_memory", lambda: 2e9)
    with pytest.raises(NotEnoughMemoryError, match=r"10,000,000 observers needs about 705.6 GB .* 2.0 GB available"):
        observer_population(10_000_000, seed=1)  # 441 wavelengths x 160 bytes each (estimate, measured)
    with pytest.raises(NotEnoughMemoryError, match="1,000 observers x 100,000 stimuli x 2 designs"):
        check_mismatch_memory(1000, 100_000, 2)
    check_mismatch_memory(1000, 100, 2)  # 32 MB: not even checked


def test_categories_of_coinciding_observers_give_each_distinct_observer_its_own_category():
    # five equal observers: every k-means run leaves a category empty, so the fallback makes the one
    # distinct observer a category and the next categories take repeats, in population order
    equal = metasim.physiological_observers(age_years=[40] * 5, field_size_deg=2, wavelengths=COARSE)
    for k, weights in ((2, [0.8, 0.2]), (3, [0.6, 0.2, 0.2])):
        for seed in (0, 5):  # the fallback does not depend on the draws
            cats = observer_categories(equal, k, seed=seed)
            np.testing.assert_allclose(cats["weight"].values, weights)  # 4 + 1 and 3 + 1 + 1 of 5 observers
            assert cats["observer"].values.tolist() == list(range(k))
            np.testing.assert_array_equal(cats["category_rms_delta_e"].values, 0.0)
    # two distinct observers, three categories: no category mixes them (every member equals its representative)
    two = metasim.physiological_observers(age_years=[30, 30, 30, 60, 60], field_size_deg=2, wavelengths=COARSE)
    cats = observer_categories(two, 3, seed=0)
    assert sorted(set(cats["age_years"].values.tolist())) == [30.0, 60.0]
    assert float(cats["weight"].sum()) == pytest.approx(1.0, abs=1e-15)
    np.testing.assert_allclose(cats["category_rms_delta_e"].values, 0.0, atol=1e-9)


def test_the_command_line_population_passes_age_years_on_and_keeps_the_old_spellings():
    from metasim.cli.study import build_population

    kwargs = dict(seed=3, wavelengths=COARSE)
    expected = observer_population(4, age_years=(25, 65), field_size_deg=2, **kwargs)
    with pytest.MonkeyPatch.context() as patch:  # the draw is the library's, under the same names
        patch.setattr("metasim.cli.study.observer_population",
                      lambda n, **options: observer_population(n, wavelengths=COARSE, **options))
        new = build_population(4, 3, (25.0, 65.0), 2)
        with pytest.warns(DeprecationWarning, match="ages=... is now age_years"):
            old = build_population(4, 3, ages="25-65", field_size="2")
    xr.testing.assert_identical(new, expected)
    xr.testing.assert_identical(old, expected)
    with pytest.raises(TypeError, match="agez"):
        build_population(4, 3, agez=30)
