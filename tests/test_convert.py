"""colour-science objects and plain arrays as inputs, checked against colour-science's own results."""

import warnings

import colour
import numpy as np
import pytest
import xarray as xr
from colour.colorimetry import sds_and_msds_to_msds

import metasim
from metasim import emitters
from metasim.errors import GamutError, MetasimError, SpectrumError, StimulusError
from metasim.gamut import chromaticity_gamut, gamut_coverage, lab_coverage_volume, lab_gamut_volume
from metasim.metamerism import cie_13_3_samples, mismatch
from metasim.metamerism.stimuli import reflectance_set
from metasim.observers.convert import observer_from_colour
from metasim.spectra import SpectralEnergyWarning, from_colour, wavelength_grid

CIE1931 = "CIE 1931 2 Degree Standard Observer"
DISPLAYS = ["Typical CRT Brainard 1997", "Apple Studio Display"]


def _cmfs_on(shape):
    """colour-science's CIE 1931 functions on a data set's own wavelengths (colour's align)."""
    return colour.MSDS_CMFS[CIE1931].copy().align(shape)


def _colour_xy(sd, shape):
    return colour.XYZ_to_xy(colour.sd_to_XYZ(sd, _cmfs_on(shape), method="Integration"))


def _labelled(msds, dim="primary"):
    """The same data as a labelled DataArray, built by hand."""
    return xr.DataArray(np.asarray(msds.values).T, dims=(dim, "wavelength"),
                        coords={dim: list(msds.labels), "wavelength": np.asarray(msds.wavelengths, float)},
                        attrs={"units": metasim.spectra.RADIANCE_UNITS})


@pytest.fixture(scope="module")
def crt():
    return colour.MSDS_DISPLAY_PRIMARIES["Typical CRT Brainard 1997"]


@pytest.mark.parametrize("name", DISPLAYS)
def test_display_primaries_dataset_as_display(name):
    msds = colour.MSDS_DISPLAY_PRIMARIES[name]
    display = metasim.make_display(msds)
    assert display.primaries == ["red", "green", "blue"]  # names become primary labels
    assert display.name == name
    np.testing.assert_array_equal(display.wavelengths.values, msds.wavelengths)
    xy = metasim.xyz_to_xy(display.primary_tristimulus("cie1931_2")).transpose("primary", "chromaticity").values
    for i, label in enumerate(msds.labels):
        expected = _colour_xy(colour.SpectralDistribution(msds.signals[label]), msds.shape)
        np.testing.assert_allclose(xy[i], expected, rtol=0, atol=1e-9)  # colour-science sd_to_XYZ
    white = colour.SpectralDistribution(np.asarray(msds.values).sum(axis=1), msds.wavelengths)
    np.testing.assert_allclose(metasim.xyz_to_xy(display.white_tristimulus("cie1931_2")).values,
                               _colour_xy(white, msds.shape), rtol=0, atol=1e-9)  # colour-science sd_to_XYZ


@pytest.mark.parametrize("name", DISPLAYS)
def test_bt709_coverage_of_colour_primaries_equals_labelled(name):
    msds = colour.MSDS_DISPLAY_PRIMARIES[name]
    observer = metasim.standard_observer("cie1931_2", msds.wavelengths)
    labelled = gamut_coverage(_labelled(msds), "bt709", observer=observer)
    as_colour = gamut_coverage(msds, "bt709", observer=observer)
    both_colour = gamut_coverage(msds, colour.RGB_COLOURSPACES["ITU-R BT.709"],
                                 observer=colour.MSDS_CMFS[CIE1931])
    assert 0 < float(labelled) < 1
    assert float(as_colour) == float(labelled)  # same primaries, same numbers
    assert float(both_colour) == pytest.approx(float(labelled), abs=1e-12)
    assert both_colour.attrs["reference"] == "ITU-R BT.709"
    # the primaries' chromaticities as colour-science computes them give the same coverage
    xy = np.array([_colour_xy(colour.SpectralDistribution(msds.signals[k]), msds.shape) for k in msds.labels])
    assert float(gamut_coverage(xy, "bt709")) == pytest.approx(float(labelled), abs=1e-9)  # colour-science


