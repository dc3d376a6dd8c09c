"""Fitting individual observers to colour-matching data: model, forms, batched MAP fit, advice."""

from __future__ import annotations

import colour
import numpy as np
import pytest
import xarray as xr
from colour.quality.datasets.tcs import SDS_TCS

import metasim
from metasim import emitters
from metasim.colorimetry.tristimulus import K_M
from metasim.errors import FileFormatError, FittingError, MetasimError
from metasim.fitting import (check_matching_data, colour_matching_data, expected_uncertainty, fit_observer,
                             matching_session_data, read_matching_functions_csv, read_session_csv,
                             synthetic_matches)
from metasim.fitting.model import PARAMETERS, predict
from metasim.metamerism import primaries_and_secondaries
from metasim.observers import DEVIATIONS, physiological_observers

STILES_BURCH_NM = [645.16, 526.32, 444.44]  # CIE 1964 / Stiles & Burch (1959) primaries
TEST_NM = np.linspace(400.0, 690.0, 30)
SD = np.array([metasim.observers.DEFAULT_SD[k] for k in DEVIATIONS])


def _table(name):
    table = colour.MSDS_CMFS[name]
    return np.asarray(table.wavelengths, dtype=float), np.nan_to_num(np.asarray(table.values, dtype=float))


def _cmf_plan(field=10.0, test=TEST_NM):
    return colour_matching_data(None, test_wavelengths=test, primaries=STILES_BURCH_NM, field_size_deg=field)


@pytest.fixture(scope="module")
def session_plan():
    wl = np.arange(390.0, 781.0, 2.0)
    primaries = emitters.gaussian([630, 532, 462], [22, 28, 22], wl, name=["R", "G", "B"])
    d65 = colour.SDS_ILLUMINANTS["D65"]
    light = np.interp(wl, d65.wavelengths, d65.values)
    names = list(SDS_TCS["CIE 1995"])
    refl = np.stack([np.interp(wl, sd.wavelengths, sd.values) for sd in SDS_TCS["CIE 1995"].values()])
    refs = xr.DataArray(refl * light, dims=("stimulus", "wavelength"), coords={"stimulus": names, "wavelength": wl})
    plan = matching_session_data(None, references=refs, display=primaries)
    drives, _ = predict(check_matching_data(plan).geometry, np.zeros((1, 8)), [32.0], [2.0], jacobian=False)
    refs = refs * (0.8 / drives[0].max(axis=1))[:, None]  # mean observer's largest drive 0.8 for every sample
    return matching_session_data(None, references=refs, display=primaries)


@pytest.fixture(scope="module")
def population():
    return metasim.observer_population(200, seed=11, age_years=(20, 70), field_size_deg=10)


def _z_scores(result, data):
    truth = np.stack([data[f"true_{k}"].values for k in DEVIATIONS], axis=1)
    return (result["estimate"].sel(parameter=list(DEVIATIONS)).values - truth) / \
        result["standard_error"].sel(parameter=list(DEVIATIONS)).values


# -- the forward model --------------------------------------------------------------------------------

@pytest.mark.parametrize("axis", ["log_wavelength", "wavelength"])
def test_predicted_amounts_are_cone_matches_of_the_observer_functions(axis):
    rng = np.random.default_rng(4)
    params = rng.normal(size=(6, 8)) * SD
    ages, fields = rng.uniform(20, 80, 6), rng.uniform(1, 10, 6)
    md = check_matching_data(_cmf_plan(test=[402.5, 455.0, 518.3, 577.0, 640.9, 700.0]))
    amounts, _ = predict(md.geometry, params, ages, fields, peak_shift_axis=axis)
    lms = physiological_observers(ages, fields, peak_shift_axis=axis, absorbance_interpolation="monotone_cubic",
                                  **{k: params[:, i] for i, k in enumerate(DEVIATIONS)})["lms"]
    at = lms.interp(wavelength=xr.DataArray(np.r_[STILES_BURCH_NM, md.dataset["test_wavelength"].values], dims="w"))
    matrix, target = at.values[..., :3], at.values[..., 3:]
    # Grassmann's laws: equal cone excitations on both sides of the field (Wyszecki & Stiles 1982)
    assert np.abs(np.einsum("nck,nsk->ncs", matrix, amounts) - target).max() < 1e-12 * np.abs(target).max()


