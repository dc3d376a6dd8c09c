"""Extra-primary gain across candidate wavelengths, and the gamut layer's input errors."""

import numpy as np
import pytest
import xarray as xr

import metasim
from metasim.errors import GamutError, MetasimError
from metasim.gamut import (
    candidate_spectra,
    chromaticity_gamut,
    extra_primary_gain,
    gamut_coverage,
    lab_coverage_volume,
    lab_gamut_volume,
    reference_xyz,
)


@pytest.fixture(scope="module")
def observer():
    return metasim.standard_observer("cie1931_2")


@pytest.fixture(scope="module")
def base(observer):
    spectra = candidate_spectra([635.0, 532.0, 465.0], observer.cmf.wavelength, "gaussian", 20.0)
    return spectra.rename(peak_wavelength="primary").assign_coords(primary=["R", "G", "B"])


def test_gain_over_450_to_650_nm_is_ready_to_plot(base, observer):
    gain = extra_primary_gain(base, observer, kind="laser")
    peak = gain.coords["peak_wavelength"]
    assert peak.size == 201 and float(peak[0]) == 450.0 and float(peak[-1]) == 650.0
    assert peak.attrs["units"] == "nm"
    for name in ("area_gain", "area_gain_share", "volume_gain", "volume_gain_share", "area", "volume"):
        assert gain[name].dims == ("peak_wavelength",)
        assert gain[name].attrs["units"] and gain[name].attrs["long_name"]
    assert (gain.area_gain >= -1e-15).all() and (gain.volume_gain >= 0).all()  # a superset's hull / solid


def test_gain_equals_separate_gamut_calculations(base, observer):
    gain = extra_primary_gain(base, observer, peak_nm=[495.0, 580.0], kind="gaussian", fwhm_nm=15.0)
    base_xyz = metasim.tristimulus(base, observer, scale="none")
    white = base_xyz.sum("primary")
    power = float(base.sum("wavelength").mean()) * 1.0
    for peak in (495.0, 580.0):
        extra = candidate_spectra([peak], observer.cmf.wavelength, "gaussian", 15.0) * power
        extra = extra.rename(peak_wavelength="primary").assign_coords(primary=["extra"])
        grown = xr.concat([base, extra], dim="primary")
        area = float(chromaticity_gamut(grown, observer=observer).area)
        assert float(gain.area.sel(peak_wavelength=peak)) == pytest.approx(area, rel=1e-12)
        volume = float(lab_gamut_volume(grown, observer, white=white))
        assert float(gain.volume.sel(peak_wavelength=peak)) == pytest.approx(volume, rel=1e-9)


def test_candidate_inside_the_gamut_adds_no_area(base, observer):
    gain = extra_primary_gain(base, observer, peak_nm=[532.0], kind="gaussian", fwhm_nm=20.0, volume=False)
    assert gain.area_gain.item() == 0.0  # geometry: same chromaticity as the green primary


def test_laser_candidates_keep_energy_and_centroid(observer):
    wl = observer.cmf.wavelength
    lines = candidate_spectra([500.3, 611.75], wl)
    energy = lines.sum("wavelength") * 1.0
    centroid = (lines * wl).sum("wavelength") / lines.sum("wavelength")
    np.testing.assert_allclose(energy, 1.0, rtol=1e-12)  # unit radiant power, by construction
    np.testing.assert_allclose(centroid, [500.3, 611.75], rtol=1e-12)  # linear apportioning keeps the centroid


def test_gain_per_observer(base):
    wl = metasim.default_grid()
    observers = xr.concat([metasim.standard_observer(n, wl)[["cmf"]] for n in ("cie1931_2", "cie2015_2")],
                          dim="observer", coords="minimal", compat="override").assign_coords(observer=[0, 1])
    gain = extra_primary_gain(base, observers, peak_nm=[490.0, 500.0], volume=False)
    assert set(gain.area_gain.dims) == {"observer", "peak_wavelength"}


def one_line(exc_info):
    message = str(exc_info.value)
    assert "\n" not in message and message
    return message


def xy(points):
    return xr.DataArray(np.asarray(points, float), dims=("primary", "chromaticity"),
                        coords={"chromaticity": ["x", "y"]})


def test_fewer_than_three_primaries_is_refused():
    with pytest.raises(GamutError) as info:
        chromaticity_gamut(xy([(0.6, 0.3), (0.3, 0.6)]))
    assert "2 primaries" in one_line(info) and "at least 3" in one_line(info)
    with pytest.raises(GamutError):
        lab_gamut_volume(reference_xyz("bt709").isel(primary=[0, 1]))


def test_collinear_primaries_are_refused():
    with pytest.raises(GamutError) as info:
        chromaticity_gamut(xy([(0.6, 0.3), (0.4, 0.4), (0.2, 0.5)]))
    message = one_line(info)
    assert "collinear" in message and "(0.6, 0.3)" in message and "not on one line" in message
    red, green = reference_xyz("bt709").values[:2]
    flat = xr.DataArray(np.stack([red, green, red + 2 * green]), dims=("primary", "xyz"),
                        coords={"xyz": ["X", "Y", "Z"]})
    with pytest.raises(GamutError) as info:
        lab_gamut_volume(flat)
    assert "span no volume" in one_line(info)


def test_collinear_design_is_named_in_a_batch():
    points = np.array([[(0.64, 0.33), (0.3, 0.6), (0.15, 0.06)], [(0.6, 0.3), (0.4, 0.4), (0.2, 0.5)]])
    designs = xr.DataArray(points, dims=("design", "primary", "chromaticity"),
                           coords={"design": ["ok", "flat"], "chromaticity": ["x", "y"]})
    with pytest.raises(GamutError) as info:
        chromaticity_gamut(designs)
    assert one_line(info).startswith("design=flat")


@pytest.mark.parametrize("call, text", [
    (lambda: gamut_coverage("bt709", "adobe"), "allowed: bt709"),
    (lambda: chromaticity_gamut("bt709", space="lab"), "allowed: xy, uv"),
    (lambda: lab_gamut_volume(candidate_spectra([600.0, 530.0, 460.0], metasim.default_grid())
                              .rename(peak_wavelength="primary")), "need an observer"),
    (lambda: lab_gamut_volume(reference_xyz("bt709"), rtol=0.5), "0 < rtol < 0.1"),
    (lambda: lab_coverage_volume(reference_xyz("bt709"), "bt2020", rtol=0.0), "0 < rtol < 0.1"),
    (lambda: candidate_spectra([500.0], metasim.default_grid(), "gaussian"), "width > 0"),
    (lambda: candidate_spectra([300.0], metasim.default_grid()), "outside the grid"),
    (lambda: chromaticity_gamut(object()), "not usable"),
])
def test_bad_input_messages(call, text):
    with pytest.raises(MetasimError) as info:
        call()
    assert text in one_line(info)