def test_colour_space_as_reference_gamut():
    bt709 = colour.RGB_COLOURSPACES["ITU-R BT.709"]
    by_object = chromaticity_gamut(bt709)
    by_name = chromaticity_gamut("bt709")
    np.testing.assert_array_equal(by_object["chromaticity_of_primary"].values,
                                  by_name["chromaticity_of_primary"].values)
    np.testing.assert_allclose(by_object["chromaticity_of_primary"].values, bt709.primaries,
                               rtol=0, atol=1e-15)  # ITU-R BT.709-6 via colour-science
    p3 = colour.RGB_COLOURSPACES["Display P3"]
    assert float(gamut_coverage(p3, bt709)) == float(gamut_coverage("display_p3", "bt709"))


def test_plain_xyz_array_is_primaries():
    space = colour.RGB_COLOURSPACES["ITU-R BT.709"]
    xyz = np.asarray(space.matrix_RGB_to_XYZ).T  # rows: the R, G, B primaries' XYZ (SMPTE RP 177)
    gamut = chromaticity_gamut(xyz)
    np.testing.assert_allclose(gamut["chromaticity_of_primary"].values, space.primaries,
                               atol=1e-12)  # ITU-R BT.709-6 via colour-science
    (x1, y1), (x2, y2), (x3, y3) = space.primaries
    area = 0.5 * abs((x2 - x1) * (y3 - y1) - (x3 - x1) * (y2 - y1))
    assert float(gamut["area"]) == pytest.approx(area, rel=1e-12)  # shoelace, common practice, no source
    assert float(gamut_coverage(xyz, "bt709")) == pytest.approx(1.0, abs=1e-12)
    volume = lab_gamut_volume(xyz)
    same = lab_gamut_volume(metasim.gamut.reference_xyz("bt709"))
    assert float(volume) == pytest.approx(float(same), rel=1e-12)
    assert float(lab_coverage_volume(xyz, space)["coverage"]) == pytest.approx(1.0, abs=2e-3)


@pytest.mark.parametrize("shape", [(3, 4), (2, 3), (3,), (3, 3, 3)])
def test_ambiguous_plain_primaries_refused_with_labelling_example(shape):
    with pytest.raises(GamutError, match=r"xarray\.DataArray\(values, dims=\('primary', 'xyz'\)"):
        chromaticity_gamut(np.ones(shape))


def test_plain_arrays_refused_where_axes_unclear(crt):
    with pytest.raises(SpectrumError, match=r"dims=\('primary', 'wavelength'\)"):
        metasim.make_display(np.ones((3, 81)))
    display = metasim.make_display(crt)
    with pytest.raises(StimulusError, match="rgb_set"):
        mismatch(display, display, "cie1931_2", np.ones((4, 3)))
    with pytest.raises(StimulusError, match=r"dims=\('stimulus', 'wavelength'\)"):
        reflectance_set(np.ones((2, 81)))


def test_colour_observer_equals_standard_observer():
    grid = wavelength_grid(360, 830)
    cmfs = colour.MSDS_CMFS[CIE1931]
    observer = observer_from_colour(cmfs, grid)
    np.testing.assert_array_equal(observer["cmf"].values,
                                  metasim.standard_observer("cie1931_2", grid)["cmf"].values)  # colour-science table
    assert list(observer["cmf"].coords["xyz"].values) == ["X", "Y", "Z"]
    assert observer.attrs["observer"] == CIE1931
    with pytest.warns(SpectralEnergyWarning, match="drops"):  # 0.15 % of z-bar lies below 390 nm
        on_default = observer_from_colour(cmfs, metasim.default_grid())
    assert "resampled_from" in on_default.attrs