def test_mean_10_degree_observer_predicts_the_stiles_burch_functions():
    wl, table = _table("Stiles & Burch 1959 10 Degree RGB CMFs")
    test = np.arange(400.0, 701.0, 5.0)
    md = check_matching_data(_cmf_plan(test=test))
    amounts, _ = predict(md.geometry, np.zeros((1, 8)), [32.0], [10.0], jacobian=False)
    published = np.stack([np.interp(test, wl, table[:, i]) for i in range(3)], axis=1)
    assert np.abs(amounts[0] - published).max() < 0.004  # Stiles & Burch (1959) 10° RGB CMFs, colour-science (peak 3.17)


def test_analytic_derivatives_equal_central_differences():
    rng = np.random.default_rng(2)
    params = np.c_[rng.normal(size=(4, 8)) * SD, rng.uniform(25, 75, 4)]
    md = check_matching_data(_cmf_plan(test=np.linspace(405.3, 688.1, 12)))
    _, jac = predict(md.geometry, params, 0.0, 4.0, fit_age=True)
    for p, step in enumerate([*(SD * 1e-4), 1e-3]):
        up, down = params.copy(), params.copy()
        up[:, p] += step
        down[:, p] -= step
        numeric = (predict(md.geometry, up, 0.0, 4.0, fit_age=True, jacobian=False)[0]
                   - predict(md.geometry, down, 0.0, 4.0, fit_age=True, jacobian=False)[0]) / (2 * step)
        scale = np.abs(numeric).max()
        assert np.abs(jac[:, p] - numeric).max() < 1e-5 * scale, PARAMETERS[p]  # common practice, no source


def test_spectral_weights_integrate_like_the_colorimetry_layer(session_plan):
    md = check_matching_data(session_plan)
    observer = physiological_observers(45, 2, wavelengths=session_plan["wavelength"].values)
    lms_nodes = physiological_observers(45, 2)["lms"].values[0][:, md.geometry.nodes]
    ours = lms_nodes @ md.geometry.weights[-4:-1].T * K_M
    theirs = metasim.cone_excitations(session_plan["display_spectra"], observer, scale="absolute")
    theirs = theirs.isel(observer=0).transpose("cone", "primary").values
    assert np.abs(ours - theirs).max() < 1e-12 * np.abs(theirs).max()  # rectangle rule, CIE 15:2004


# -- noise-free fits --------------------------------------------------------------------------------

def _noise_free(lms_at, test=np.arange(400.0, 701.0, 10.0)):
    amounts = np.linalg.solve(lms_at(np.array(STILES_BURCH_NM)), lms_at(test)).T
    return colour_matching_data(amounts, test_wavelengths=test, primaries=STILES_BURCH_NM, field_size_deg=2,
                                age_years=32)


def test_noise_free_functions_of_the_age_32_observer_fit_to_zero_deviations():
    lms = metasim.cie2006_observer(32, 2)["lms"]
    data = _noise_free(lambda x: lms.interp(wavelength=x).values)
    result = fit_observer(data, categories=False)
    assert np.abs(result["estimate"].values).max() < 1e-6  # CIE 170-1:2006, standard observer of age 32
    assert bool(result["converged"].all())


