"""Drive solving: exact in-gamut reproduction, strategies, clipping flags, designs, sources."""

import numpy as np
import pytest
import xarray as xr

from metasim import emitters
from metasim.colorimetry import delta_e_2000, tristimulus, xyz_to_lab
from metasim.display import calibrate_white, make_display, solve_drive, stack_designs
from metasim.display.sources import rgb_to_xyz, source_matrix
from metasim.errors import DisplayError
from metasim.observers import standard_observer

WL = np.arange(390.0, 831.0)
POPULATION_NAMES = ("cie1931_2", "cie1964_10", "cie2015_2", "cie2015_10")


@pytest.fixture(scope="module")
def cie1931():
    return standard_observer("cie1931_2", WL)


@pytest.fixture(scope="module")
def population():
    cmf = xr.concat([standard_observer(n, WL)["cmf"] for n in POPULATION_NAMES], dim="observer")
    return cmf.assign_coords(observer=list(range(len(POPULATION_NAMES)))).to_dataset(name="cmf")


@pytest.fixture(scope="module")
def four(cie1931):
    spectra = emitters.stack_primaries(emitters.laser_line(455, 1, WL), emitters.quantum_dot(505, 25, WL),
                                       emitters.laser_line(540, 1, WL), emitters.laser_line(630, 1, WL))
    return calibrate_white(make_display(spectra), cie1931, luminance=100.0)


@pytest.fixture(scope="module")
def reference(cie1931):
    broad = emitters.stack_primaries(emitters.gaussian(450, 60, WL), emitters.gaussian(545, 90, WL),
                                     emitters.gaussian(615, 70, WL))
    return calibrate_white(make_display(broad), cie1931, luminance=100.0)


def _targets(display, obs, rng, count=40):
    drives = xr.DataArray(rng.uniform(0.0, 1.0, (count, display.n_primaries)), dims=("stimulus", "primary"),
                          coords={"primary": display.primaries})
    return tristimulus(display.render(drives), obs)


@pytest.mark.parametrize("strategy", ["min_norm", "max_efficiency"])
def test_n4_in_gamut_reproduced_exactly(four, cie1931, rng, strategy):
    target = _targets(four, cie1931, rng)
    result = solve_drive(four, target, strategy=strategy)
    assert not result.out_of_gamut.any()
    np.testing.assert_allclose(result.reproduced.values, target.values, atol=1e-9 * 100)  # exact: linear algebra
    assert float(result.residual_delta_e.max()) < 1e-6
    assert float(result.drive.min()) >= 0.0 and float(result.drive.max()) <= 1.0
    for name in result.data_vars:
        assert "units" in result[name].attrs and "long_name" in result[name].attrs


def test_min_norm_and_efficiency_are_optimal(four, cie1931, rng):
    target = _targets(four, cie1931, rng, count=10)
    norm = solve_drive(four, target, strategy="min_norm")
    efficient = solve_drive(four, target, strategy="max_efficiency")
    power = (four.spectra.sum("wavelength")).values
    assert ((efficient.drive.values @ power) <= (norm.drive.values @ power) + 1e-9).all()
    assert ((norm.drive**2).sum("primary") <= (efficient.drive**2).sum("primary") + 1e-9).all()
    # from scipy: the same minimum-norm problem with SLSQP (common practice, no source)
    from scipy.optimize import minimize
    A = four.primary_tristimulus(cie1931).transpose("xyz", "primary").values
    for i in range(3):
        t = target.isel(stimulus=i).values
        ref = minimize(lambda d: d @ d, np.full(4, 0.5), bounds=[(0, 1)] * 4, method="SLSQP",
                       constraints=[{"type": "eq", "fun": lambda d: A @ d - t}], options={"ftol": 1e-14})
        np.testing.assert_allclose(norm.drive.isel(stimulus=i).values, ref.x, atol=1e-5)


def test_population_strategy_lowers_mismatch(four, reference, cie1931, population):
    rng = np.random.default_rng(3)
    ref_drive = xr.DataArray(rng.uniform(0.15, 0.75, (30, 3)), dims=("stimulus", "primary"),
                             coords={"primary": reference.primaries})
    target = tristimulus(reference.render(ref_drive), cie1931)
    plain = solve_drive(four, target, strategy="min_norm")
    aware = solve_drive(four, target, strategy="least_mismatch", population=population, reference=reference)
    assert not plain.out_of_gamut.any() and not aware.out_of_gamut.any()
    np.testing.assert_allclose(aware.reproduced.values, target.values, atol=1e-7)  # calibration observer still exact
    white = tristimulus(reference.white_spectrum(), population)
    ref_lab = xyz_to_lab(tristimulus(reference.render(ref_drive), population), white)

    def mean_delta_e(result):
        lab = xyz_to_lab(tristimulus(four.render(result.drive), population), white)
        return float(delta_e_2000(lab, ref_lab).mean())

    assert mean_delta_e(aware) < mean_delta_e(plain)  # CIE 2000 (Sharma, Wu & Dalal 2005) via metasim kernel