def test_colour_observer_wherever_observers_go(crt):
    display = metasim.make_display(crt)
    cmfs = colour.MSDS_CMFS[CIE1931]
    np.testing.assert_array_equal(display.primary_tristimulus(cmfs).values,
                                  display.primary_tristimulus("cie1931_2").values)
    a = metasim.calibrate_white(display, cmfs, white="D65", luminance=80)
    b = metasim.calibrate_white(display, "cie1931_2", white="D65", luminance=80)
    np.testing.assert_array_equal(a.spectra.values, b.spectra.values)
    assert a.attrs["calibration_observer"] == CIE1931
    tri = metasim.tristimulus(crt, cmfs, scale="none")  # both colour-science: the spectra's grid rules
    np.testing.assert_allclose(tri.values * 683.0, display.primary_tristimulus("cie1931_2").values, rtol=1e-15)
    lms = colour.MSDS_CMFS["Stockman & Sharpe 2 Degree Cone Fundamentals"]
    grid = wavelength_grid(390, 830)
    spectra = emitters.gaussian([610, 540, 450], [30, 30, 20], grid, name=["R", "G", "B"])
    np.testing.assert_array_equal(metasim.cone_excitations(spectra, lms).values,
                                  metasim.cone_excitations(spectra, metasim.standard_observer("cie2015_2", grid)).values)
    with pytest.raises(MetasimError, match="XYZ colour-matching functions"):
        mismatch(display, display, lms, metasim.metamerism.primaries_and_secondaries())


def test_white_point_as_colour_illuminant(crt):
    display = metasim.make_display(crt)
    d65 = colour.SDS_ILLUMINANTS["D65"]
    with pytest.warns(SpectralEnergyWarning):  # colour's D65 runs from 300 nm; the display grid from 380 nm
        matched = metasim.calibrate_white(display, "cie1931_2", white=d65, luminance=100)
    expected = _colour_xy(d65.copy().align(crt.shape), crt.shape)
    np.testing.assert_allclose(metasim.xyz_to_xy(matched.white_tristimulus("cie1931_2")).values, expected,
                               atol=1e-9)  # colour-science sd_to_XYZ


def _object_xyz(reflectances, illuminant, shape):
    """colour-science: XYZ of each reflectance under the illuminant (Y of the illuminant = 100)."""
    cmfs, light = _cmfs_on(shape), illuminant.copy().align(shape)
    return np.array([colour.sd_to_XYZ(colour.SpectralDistribution(reflectances.signals[k]), cmfs, light,
                                      method="Integration") for k in reflectances.labels])


def test_colour_illuminant_and_reflectances_as_stimuli(crt):
    display = metasim.make_display(crt)
    checker = colour.SDS_COLOURCHECKERS["ColorChecker N Ohta"]
    reflectances = sds_and_msds_to_msds(list(checker.values())[:6])
    d65 = colour.SDS_ILLUMINANTS["D65"]
    with pytest.warns(SpectralEnergyWarning):  # D65 below 380 nm is dropped, and said so
        result = mismatch(d65, display, [colour.MSDS_CMFS[CIE1931], "cie1964_10"], reflectances)
    assert list(result.stimulus.values) == list(reflectances.labels)
    assert list(result.observer.values) == [CIE1931, "cie1964_10"]
    assert result.attrs["reference"] == "surfaces under D65"
    target = result["target_xyz"].transpose("stimulus", "xyz").values
    white_y = float(display.white_tristimulus("cie1931_2").sel(xyz="Y"))
    np.testing.assert_allclose(target * 100 / white_y, _object_xyz(reflectances, d65, crt.shape),
                               rtol=1e-9)  # colour-science sd_to_XYZ
    # the colour-science observer sees what the calibration observer (the same functions) sees
    np.testing.assert_allclose(result["xyz_reference"].sel(observer=CIE1931).transpose("stimulus", "xyz").values,
                               target, rtol=1e-12)
    # the same set and illuminant as a stimulus set, reference "objects": the same targets
    with pytest.warns(SpectralEnergyWarning):
        stimuli = reflectance_set(reflectances, crt.wavelengths, illuminant=d65)
    assert stimuli.attrs["illuminant"] == "D65" and "illuminant" in stimuli
    again = mismatch("surfaces", display, ["cie1931_2", "cie1964_10"], stimuli)
    np.testing.assert_allclose(again["target_xyz"].values, result["target_xyz"].values, rtol=1e-12)
    np.testing.assert_allclose(again["delta_e_2000"].values, result["delta_e_2000"].values, rtol=1e-9, atol=1e-12)