def test_stockman_sharpe_fundamentals_fit_to_the_inversion_densities():
    wl, table = _table("Stockman & Sharpe 2 Degree Cone Fundamentals")
    data = _noise_free(lambda x: np.stack([np.interp(x, wl, table[:, i]) for i in range(3)]))
    estimate = fit_observer(data, categories=False)["estimate"].values[0]
    pigment = np.exp(-2 / 1.333)
    # CIE 170-1:2006 2° densities (0.50045, 0.40037, macula 0.350018) against 0.50 / 0.40 / 0.35 of the
    # Stockman & Sharpe (2000) 2° fundamentals, colour-science: every other deviation 0
    expected = [0.0, (0.35 / (0.485 * np.exp(-2 / 6.132)) - 1) * 100, (0.5 / (0.38 + 0.54 * pigment) - 1) * 100,
                (0.5 / (0.38 + 0.54 * pigment) - 1) * 100, (0.4 / (0.30 + 0.45 * pigment) - 1) * 100, 0, 0, 0]
    assert np.abs(estimate - expected).max() < 1e-6


# -- synthetic subjects with setting noise ----------------------------------------------------------

def test_colour_matching_functions_recover_parameters_within_their_standard_errors(population):
    data = synthetic_matches(_cmf_plan(), population, setting_noise=0.02, seed=3)  # 2 % of the match, no source
    result = fit_observer(data, categories=False)
    z = _z_scores(result, data)
    assert (np.abs(z) < 2).mean() >= 0.90  # Gaussian posterior: 95 % within 2 SD (common practice, no source)
    assert 0.8 <= z.std() <= 1.2
    assert np.abs(np.median(result["setting_noise"]) / 0.02 - 1) < 0.05
    assert bool(result["converged"].all())


def test_matching_sessions_recover_parameters_within_their_standard_errors(session_plan, population):
    observers = population.assign_coords(field_size_deg=("observer", np.full(200, 2.0)))
    data = synthetic_matches(session_plan, observers, setting_noise=0.01, seed=4, repeats=3)  # 1 % drive, no source
    result = fit_observer(data, categories=False)
    z = _z_scores(result, data)
    assert (np.abs(z) < 2).mean() >= 0.90  # Gaussian posterior (common practice, no source)
    assert 0.8 <= z.std() <= 1.2
    # the fitted observers explain the settings better than the mean observer (CIE 2000, CIE 15:2004)
    assert float(result["match_error"].median()) < 0.6 * float(result["match_error_mean_observer"].median())


def test_fit_age_is_bounded_and_reported_when_confounded_with_the_lens(population):
    data = synthetic_matches(_cmf_plan(), population.isel(observer=slice(0, 40)), setting_noise=0.02, seed=5,
                             record_ages=False)
    result = fit_observer(data, fit_age=True, categories=False)
    ages = result["estimate"].sel(parameter="age_years")
    assert float(ages.min()) >= 20 and float(ages.max()) <= 80  # CIE 170-1 validity range
    assert (result["age_years"].values == ages.values).all()
    lens_age = np.abs(result["posterior_correlation"].sel(parameter="lens_density_pct", other_parameter="age_years"))
    assert float(lens_age.median()) > 0.5  # age acts through the lens density (CIE 203:2012)


def test_data_that_cannot_separate_two_parameters_are_reported():
    # test lights only above 560 nm: the S cones hardly respond (CIE 170-1:2006, S defined to 615 nm)
    plan = _cmf_plan(test=np.linspace(560.0, 690.0, 20))
    data = synthetic_matches(plan, metasim.observer_population(10, seed=1, field_size_deg=10), setting_noise=0.02, seed=6)
    result = fit_observer(data, categories=False)
    s_density = result.sel(parameter="s_density_pct")
    assert not s_density["identified"].any()
    assert all("s_shift_nm" in note for note in s_density["identification_note"].values)
    assert all("little information" in note for note in s_density["identification_note"].values)
    assert bool(result["identified"].sel(parameter="l_shift_nm").all())


# -- advice ---------------------------------------------------------------------------------------------

