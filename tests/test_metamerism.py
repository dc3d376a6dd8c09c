"""The mismatch engine checked against a straightforward colour-science computation and the trade."""

import colour
import numpy as np
import pytest
import xarray as xr

import metasim
from metasim import emitters
from metasim.display import calibrate_white, make_display
from metasim.errors import GridMismatchError, MetasimError, StimulusError
from metasim.metamerism import (
    cie_13_3_samples,
    combine,
    mismatch,
    neutral_ramp,
    observer_metamerism_index,
    primaries_and_secondaries,
    rank_calibration_observers,
    read_stimuli_csv,
    rgb_cube_grid,
    white_point_offsets,
    xyz_set,
)


@pytest.fixture(scope="module")
def reference():
    spectra = emitters.gaussian([612, 548, 455], [38, 42, 28], name=["R", "G", "B"])
    return calibrate_white(make_display(spectra, name="broadband reference"), "cie1931_2", white="D65", luminance=100.0)


@pytest.fixture(scope="module")
def laser():
    return make_display(emitters.laser_line([638, 532, 465, 589], 2.0, name=["R", "G", "B", "Y"]), name="laser")


@pytest.fixture(scope="module")
def population():
    return metasim.observer_population(300, seed=5, age_years=(20, 70))


@pytest.fixture(scope="module")
def stimuli():
    return combine(primaries_and_secondaries(level=0.8), neutral_ramp(4))


def test_identical_reference_and_test_give_exactly_zero(reference, population, stimuli):
    result = mismatch(reference, reference, population, stimuli, match_white=False)
    inside = ~result["out_of_gamut_reference"].values
    assert inside.sum() >= 6
    # in gamut both sides solve the same problem: exactly 0 (identity of CIE 2000, CIE 142-2001)
    assert np.all(result["delta_e_2000"].values[:, inside] == 0.0)
    assert np.all(result["metamerism_index"].values[:, inside] == 0.0)
    assert np.all(result["delta_e_white"].values == 0.0)
    # clipped colours are re-aimed at what the reference shows: equal to rounding
    assert float(result["delta_e_2000"].max()) < 1e-9
    matched = mismatch(reference, reference, population, stimuli)  # white re-matched: equal to rounding
    assert float(matched["delta_e_2000"].max()) < 1e-9


def test_calibration_observer_sees_no_difference(reference, laser, stimuli):
    result = mismatch(reference, laser, ["cie1931_2", "cie1964_10", "cie2015_2"], stimuli,
                      calibration_observer="cie1931_2")
    inside = ~(result["out_of_gamut_test"] | result["out_of_gamut_reference"]).values
    assert inside.sum() >= 5
    own = result["delta_e_2000"].sel(observer="cie1931_2").values[inside]
    assert own.max() < 1e-6  # a match made for an observer holds for that observer (definition of the match)
    others = result["delta_e_2000"].sel(observer="cie2015_2").values[inside]
    assert others.max() > 0.1  # and fails for another (observer metamerism, CIE 15:2004 §9)


def test_narrow_lines_spread_mismatch_more_than_broad_peaks(reference, population, stimuli):
    peaks = [630, 532, 465]
    narrow = make_display(emitters.laser_line(peaks, 2.0, name=["R", "G", "B"]), name="2 nm lines")
    broad = make_display(emitters.gaussian(peaks, [30, 30, 30], name=["R", "G", "B"]), name="30 nm peaks")
    p95_narrow = float(mismatch(reference, narrow, population, stimuli)["delta_e_2000"].quantile(0.95))
    p95_broad = float(mismatch(reference, broad, population, stimuli)["delta_e_2000"].quantile(0.95))
    # fact of the trade (common practice, no source): narrow-band primaries expose observer differences
    assert p95_narrow > p95_broad