def test_population_with_reference_spectra(four, reference, cie1931, population):
    rng = np.random.default_rng(5)
    drive = xr.DataArray(rng.uniform(0.2, 0.6, (5, 3)), dims=("stimulus", "primary"), coords={"primary": reference.primaries})
    spectra = reference.render(drive)
    result = solve_drive(four, strategy="least_mismatch", population=population, reference=spectra,
                         reference_white=reference.white_spectrum())
    np.testing.assert_allclose(result.reproduced.values, tristimulus(spectra, cie1931).values, atol=1e-7)


def test_out_of_gamut_is_clipped_and_flagged(four):
    bright = (3 * four.white_tristimulus("cie1931_2")).values.tolist()  # three times the white
    target = xr.DataArray([[20.0, 60.0, 2.0], [40.0, 42.0, 44.0], bright], dims=("stimulus", "xyz"),
                          coords={"xyz": ["X", "Y", "Z"]}, attrs={"units": "cd m-2"})
    result = solve_drive(four, target)
    assert result.out_of_gamut.values.tolist() == [True, False, True]
    assert float(result.residual_delta_e[0]) > 1.0 and float(result.residual_delta_e[1]) < 1e-6
    assert float(result.drive.min()) >= 0 and float(result.drive.max()) <= 1
    np.testing.assert_allclose(result.drive.isel(stimulus=2).values, 1.0)  # too bright: clipped to white
    np.testing.assert_allclose(result.residual_xyz.values, result.reproduced.values - target.values)


def test_designs_are_vectorised(cie1931, rng):
    designs = [calibrate_white(make_display(emitters.laser_line([450 + 5 * i, 525, 560, 635], 1, WL)), cie1931,
                               luminance=100.0) for i in range(3)]
    stacked = stack_designs(designs, design=[0, 1, 2])
    target = _targets(designs[0], cie1931, rng, count=12) * 0.5
    together = solve_drive(stacked, target)
    assert together.drive.dims == ("design", "stimulus", "primary")
    for i, one in enumerate(designs):
        alone = solve_drive(one, target)
        np.testing.assert_allclose(together.drive.sel(design=i).values, alone.drive.values, atol=1e-9)
        np.testing.assert_array_equal(together.out_of_gamut.sel(design=i).values, alone.out_of_gamut.values)


def test_source_rgb(four, cie1931):
    colour = pytest.importorskip("colour")
    for name, colour_name in (("bt709", "ITU-R BT.709"), ("display_p3", "Display P3"), ("bt2020", "ITU-R BT.2020")):
        np.testing.assert_allclose(source_matrix(name).values,
                                   colour.RGB_COLOURSPACES[colour_name].matrix_RGB_to_XYZ, atol=1e-4)  # colour-science NPM (SMPTE RP 177)
    rgb = xr.DataArray([[1.0, 1.0, 1.0], [0.5, 0.5, 0.5], [0.8, 0.2, 0.3]], dims=("stimulus", "primary"))
    result = solve_drive(four, rgb=rgb, source="srgb")
    np.testing.assert_allclose(result.drive.isel(stimulus=0).values, 1.0, atol=1e-9)  # sRGB white = display white
    assert not result.out_of_gamut[:2].any()
    pq = rgb_to_xyz(xr.DataArray([[0.5081, 0.5081, 0.5081]], dims=("stimulus", "primary")), "bt2020", encoding="pq")
    assert float(pq.sel(xyz="Y").item()) == pytest.approx(100.0, rel=1e-3)  # SMPTE ST 2084: code 0.5081 ≈ 100 cd/m2
    wide = solve_drive(four, rgb=xr.DataArray([[0.0, 1.0, 0.0]], dims=("stimulus", "primary")), source="bt2020")
    assert wide.out_of_gamut.values.tolist() == [True]
    np.testing.assert_allclose(four.decode(result.signal).values, result.drive.values, atol=1e-9)


def test_bad_requests(four):
    target = xr.DataArray([[20.0, 20.0, 20.0]], dims=("stimulus", "xyz"), coords={"xyz": ["X", "Y", "Z"]})
    with pytest.raises(DisplayError, match="strategy='fastest' is not known; allowed: min_norm"):
        solve_drive(four, target, strategy="fastest")
    with pytest.raises(DisplayError, match="needs reference"):
        solve_drive(four, target, strategy="least_mismatch", population="cie1964_10")
    with pytest.raises(DisplayError, match="source colour space 'adobe' is not known"):
        solve_drive(four, rgb=xr.DataArray([[1.0, 1.0, 1.0]], dims=("stimulus", "primary")), source="adobe")
    with pytest.raises(DisplayError, match="not calibrated"):
        solve_drive(make_display(four.spectra), target)


@pytest.mark.parametrize("transfer", ["srgb", "bt1886", "gamma", "pq", "hlg"])
def test_display_signal_round_trip(transfer):
    display = make_display(emitters.laser_line([460, 530, 635, 600], 1), transfer=transfer, peak_luminance=600.0)
    drive = xr.DataArray(np.random.default_rng(1).uniform(0.01, 1.0, (20, 4)), dims=("stimulus", "primary"),
                         coords={"primary": display.primaries})
    np.testing.assert_allclose(display.decode(display.encode(drive)).values, drive.values, atol=1e-9)