def test_expected_standard_errors_match_the_fit(population):
    data = synthetic_matches(_cmf_plan(), population, setting_noise=0.02, seed=3)
    fitted = fit_observer(data, categories=False)["standard_error"].median("observer")
    advice = expected_uncertainty(_cmf_plan(), setting_noise=0.02, age_years=45)
    ratio = advice["expected_standard_error"] / fitted
    assert float(np.abs(ratio - 1).max()) < 0.3  # linearised posterior (Tarantola 2005)


def test_advice_ranks_plans_and_flags_weak_ones():
    plans = {"visible": _cmf_plan(), "long only": _cmf_plan(test=np.linspace(560, 690, 30))}
    advice = expected_uncertainty(plans, setting_noise=0.02, repeats=2)
    se = advice["expected_standard_error"]
    short = ["lens_density_pct", "macular_density_pct", "s_density_pct", "s_shift_nm"]  # act below 500 nm (CIE 170-1)
    assert (se.sel(plan="visible", parameter=short) < se.sel(plan="long only", parameter=short)).all()
    assert not bool(advice["identified"].sel(plan="long only", parameter="s_density_pct"))
    assert (se <= advice["prior_sd"] * 1.0000001).all()  # data never widen the prior (Tarantola 2005)


# -- the result as a population, files --------------------------------------------------------------

def test_result_is_a_population_and_round_trips(tmp_path, population):
    data = synthetic_matches(_cmf_plan(), population.isel(observer=slice(0, 12)), setting_noise=0.02, seed=7)
    result = fit_observer(data, categories=metasim.observer_categories(population, 3, seed=1))
    assert set(result["nearest_category"].values) <= {0, 1, 2}
    path = metasim.save_dataset(result, tmp_path / "fit.nc")
    again = metasim.load_dataset(path)
    xr.testing.assert_identical(again["identification_note"], result["identification_note"])
    assert again["identified"].dtype == bool and again.attrs["prior"] == result.attrs["prior"]
    monitor = metasim.calibrate_white(metasim.make_display(emitters.gaussian([612, 548, 455], [38, 42, 28],
                                                                             name=["R", "G", "B"])), "cie1931_2")
    lasers = metasim.make_display(emitters.laser_line([638, 532, 465], 1.0, name=["R", "G", "B"]))
    stimuli = primaries_and_secondaries()
    mismatch = metasim.mismatch(monitor, lasers, result, stimuli)
    assert mismatch.sizes["observer"] == 12 and mismatch["stimulus"].equals(
        metasim.mismatch(monitor, lasers, population.isel(observer=slice(0, 2)), stimuli)["stimulus"])
    assert mismatch.attrs["observer_model"] == result.attrs["model"]


def test_csv_imports_give_the_same_data(tmp_path, session_plan):
    data = synthetic_matches(_cmf_plan(test=[450.0, 500.0, 550.0, 600.0]), metasim.observer_population(
        3, seed=2, field_size_deg=10, age_years=(20, 70)), setting_noise=0.02, seed=1, repeats=2)
    lines = ["# synthetic matches", "# primary_wavelengths_nm: 645.16, 526.32, 444.44",
             "subject,test_wavelength_nm,P1,P2,P3,field_size_deg,age_years"]
    for i in range(3):
        for s, wl in enumerate(data["test_wavelength"].values):
            for r in range(2):
                a = data["amount"].values[i, s, r]
                lines.append(f"s{i},{wl:g},{a[0]!r},{a[1]!r},{'' if (i, s, r) == (1, 2, 1) else repr(a[2])},10,"
                             f"{data['age_years'].values[i]!r}")
    (tmp_path / "cmf.csv").write_text("\n".join(lines) + "\n")
    read = read_matching_functions_csv(tmp_path / "cmf.csv")
    expected = data["amount"].values.copy()
    expected[1, 2, 1, 2] = np.nan
    np.testing.assert_array_equal(read["amount"].values, expected)
    assert list(read["observer"].values) == ["s0", "s1", "s2"]
    np.testing.assert_array_equal(read["age_years"].values, data["age_years"].values)
    # sessions: references and display spectra as CSV files
    refs = session_plan["reference_spectra"].isel(stimulus=slice(0, 4))
    metasim.write_spectra_csv(refs.rename(stimulus="channel"), tmp_path / "refs.csv")
    metasim.write_spectra_csv(session_plan["display_spectra"].rename(primary="channel"), tmp_path / "display.csv")
    rows = ["subject,stimulus,R,G,B"] + [f"a,{name},0.5,0.4,0.3" for name in refs["stimulus"].values]
    (tmp_path / "session.csv").write_text("\n".join(rows) + "\n")
    session = read_session_csv(tmp_path / "session.csv", references=tmp_path / "refs.csv", display=tmp_path / "display.csv")
    assert session["setting"].shape == (1, 4, 1, 3) and session.attrs["matching_data"] == "matching session"