def _colour_science_case(result, reference, test, observers):
    """Per-observer colour-science computation of what mismatch() reports."""
    wl = observers.wavelength.values
    shape = colour.SpectralShape(wl[0], wl[-1], 1.0)
    drive_ref = result["drive_reference"].transpose("stimulus", "reference_primary").values
    drive_test = result["drive_test"].transpose("stimulus", "primary").values
    cie_1931 = colour.MSDS_CMFS["CIE 1931 2 Degree Standard Observer"]
    ref_cal = drive_ref @ np.column_stack([
        colour.sd_to_XYZ(colour.SpectralDistribution(p, wl), cie_1931, method="Integration", k=683.0, shape=shape)
        for p in reference.spectra.transpose("primary", "wavelength").values]).T
    out = {k: [] for k in ("xyz_ref", "xyz_test", "lab_ref", "lab_test", "de", "white", "index")}
    test_cal = drive_test @ np.column_stack([
        colour.sd_to_XYZ(colour.SpectralDistribution(p, wl), cie_1931, method="Integration", k=683.0, shape=shape)
        for p in test.spectra.transpose("primary", "wavelength").values]).T
    for o in range(observers.sizes["observer"]):
        cmfs = colour.MultiSpectralDistributions(observers["cmf"].isel(observer=o).transpose("wavelength", "xyz").values, wl)

        def xyz(values):
            return colour.sd_to_XYZ(colour.SpectralDistribution(values, wl), cmfs, method="Integration", k=683.0,
                                    shape=shape)

        m_ref = np.column_stack([xyz(p) for p in reference.spectra.transpose("primary", "wavelength").values])
        m_test = np.column_stack([xyz(p) for p in test.spectra.transpose("primary", "wavelength").values])
        white = xyz(reference.white_spectrum().values)
        x_ref = drive_ref @ m_ref.T + xyz(reference.black.values)
        x_test = drive_test @ m_test.T + xyz(test.black.values)
        white_xy = colour.XYZ_to_xy(white)
        lab_ref = colour.XYZ_to_Lab(x_ref / white[1], white_xy)
        lab_test = colour.XYZ_to_Lab(x_test / white[1], white_xy)
        test_white = xyz(test.white_spectrum().values)
        out["xyz_ref"].append(x_ref)
        out["xyz_test"].append(x_test)
        out["lab_ref"].append(lab_ref)
        out["lab_test"].append(lab_test)
        out["de"].append(colour.delta_E(lab_ref, lab_test, method="CIE 2000"))
        out["white"].append(colour.delta_E(colour.XYZ_to_Lab(white / white[1], white_xy),
                                           colour.XYZ_to_Lab(test_white / white[1], white_xy), method="CIE 2000"))
        # sample = test display, standard = reference; test condition = observer o, reference = CIE 1931
        out["index"].append(colour.difference.XYZ_to_metamerism_index(
            x_test / white[1], x_ref / white[1], test_cal / white[1], ref_cal / white[1],
            correction="Additive", method="CIE 2000", illuminant=white_xy))
    return {k: np.array(v) for k, v in out.items()}