def test_colour_checker_dataset_as_reflectance_set():
    checker = colour.SDS_COLOURCHECKERS["ColorChecker N Ohta"]
    grid = wavelength_grid(380, 780, 5)
    stimuli = reflectance_set(checker, grid)
    assert stimuli.sizes["stimulus"] == 24 and list(stimuli.stimulus.values)[:2] == ["dark skin", "light skin"]
    first = checker["dark skin"]
    np.testing.assert_array_equal(stimuli["reflectance"].isel(stimulus=0).values, first.values)  # colour-science
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", SpectralEnergyWarning)
        samples = cie_13_3_samples(illuminant=colour.SDS_ILLUMINANTS["FL2"])
    assert samples.attrs["illuminant"] == "FL2"
    assert samples["illuminant"].sizes["wavelength"] == samples["reflectance"].sizes["wavelength"]


def test_colour_primaries_in_emitters():
    grid = wavelength_grid(380, 780, 5)
    filters = emitters.band_pass_filter([610, 540, 460], [60, 60, 50], grid, name=["R", "G", "B"])
    backlight = colour.SDS_ILLUMINANTS["FL2"]
    subpixels = emitters.filtered_primaries(backlight, filters)
    expected = filters.values * np.asarray(backlight.values)[None, :]
    np.testing.assert_array_equal(subpixels.values, expected)
    crt = colour.MSDS_DISPLAY_PRIMARIES["Typical CRT Brainard 1997"]
    stacked = emitters.stack_primaries(crt, emitters.laser_line([589.0], 1.0, grid, name=["Y"]))
    assert list(stacked.primary.values) == ["red", "green", "blue", "Y"]


def test_resampling_follows_the_policy(crt):
    grid = wavelength_grid(400, 700, 1)
    with pytest.warns(SpectralEnergyWarning, match="red|green|blue"):
        array = from_colour(crt, grid)
    assert array.attrs["resampled_from"] == "380-780 nm (81 points, 5 nm)"
    np.testing.assert_allclose(array.sel(wavelength=[400.0, 405.0]).values,
                               np.asarray(crt.values).T[:, [4, 5]], rtol=0, atol=0)  # table values at its nodes
    inside = array.sel(wavelength=402.0).values
    np.testing.assert_allclose(inside, 0.6 * crt.values[4] + 0.4 * crt.values[5], rtol=1e-12)  # linear, no source


# -- back to colour-science -------------------------------------------------------------------------

def test_round_trip_display_spectra_identical():
    spectra = emitters.gaussian([612, 548, 455], [38, 42, 28], name=["R", "G", "B"])
    for array in (spectra, emitters.laser_line([638, 532, 465, 589], 1.0, name=["R", "G", "B", "Y"])):
        out = metasim.to_colour(array)
        xr.testing.assert_identical(metasim.from_colour(out), array)
    display = metasim.make_display(spectra, name="monitor")
    primaries = metasim.to_colour(display)
    assert type(primaries).__name__ == "RGB_DisplayPrimaries" and primaries.name == "monitor"
    np.testing.assert_array_equal(primaries.values, spectra.values.T)
    again = metasim.make_display(primaries)
    xr.testing.assert_identical(again.spectra, display.spectra)
    assert again.primaries == ["R", "G", "B"] and again.name == "monitor"
    four = metasim.to_colour(metasim.make_display(emitters.laser_line([638, 532, 465, 589], 1.0)))
    assert type(four).__name__ == "MultiSpectralDistributions" and len(four.labels) == 4


def test_colour_objects_from_metasim_work_in_colour_science():
    grid = wavelength_grid(360, 830)
    observer = metasim.standard_observer("cie1931_2", grid)
    cmfs = metasim.to_colour(observer)
    assert type(cmfs).__name__ == "XYZ_ColourMatchingFunctions" and cmfs.name == "cie1931_2"
    assert list(cmfs.labels) == ["x_bar", "y_bar", "z_bar"]
    np.testing.assert_array_equal(cmfs.values, colour.MSDS_CMFS[CIE1931].values)  # colour-science table
    xr.testing.assert_identical(metasim.from_colour(cmfs), observer)
    # a display's primaries through colour-science's own integration: metasim's chromaticities
    display = metasim.make_display(emitters.gaussian([612, 548, 455], [38, 42, 28], grid, name=["R", "G", "B"]))
    primaries = metasim.to_colour(display)
    xy = metasim.xyz_to_xy(display.primary_tristimulus("cie1931_2")).transpose("primary", "chromaticity").values
    for i, label in enumerate(primaries.labels):
        sd = colour.SpectralDistribution(primaries.signals[label])
        np.testing.assert_allclose(colour.XYZ_to_xy(colour.sd_to_XYZ(sd, cmfs, method="Integration")), xy[i],
                                   atol=1e-12)  # colour-science sd_to_XYZ