# -- bad input --------------------------------------------------------------------------------------------

def test_bad_input_gives_clear_errors(tmp_path, session_plan):
    amounts = np.full((2, 30, 3), 0.5)
    data = colour_matching_data(amounts, test_wavelengths=TEST_NM, primaries=STILES_BURCH_NM)
    with pytest.raises(FittingError, match="without primaries"):
        check_matching_data(data.drop_vars("primary_wavelength"))
    (tmp_path / "no_primaries.csv").write_text("subject,test_wavelength_nm,R,G,B\na,500,0.1,0.8,0.1\n")
    with pytest.raises(FittingError, match="no primaries"):
        read_matching_functions_csv(tmp_path / "no_primaries.csv")
    with pytest.raises(FittingError, match="every 'amount' value is NaN"):
        colour_matching_data(np.full((2, 30, 3), np.nan), test_wavelengths=TEST_NM, primaries=STILES_BURCH_NM)
    with pytest.raises(FittingError, match="subject 1 has no valid matches"):
        colour_matching_data(np.r_[amounts[:1], np.full((1, 30, 3), np.nan)], test_wavelengths=TEST_NM,
                             primaries=STILES_BURCH_NM)
    few = colour_matching_data(amounts[:, :2], test_wavelengths=TEST_NM[:2], primaries=STILES_BURCH_NM)
    with pytest.raises(FittingError, match="has 6 valid values; fitting 8 parameters and the setting noise needs at least 9"):
        fit_observer(few)
    settings = np.full((1, 14, 3), 0.5)
    settings[0, 3, 1] = 1.2
    with pytest.raises(FittingError, match="setting 1.2 of subject 0, stimulus .* is outside 0..1"):
        matching_session_data(settings, references=session_plan["reference_spectra"],
                              display=session_plan["display_spectra"])
    with pytest.raises(FittingError, match="exactly 3 adjustable primaries"):
        matching_session_data(None, references=session_plan["reference_spectra"],
                              display=emitters.gaussian([630, 580, 532, 462], 25, session_plan["wavelength"].values))
    with pytest.raises(FittingError, match="outside the observer model"):
        colour_matching_data(None, test_wavelengths=[380.0], primaries=STILES_BURCH_NM)
    with pytest.raises(FittingError, match="not independent"):
        colour_matching_data(None, test_wavelengths=[500.0], primaries=[600.0, 600.0, 450.0])
    with pytest.raises(FittingError, match="no observations"):
        fit_observer(_cmf_plan())
    with pytest.raises(FittingError, match="prior SD of m_shift_nm"):
        fit_observer(data, prior={"m_shift_nm": 0})
    with pytest.raises(MetasimError, match="peak_shift_axis='nm' is not known"):
        fit_observer(data, peak_shift_axis="nm")
    (tmp_path / "bad.csv").write_text("subject,test_wavelength_nm,R,G\na,500,1,2\n")
    with pytest.raises(FileFormatError, match="exactly three"):
        read_matching_functions_csv(tmp_path / "bad.csv", primaries=STILES_BURCH_NM)