def test_every_number_equals_a_per_observer_colour_science_computation(reference, laser, stimuli):
    observers = metasim.observer_population(4, seed=9, age_years=(25, 65))
    result = mismatch(reference, laser, observers, stimuli, include_itp=True)
    matched = calibrate_white(laser, "cie1931_2", white=metasim.xyz_to_xy(
        metasim.tristimulus(reference.white_spectrum(), metasim.standard_observer("cie1931_2"))),
        luminance=float(metasim.tristimulus(reference.white_spectrum(), metasim.standard_observer("cie1931_2")).sel(xyz="Y")))
    theirs = _colour_science_case(result, reference, matched, observers)
    ours = lambda name, *dims: result[name].transpose("observer", "stimulus", *dims).values  # noqa: E731
    np.testing.assert_allclose(ours("xyz_reference", "xyz"), theirs["xyz_ref"], rtol=1e-6)  # colour-science sd_to_XYZ
    np.testing.assert_allclose(ours("xyz_test", "xyz"), theirs["xyz_test"], rtol=1e-6)  # colour-science sd_to_XYZ
    np.testing.assert_allclose(ours("lab_reference", "lab"), theirs["lab_ref"], atol=1e-6)  # colour-science XYZ_to_Lab
    np.testing.assert_allclose(ours("lab_test", "lab"), theirs["lab_test"], atol=1e-6)  # colour-science XYZ_to_Lab
    np.testing.assert_allclose(ours("delta_e_2000"), theirs["de"], atol=1e-6)  # colour-science delta_E CIE 2000
    np.testing.assert_allclose(result["delta_e_white"].values, theirs["white"], atol=1e-6)  # colour-science delta_E
    np.testing.assert_allclose(ours("metamerism_index"), theirs["index"], atol=1e-6)  # colour-science XYZ_to_metamerism_index
    # summaries equal numpy's statistics of the same array (numpy mean / median / percentile, linear)
    de = ours("delta_e_2000")
    by_stimulus = result["delta_e_2000_by_stimulus"]
    np.testing.assert_allclose(by_stimulus.sel(statistic="mean").values, de.mean(axis=0), rtol=1e-12)
    np.testing.assert_allclose(by_stimulus.sel(statistic="median").values, np.median(de, axis=0), rtol=1e-12)
    np.testing.assert_allclose(by_stimulus.sel(statistic="p95").values, np.percentile(de, 95, axis=0), rtol=1e-12)
    np.testing.assert_allclose(by_stimulus.sel(statistic="max").values, de.max(axis=0), rtol=1e-12)
    np.testing.assert_allclose(result["share_of_observers_above_threshold"].sel(threshold=1.0).values, (de > 1.0).mean(axis=0))
    # ΔE_ITP against colour-science's BT.2100 ICtCp and BT.2124 difference
    space = colour.RGB_COLOURSPACES["ITU-R BT.2020"]
    ictcp = [colour.RGB_to_ICtCp(colour.XYZ_to_RGB(theirs[k], space, apply_cctf_encoding=False)) for k in ("xyz_ref", "xyz_test")]
    lms_positive = np.all([colour.XYZ_to_RGB(theirs[k], space, apply_cctf_encoding=False) @
                           np.array([[1688, 2146, 262], [683, 2951, 462], [99, 309, 3688]]).T > 0
                           for k in ("xyz_ref", "xyz_test")], axis=(0, -1))
    itp = colour.delta_E(ictcp[0], ictcp[1], method="ITP")
    np.testing.assert_allclose(ours("delta_e_itp")[lms_positive], itp[lms_positive], rtol=1e-6, atol=1e-6)  # ITU-R BT.2124 via colour-science


def test_index_of_clipped_stimuli_equals_colour_science(reference, laser):
    from metasim.metamerism import rgb_set

    observers = metasim.observer_population(3, seed=4, age_years=(30, 70))
    stimuli = rgb_set([[0.0, 0.9, 0.9], [0.1, 0.9, 0.1], [0.5, 0.5, 0.5]], ["cyan", "green", "grey"], source="bt2020")
    result = mismatch(laser, reference, observers, stimuli)  # the broadband monitor cannot show BT.2020 cyan
    clipped = result["out_of_gamut_test"].values
    assert clipped.any() and not clipped.all()
    white = metasim.tristimulus(laser.white_spectrum(), metasim.standard_observer("cie1931_2"))
    matched = calibrate_white(reference, "cie1931_2", white=metasim.xyz_to_xy(white),
                              luminance=float(white.sel(xyz="Y")))
    theirs = _colour_science_case(result, laser, matched, observers)
    index = result["metamerism_index"].transpose("observer", "stimulus").values
    de = result["delta_e_2000"].transpose("observer", "stimulus").values
    np.testing.assert_allclose(index, theirs["index"], atol=1e-6)  # colour-science XYZ_to_metamerism_index
    assert np.all(np.abs(index[:, clipped] - de[:, clipped]) > 1e-3)  # the residual correction is applied
    # inside the test gamut both sides match for the calibration observer: no correction, index = ΔE00
    np.testing.assert_array_equal(index[:, ~clipped], de[:, ~clipped])