def test_round_trip_observer_and_population_member():
    population = metasim.observer_population(3, seed=4, age_years=(30, 60))
    member = population.isel(observer=1, drop=True)[["cmf"]]
    member.attrs = dict(population.attrs)
    xr.testing.assert_identical(metasim.from_colour(metasim.to_colour(member)), member)
    with pytest.raises(MetasimError, match=r"isel\(observer=i\)"):
        metasim.to_colour(population)
    lms = metasim.standard_observer("cie2015_2")["lms"]
    fundamentals = metasim.to_colour(lms)
    assert type(fundamentals).__name__ == "LMS_ConeFundamentals"
    xr.testing.assert_identical(metasim.from_colour(fundamentals), lms)


def test_round_trip_reflectances_and_illuminant():
    stimuli = cie_13_3_samples()
    reflectances = metasim.to_colour(stimuli)
    assert list(reflectances.labels) == list(stimuli.stimulus.values)
    xr.testing.assert_identical(metasim.from_colour(reflectances), stimuli["reflectance"])
    again = reflectance_set(reflectances)
    xr.testing.assert_identical(again["reflectance"], stimuli["reflectance"])
    d65 = metasim.metamerism.stimuli.illuminant_spectrum("D65", metasim.default_grid())
    sd = metasim.to_colour(d65)
    assert type(sd).__name__ == "SpectralDistribution" and sd.name == "D65"
    xr.testing.assert_identical(metasim.from_colour(sd), d65)
    with pytest.raises(SpectrumError, match=r"isel\(design=0\)"):
        metasim.to_colour(xr.concat([stimuli["reflectance"]] * 2, dim="design"))


def test_study_takes_colour_objects():
    reference = metasim.calibrate_white(metasim.make_display(
        emitters.gaussian([612, 548, 455], [38, 42, 28], name=["R", "G", "B"]), name="monitor"), "cie1931_2",
        white="D65", luminance=100)
    design = metasim.make_display(emitters.gaussian([615, 535, 460], [30, 35, 25], name=["R", "G", "B"]),
                                  name="candidate")
    checker = colour.SDS_COLOURCHECKERS["ColorChecker N Ohta"]
    reflectances = sds_and_msds_to_msds([checker[k] for k in ("dark skin", "blue sky", "foliage")])
    audience = metasim.observer_population(6, seed=2, age_years=(20, 60))
    with pytest.warns(SpectralEnergyWarning):  # the checker starts at 380 nm, the designs' grid at 390 nm
        study = metasim.run_study(reference, [design], audience, reflectances, extra_peaks_nm=[500],
                                  rank_calibration=False, white_categories=0)
    with pytest.warns(SpectralEnergyWarning):
        stimuli = reflectance_set(reflectances)
    direct = mismatch(reference, design, audience, stimuli)
    assert list(study.stimulus.values) == ["dark skin", "blue sky", "foliage"]
    np.testing.assert_array_equal(study["delta_e_2000"].sel(design="candidate").values, direct["delta_e_2000"].values)


def test_plain_array_as_observer_refused_with_labelling_example(crt):
    display = metasim.make_display(crt)
    functions = metasim.standard_observer("cie1931_2", crt.wavelengths)["cmf"].values
    for call in (lambda: display.primary_tristimulus(functions),
                 lambda: metasim.tristimulus(display.spectra, functions),
                 lambda: chromaticity_gamut(display, observer=functions),
                 lambda: mismatch(display, display, functions, metasim.metamerism.primaries_and_secondaries())):
        with pytest.raises(MetasimError, match=r"dims=\('xyz', 'wavelength'\)"):
            call()
