"""What an extra primary buys: gamut gain and population-mismatch gain per candidate wavelength."""

import numpy as np
import pytest
from figure_checks import assert_axes_labelled
from test_report_reading import check_page

import metasim
from metasim.emitters import gaussian, laser_line
from metasim.metamerism import neutral_ramp
from metasim.report import render_report, report_figures
from metasim.sweep import extra_primary_value


@pytest.fixture(scope="module")
def displays():
    monitor = metasim.calibrate_white(metasim.make_display(gaussian([455, 535, 615], [25, 30, 35],
                                                                    name=["B", "G", "R"]), name="monitor"), "cie1931_2")
    lasers = metasim.calibrate_white(metasim.make_display(laser_line([465, 532, 638], 1.0, name=["B", "G", "R"]),
                                                          name="three lasers"), "cie1931_2")
    return monitor, lasers


def test_zero_gain_for_the_calibration_observer(displays):
    # one observer equal to the calibration observer: every colour inside the gamut is matched exactly,
    # with or without the extra primary (common practice, no source: colorimetric matching by definition)
    monitor, lasers = displays
    value = extra_primary_value(lasers, monitor, "cie1931_2", neutral_ramp(4), peak_nm=[490, 580, 600], volume=False)
    assert float(value["base_delta_e_2000_p95"]) < 1e-9
    np.testing.assert_allclose(value["mismatch_gain"].values, 0.0, atol=1e-9)


@pytest.fixture(scope="module")
def varied(displays):
    monitor, lasers = displays
    viewers = metasim.observer_population(20, seed=5, age_years=(20, 70))
    return extra_primary_value(lasers, monitor, viewers, neutral_ramp(4), peak_nm=[500, 580, 600])


def test_positive_gain_for_a_varied_population(varied):
    # a narrow-band base judged by varied viewers: a yellow line used for the population cuts the 95th
    # percentile (the point of more than three primaries; common practice, no source)
    assert float(varied["base_delta_e_2000_p95"]) > 1.0
    assert varied["mismatch_gain"].sel(peak_wavelength=580.0) > 0.5
    assert (varied["mismatch_gain_share"] <= 1.0).all()


def test_gamut_gain_equals_the_gamut_layer(varied, displays):
    _, lasers = displays
    gain = metasim.extra_primary_gain(lasers, metasim.standard_observer("cie1931_2"), peak_nm=[500, 580, 600])
    np.testing.assert_allclose(varied["area_gain_share"].values, gain["area_gain_share"].values, rtol=1e-12)
    np.testing.assert_allclose(varied["volume_gain_share"].values, gain["volume_gain_share"].values, rtol=1e-6)
    # a cyan line widens the xy gamut far more than a yellow one (spectrum locus geometry, CIE 15:2004)
    assert varied["area_gain_share"].sel(peak_wavelength=500.0) > 5 * varied["area_gain_share"].sel(peak_wavelength=580.0)


def test_report_shows_both_curves(varied):
    assert list(report_figures(varied)) == ["extra_primary_value"]
    assert_axes_labelled(report_figures(varied)["extra_primary_value"][0])
    page = render_report(varied)
    answer = page.split("aria-label='answer'>", 1)[1].split("</section>", 1)[0]
    assert "Most gamut: an extra primary at 500 nm" in answer
    candidates = page.split("<h2>Every candidate</h2>", 1)[1].split("<h2", 1)[0]
    assert candidates.count("<tr><td>") == 3
    check_page(page)