def test_observer_metamerism_index_equals_colour_science(rng):
    spl_t, std_t, spl_r, std_r = (rng.uniform(0.05, 0.9, (50, 3)) for _ in range(4))
    white_xyz = np.array([0.9642, 1.0, 0.8251])
    da = lambda v: xr.DataArray(v, dims=("stimulus", "xyz"), coords={"xyz": ["X", "Y", "Z"]})  # noqa: E731
    white = xr.DataArray(white_xyz, dims="xyz", coords={"xyz": ["X", "Y", "Z"]})
    white_xy = colour.XYZ_to_xy(white_xyz)
    for correction in ("additive", "multiplicative"):
        ours = observer_metamerism_index(da(spl_t), da(std_t), da(spl_r), da(std_r), white, correction=correction)
        theirs = colour.difference.XYZ_to_metamerism_index(spl_t, std_t, spl_r, std_r, correction=correction,
                                                           method="CIE 2000", illuminant=white_xy)
        np.testing.assert_allclose(ours.values, theirs, atol=1e-9)  # ISO 18314-4 via colour-science XYZ_to_metamerism_index
    ours_lab = observer_metamerism_index(da(spl_t), da(std_t), da(spl_r), da(std_r), white, space="lab", white_r=white)
    lab = lambda v: colour.XYZ_to_Lab(v, white_xy)  # noqa: E731
    theirs_lab = colour.difference.Lab_to_metamerism_index(lab(spl_t), lab(std_t), lab(spl_r), lab(std_r),
                                                           correction="Additive", method="CIE 2000")
    np.testing.assert_allclose(ours_lab.values, theirs_lab, atol=1e-9)  # ISO 18314-4 via colour-science Lab_to_metamerism_index


def test_object_reference_cie_13_3_samples(laser, population):
    samples = cie_13_3_samples()
    assert samples.sizes["stimulus"] == 14  # CIE 13.3-1995 defines 14 test colour samples
    result = mismatch("surfaces", laser, population, samples)
    assert result.attrs["reference_kind"] == "surfaces"
    assert result["delta_e_2000"].sizes == {"observer": 300, "stimulus": 14}
    inside = ~result["out_of_gamut_test"].values
    assert float(result["delta_e_2000_calibration"].values[inside].max()) < 1e-6


def test_summaries_by_age_band_and_weights(reference, laser, stimuli, population):
    result = mismatch(reference, laser, population, stimuli)
    by_age = result["delta_e_2000_by_age"]
    # default: the decades covering the ages 20-70, the last band closed (common practice, no source)
    assert list(by_age.age_band.values) == ["20-29", "30-39", "40-49", "50-59", "60-70"]
    assert int(result["observers_per_age_band"].sum()) == 300
    ages = population["age_years"].values
    counts = [((ages >= lo) & (ages < lo + 10)).sum() for lo in (20, 30, 40, 50)] + [((ages >= 60) & (ages <= 70)).sum()]
    assert result["observers_per_age_band"].values.tolist() == counts  # counted with numpy
    given = mismatch(reference, laser, population, stimuli, age_bands=(20, 30, 40, 50, 60, 65, 70))
    assert list(given.age_band.values) == ["20-29", "30-39", "40-49", "50-59", "60-64", "65-70"]
    np.testing.assert_array_equal(given["delta_e_2000_by_age"].isel(age_band=slice(0, 4)).values,
                                  by_age.isel(age_band=slice(0, 4)).values)
    with pytest.raises(MetasimError, match="age band 70-80 .* outside the observers' ages"):  # would hold no one
        mismatch(reference, laser, population, stimuli, age_bands=(20, 40, 60, 70, 80))
    categories = metasim.observer_categories(population, 4, seed=2)
    weighted = mismatch(reference, laser, categories, stimuli)
    de = weighted["delta_e_2000"].values
    w = categories["weight"].values
    np.testing.assert_allclose(weighted["delta_e_2000_by_stimulus"].sel(statistic="mean").values, (w / w.sum()) @ de)


def test_out_of_gamut_stimuli_are_flagged(reference, laser, population):
    # a spectral-locus green (x 0.10, y 0.80) lies outside both displays' gamuts; white inside both
    stimuli = xyz_set([[12.5, 100.0, 12.5], [95.047, 100.0, 108.883]], ["locus green", "white"])
    result = mismatch(reference, laser, population.isel(observer=slice(0, 20)), stimuli)
    flags = result["out_of_gamut_both"].values
    assert flags.tolist() == [True, False]
    assert float(result["residual_delta_e_test"].sel(stimulus="locus green")) > 1.0


def test_bad_input_errors(reference, laser, population, stimuli, tmp_path):
    with pytest.raises(GridMismatchError, match="observers"):
        mismatch(reference, laser, metasim.observer_population(3, seed=1, wavelengths=metasim.wavelength_grid(400, 700)), stimuli)
    with pytest.raises(StimulusError, match="empty"):
        xyz_set(np.zeros((0, 3)), [])
    with pytest.raises(MetasimError, match="observer set is empty"):
        mismatch(reference, laser, [], stimuli)
    with pytest.raises(StimulusError, match="reflectance"):
        mismatch("surfaces", laser, population, stimuli)
    with pytest.raises(MetasimError, match="calibration observer 'cie1900'"):
        mismatch(reference, laser, population, stimuli, calibration_observer="cie1900")
    with pytest.raises(StimulusError, match="stimulus-set Dataset"):
        mismatch(reference, laser, population, xr.Dataset())
    path = tmp_path / "colours.csv"
    path.write_text("name,R,G,B\nred,1,0,0\nbad,1,x,0\n")
    with pytest.raises(MetasimError, match=r"colours.csv:3: cell 'x' is not a number"):
        read_stimuli_csv(path, "rgb")
    path.write_text("name,R,G,B\n")
    with pytest.raises(StimulusError, match="empty"):
        read_stimuli_csv(path, "rgb")


def test_stimulus_sets_shapes(tmp_path):
    assert neutral_ramp(5)["signal"].sizes["stimulus"] == 5
    assert rgb_cube_grid(3)["signal"].sizes["stimulus"] == 27
    assert list(primaries_and_secondaries()["stimulus"].values)[:4] == ["white", "red", "green", "blue"]
    path = tmp_path / "xyz.csv"
    path.write_text("name,X,Y,Z\nmid grey,18.0,19.0,20.5\n")
    assert read_stimuli_csv(path, "xyz")["xyz_relative"].values.tolist() == [[18.0, 19.0, 20.5]]


def test_rank_calibration_observers_and_white_offsets(reference, laser, population, stimuli):
    small = population.isel(observer=slice(0, 120))
    ranking = rank_calibration_observers(reference, laser, small, stimuli)
    assert set(ranking.calibration_observer.values) == {"cie1931_2", "cie1964_10", "cie2015_2", "cie2015_10", "population_mean"}
    best = ranking.attrs["best_calibration_observer"]
    assert ranking["mean_delta_e"].sel(calibration_observer=best) == ranking["mean_delta_e"].min()
    # the category equal to the calibration observer needs no offset (definition of the offset)
    cal = metasim.standard_observer("cie1931_2")
    offsets = white_point_offsets(reference, laser, cal, calibration_observer="cie1931_2")
    assert float(np.abs(offsets["offset_xy"]).max()) < 1e-9
    categories = metasim.observer_categories(population, 3, seed=4)
    offsets = white_point_offsets(reference, laser, categories)
    assert offsets["offset_xy"].sizes == {"observer": 3, "chromaticity": 2}
    assert "weight" in offsets.coords and float(offsets["offset_uv_length"].max()) > 1e-4


def test_result_round_trips_through_netcdf(reference, laser, population, stimuli, tmp_path):
    result = mismatch(reference, laser, population.isel(observer=slice(0, 10)), stimuli)
    back = metasim.load_dataset(metasim.save_dataset(result, tmp_path / "mismatch.nc"))
    xr.testing.assert_identical(result, back)


def test_designs_are_evaluated_in_one_call(reference, population, stimuli):
    from metasim.display import stack_designs

    designs = [make_display(emitters.laser_line([red, 532, 465], 1.0, name=["R", "G", "B"]), name=f"red {red}")
               for red in (620, 640)]
    together = mismatch(reference, stack_designs(designs), population.isel(observer=slice(0, 50)), stimuli)
    assert together["delta_e_2000"].dims == ("design", "observer", "stimulus")
    for i, design in enumerate(designs):
        alone = mismatch(reference, design, population.isel(observer=slice(0, 50)), stimuli)
        np.testing.assert_allclose(together["delta_e_2000"].isel(design=i).values, alone["delta_e_2000"].values,
                                   atol=1e-9)  # the same computation, batched (no outside reference needed)


@pytest.mark.parametrize("thresholds", [(), (float("nan"),), (-1.0,), ("two",)])
def test_thresholds_must_be_finite_numbers(thresholds, reference, laser, population, stimuli):
    with pytest.raises(MetasimError, match="thresholds=.* is not allowed"):
        mismatch(reference, laser, population.isel(observer=slice(0, 5)), stimuli, thresholds=thresholds)


@pytest.mark.parametrize("luminance, white, expected", [
    (1e12, "D65", r"luminance=1000000000000.0 cd/m2 .* at most 100000 cd/m2"),
    (1e300, "D65", r"luminance=1e\+300 cd/m2 .* at most 100000 cd/m2"),
    (100.0, (0.3127, float("nan")), r"\(x, y\) = \(0.3127, nan\) is not allowed"),
])
def test_calibration_refuses_absurd_luminance_and_nan_whites(luminance, white, expected, laser):
    from metasim.errors import DisplayError

    with pytest.raises(DisplayError, match=expected):  # not "white cannot be reached"
        metasim.calibrate_white(laser, "cie1931_2", white=white, luminance=luminance)


def test_a_study_makes_the_white_trim_categories_once_for_all_designs(reference, laser, monkeypatch):
    # common practice, no source: the categories are a seeded clustering of the same observers, so
    # every design's white trims use the same ones; made once, they equal what each design makes alone
    import metasim.study as study

    made = []
    cluster = study.observer_categories
    monkeypatch.setattr(study, "observer_categories", lambda *args, **kwargs: made.append(1) or cluster(*args, **kwargs))
    audience = metasim.observer_population(12, seed=4, age_years=(20, 70))
    design = make_display(emitters.gaussian([630, 530, 460], [20, 25, 20], name=["R", "G", "B"]), name="narrow")
    result = metasim.run_study(reference, [laser, design], audience, neutral_ramp(3), extra_peaks_nm=[500],
                               rank_calibration=False, white_categories=3, seed=5, intervals=False)
    assert len(made) == 1
    for i, one in enumerate((laser, design)):
        alone = study.decision_block(reference, one, audience, neutral_ramp(3), strategy="min_norm",
                                     calibration_observer="cie1931_2", rank=False, categories=3, seed=5)
        assert len(made) == 2 + i  # made again without the study's categories
        np.testing.assert_array_equal(result["white_offset_xy"].isel(design=i).values, alone["white_offset_xy"].values)
