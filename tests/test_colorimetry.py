"""Colorimetry checked against colour-science, ITU-R BT.2020 and Sharma, Wu & Dalal (2005)."""

import colour
import numpy as np
import pytest
import xarray as xr

import metasim
from metasim.colorimetry import delta_e_2000, tristimulus, xyz_to_lab, xyz_to_uv, xyz_to_xy
from metasim.errors import GridMismatchError, MetasimError
from metasim.spectra import make_spectra, wavelength_grid

GRID_360 = wavelength_grid(360, 830)


def _illuminant(name, grid):
    sd = colour.SDS_ILLUMINANTS[name].copy().align(colour.SpectralShape(float(grid[0]), float(grid[-1]), 1.0))
    return make_spectra(sd.values, grid, long_name=f"CIE illuminant {name}", units="1"), sd


@pytest.mark.parametrize("observer, colour_name", [
    ("cie1931_2", "CIE 1931 2 Degree Standard Observer"),
    ("cie1964_10", "CIE 1964 10 Degree Standard Observer"),
])
@pytest.mark.parametrize("illuminant", ["D65", "A"])
def test_illuminant_xyz_equals_colour_science(observer, colour_name, illuminant):
    spectrum, sd = _illuminant(illuminant, GRID_360)
    ours = tristimulus(spectrum, metasim.standard_observer(observer, GRID_360), scale="none")
    cmfs = colour.MSDS_CMFS[colour_name]
    # colour-science sd_to_XYZ, method "Integration" (rectangle rule, k = 1): the same integral
    theirs = colour.sd_to_XYZ(sd, cmfs, method="Integration", k=1)
    np.testing.assert_allclose(ours.values, theirs, rtol=1e-6)  # colour-science sd_to_XYZ


def test_relative_scale_gives_white_y_100_per_observer():
    spectrum, sd = _illuminant("D65", GRID_360)
    observers = xr.concat(
        [metasim.standard_observer(n, GRID_360)["cmf"] for n in ("cie1931_2", "cie1964_10")], dim="observer"
    )
    xyz = tristimulus(spectrum, observers, scale="relative", white=spectrum)
    np.testing.assert_allclose(xyz.sel(xyz="Y").values, 100.0, rtol=1e-12)  # CIE 15:2004 §7.1: white Y = 100
    np.testing.assert_allclose(xyz.isel(observer=0).values, [95.047, 100.0, 108.883], atol=0.01)  # CIE 15:2004 Table T.3, D65 2°


def test_absolute_scale_is_683_lm_per_w():
    grid = wavelength_grid(360, 830)
    values = np.zeros(grid.size)
    values[grid.values == 555.0] = 1.0  # 1 W sr-1 m-2 nm-1 over a 1 nm bin at 555 nm
    spectrum = make_spectra(values, grid)
    xyz = tristimulus(spectrum, metasim.standard_observer("cie1931_2", grid))
    assert xyz.sel(xyz="Y").item() == pytest.approx(683.0, rel=1e-4)  # CIE 15:2004: K_m = 683 lm/W, V(555 nm) = 1
    assert xyz.attrs["units"] == "cd m-2"


@pytest.mark.parametrize("peak_nm, expected", [
    (630.0, (0.708, 0.292)),  # ITU-R BT.2020 red primary
    (532.0, (0.170, 0.797)),  # ITU-R BT.2020 green primary
    (467.0, (0.131, 0.046)),  # ITU-R BT.2020 blue primary
])
def test_monochromatic_chromaticity_matches_bt2020(peak_nm, expected):
    grid = wavelength_grid(360, 830)
    values = (grid.values == peak_nm).astype(float)
    xy = xyz_to_xy(tristimulus(make_spectra(values, grid), metasim.standard_observer("cie1931_2", grid)))
    np.testing.assert_allclose(xy.values, expected, atol=1e-3)  # ITU-R BT.2020 Table 3


def test_xy_and_uv_equal_colour_science(rng):
    xyz_values = rng.uniform(0.01, 1.0, (50, 3))
    xyz = xr.DataArray(xyz_values, dims=("stimulus", "xyz"), coords={"xyz": ["X", "Y", "Z"]})
    np.testing.assert_allclose(xyz_to_xy(xyz).values, colour.XYZ_to_xy(xyz_values), rtol=1e-12)  # colour-science
    np.testing.assert_allclose(xyz_to_uv(xyz).values, colour.xy_to_Luv_uv(colour.XYZ_to_xy(xyz_values)), rtol=1e-12)  # colour-science


def test_lab_equals_colour_science(rng):
    xyz_values = rng.uniform(0.0, 1.2, (200, 3))
    xyz_values[:20] *= 0.002  # below the CIE 15 linear-segment threshold
    white = np.array([0.95047, 1.0, 1.08883])
    xyz = xr.DataArray(xyz_values, dims=("stimulus", "xyz"), coords={"xyz": ["X", "Y", "Z"]})
    lab = xyz_to_lab(xyz, xr.DataArray(white, dims="xyz", coords={"xyz": ["X", "Y", "Z"]}))
    theirs = colour.XYZ_to_Lab(xyz_values, colour.XYZ_to_xy(white))
    np.testing.assert_allclose(lab.values, theirs, atol=1e-9)  # colour-science XYZ_to_Lab (CIE 15:2004)


# Sharma, Wu & Dalal (2005), Color Res. Appl. 30(1), Table 1: the 34 CIEDE2000 test pairs.
SHARMA_2005 = np.array([
    [50.0000, 2.6772, -79.7751, 50.0000, 0.0000, -82.7485, 2.0425],
    [50.0000, 3.1571, -77.2803, 50.0000, 0.0000, -82.7485, 2.8615],
    [50.0000, 2.8361, -74.0200, 50.0000, 0.0000, -82.7485, 3.4412],
    [50.0000, -1.3802, -84.2814, 50.0000, 0.0000, -82.7485, 1.0000],
    [50.0000, -1.1848, -84.8006, 50.0000, 0.0000, -82.7485, 1.0000],
    [50.0000, -0.9009, -85.5211, 50.0000, 0.0000, -82.7485, 1.0000],
    [50.0000, 0.0000, 0.0000, 50.0000, -1.0000, 2.0000, 2.3669],
    [50.0000, -1.0000, 2.0000, 50.0000, 0.0000, 0.0000, 2.3669],
    [50.0000, 2.4900, -0.0010, 50.0000, -2.4900, 0.0009, 7.1792],
    [50.0000, 2.4900, -0.0010, 50.0000, -2.4900, 0.0010, 7.1792],
    [50.0000, 2.4900, -0.0010, 50.0000, -2.4900, 0.0011, 7.2195],
    [50.0000, 2.4900, -0.0010, 50.0000, -2.4900, 0.0012, 7.2195],
    [50.0000, -0.0010, 2.4900, 50.0000, 0.0009, -2.4900, 4.8045],
    [50.0000, -0.0010, 2.4900, 50.0000, 0.0010, -2.4900, 4.8045],
    [50.0000, -0.0010, 2.4900, 50.0000, 0.0011, -2.4900, 4.7461],
    [50.0000, 2.5000, 0.0000, 50.0000, 0.0000, -2.5000, 4.3065],
    [50.0000, 2.5000, 0.0000, 73.0000, 25.0000, -18.0000, 27.1492],
    [50.0000, 2.5000, 0.0000, 61.0000, -5.0000, 29.0000, 22.8977],
    [50.0000, 2.5000, 0.0000, 56.0000, -27.0000, -3.0000, 31.9030],
    [50.0000, 2.5000, 0.0000, 58.0000, 24.0000, 15.0000, 19.4535],
    [50.0000, 2.5000, 0.0000, 50.0000, 3.1736, 0.5854, 1.0000],
    [50.0000, 2.5000, 0.0000, 50.0000, 3.2972, 0.0000, 1.0000],
    [50.0000, 2.5000, 0.0000, 50.0000, 1.8634, 0.5757, 1.0000],
    [50.0000, 2.5000, 0.0000, 50.0000, 3.2592, 0.3350, 1.0000],
    [60.2574, -34.0099, 36.2677, 60.4626, -34.1751, 39.4387, 1.2644],
    [63.0109, -31.0961, -5.8663, 62.8187, -29.7946, -4.0864, 1.2630],
    [61.2901, 3.7196, -5.3901, 61.4292, 2.2480, -4.9620, 1.8731],
    [35.0831, -44.1164, 3.7933, 35.0232, -40.0716, 1.5901, 1.8645],
    [22.7233, 20.0904, -46.6940, 23.0331, 14.9730, -42.5619, 2.0373],
    [36.4612, 47.8580, 18.3852, 36.2715, 50.5065, 21.2231, 1.4146],
    [90.8027, -2.0831, 1.4410, 91.1528, -1.6435, 0.0447, 1.4441],
    [90.9257, -0.5406, -0.9208, 88.6381, -0.8985, -0.7239, 1.5381],
    [6.7747, -0.2908, -2.4247, 5.8714, -0.0985, -2.2286, 0.6377],
    [2.0776, 0.0795, -1.1350, 0.9033, -0.0636, -0.5514, 0.9082],
])
# Pair 14 has hues exactly 180° apart, where the formula's mean-hue rule is discontinuous and the
# result depends on the last bit of atan2 (4.8045 or 4.7461 on different platforms).
_AMBIGUOUS = 13


def test_sharma_2005_pairs():
    ours = delta_e_2000(SHARMA_2005[:, :3], SHARMA_2005[:, 3:6])
    keep = np.arange(len(SHARMA_2005)) != _AMBIGUOUS
    np.testing.assert_allclose(ours[keep], SHARMA_2005[keep, 6], atol=1e-4)  # Sharma, Wu & Dalal (2005) Table 1
    assert min(abs(ours[_AMBIGUOUS] - 4.8045), abs(ours[_AMBIGUOUS] - 4.7461)) < 1e-4  # Sharma et al. (2005), pair 14


def test_sharma_2005_pairs_symmetric():
    forward = delta_e_2000(SHARMA_2005[:, :3], SHARMA_2005[:, 3:6])
    backward = delta_e_2000(SHARMA_2005[:, 3:6], SHARMA_2005[:, :3])
    keep = np.arange(len(SHARMA_2005)) != _AMBIGUOUS
    np.testing.assert_allclose(forward[keep], backward[keep], atol=1e-12)  # ΔE00 is symmetric (Sharma et al. 2005)


def test_delta_e_2000_equals_colour_science_on_random_pairs(rng):
    n = 100_000
    lab_1 = np.column_stack([rng.uniform(0, 100, n), rng.uniform(-128, 128, n), rng.uniform(-128, 128, n)])
    lab_2 = np.column_stack([rng.uniform(0, 100, n), rng.uniform(-128, 128, n), rng.uniform(-128, 128, n)])
    # near neighbours and degenerate pairs exercise every branch of the formula
    lab_2[:20_000] = lab_1[:20_000] + rng.normal(0, 1.5, (20_000, 3))
    lab_2[20_000:21_000, 1:] = 0.0
    lab_2[21_000:22_000] = lab_1[21_000:22_000]
    lab_2[22_000:23_000, 1:] = 2.0 * lab_1[22_000:23_000, 1:]
    ours = delta_e_2000(lab_1, lab_2)
    theirs = colour.delta_E(lab_1, lab_2, method="CIE 2000")
    np.testing.assert_allclose(ours, theirs, rtol=0, atol=1e-9)  # colour-science delta_E "CIE 2000"


def test_delta_e_2000_textiles_equals_colour_science(rng):
    lab_1 = rng.uniform([0, -100, -100], [100, 100, 100], (1000, 3))
    lab_2 = lab_1 + rng.normal(0, 3, (1000, 3))
    ours = delta_e_2000(lab_1, lab_2, k_L=2)
    theirs = colour.delta_E(lab_1, lab_2, method="CIE 2000", textiles=True)
    np.testing.assert_allclose(ours, theirs, atol=1e-9)  # colour-science delta_E "CIE 2000", textiles


def test_delta_e_2000_broadcasts_dataarrays_by_name(rng):
    lab_obs = xr.DataArray(rng.uniform([0, -50, -50], [100, 50, 50], (4, 5, 3)),
                           dims=("observer", "stimulus", "lab"), coords={"lab": ["L*", "a*", "b*"]})
    lab_ref = xr.DataArray(rng.uniform([0, -50, -50], [100, 50, 50], (5, 3)),
                           dims=("stimulus", "lab"), coords={"lab": ["L*", "a*", "b*"]})
    out = delta_e_2000(lab_ref, lab_obs)
    assert set(out.dims) == {"observer", "stimulus"}
    expected = colour.delta_E(lab_ref.values[None], lab_obs.values, method="CIE 2000")
    np.testing.assert_allclose(out.transpose("observer", "stimulus").values, expected, atol=1e-9)  # colour-science


def test_delta_e_2000_rejects_bad_shapes():
    with pytest.raises(MetasimError, match="last axis"):
        delta_e_2000(np.zeros((4, 2)), np.zeros((4, 2)))
    with pytest.raises(MetasimError, match="do not broadcast"):
        delta_e_2000(np.zeros((4, 3)), np.zeros((5, 3)))


def test_tristimulus_refuses_mismatched_grids():
    spectrum = make_spectra(np.ones(471), wavelength_grid(360, 830))
    with pytest.raises(GridMismatchError, match="360-830 nm.*390-830 nm"):
        tristimulus(spectrum, metasim.standard_observer("cie1931_2"))


def test_tristimulus_many_spectra_many_observers_shapes():
    grid = wavelength_grid(390, 830)
    spectra = xr.DataArray(np.ones((2, 3, grid.size)), dims=("design", "primary", "wavelength"),
                           coords={"wavelength": grid.values})
    observers = xr.concat([metasim.standard_observer(n)["cmf"] for n in ("cie2015_2", "cie2015_10")], dim="observer")
    xyz = tristimulus(spectra, observers)
    assert xyz.dims == ("design", "primary", "observer", "xyz")
    single = tristimulus(spectra.isel(design=0, primary=1), observers.isel(observer=1))
    np.testing.assert_allclose(xyz.isel(design=0, primary=1, observer=1).values, single.values, rtol=1e-12)


def test_ictcp_and_delta_e_itp_equal_colour_science(rng):
    from metasim.colorimetry import delta_e_itp, xyz_to_ictcp

    xyz_values = rng.uniform(0.5, 600.0, (300, 3)) * np.array([0.95, 1.0, 1.09])
    xyz = xr.DataArray(xyz_values, dims=("stimulus", "xyz"), coords={"xyz": ["X", "Y", "Z"]})
    ours = xyz_to_ictcp(xyz)
    bt2020 = colour.RGB_COLOURSPACES["ITU-R BT.2020"]
    rgb = colour.XYZ_to_RGB(xyz_values, bt2020, apply_cctf_encoding=False)
    theirs = colour.RGB_to_ICtCp(rgb)  # colour-science, ITU-R BT.2100 PQ (RGB in cd/m2)
    keep = (rgb > 0).all(axis=1)
    np.testing.assert_allclose(ours.values[keep], theirs[keep], atol=1e-6)  # ITU-R BT.2100-2 via colour-science
    d_ours = delta_e_itp(ours.isel(stimulus=slice(0, 150)), ours.isel(stimulus=slice(150, 300)).assign_coords(
        stimulus=ours.stimulus[:150]))
    d_theirs = colour.delta_E(ours.values[:150], ours.values[150:], method="ITP")
    np.testing.assert_allclose(d_ours.values, d_theirs, rtol=1e-12)  # ITU-R BT.2124 via colour-science delta_E "ITP"


def test_fused_pair_differences_equal_separate_steps(rng):
    from metasim.colorimetry.cielab import _lab_values
    from metasim.colorimetry.fused import pair_differences

    xyz_ref = rng.uniform(0.0, 90.0, (40, 25, 3))
    xyz_test = xyz_ref + rng.normal(0, 2.0, xyz_ref.shape)
    xyz_test[:, :3] = xyz_ref[:, :3]  # equal pairs take the exact branch
    white = rng.uniform(90.0, 110.0, (40, 3))
    correction = rng.normal(0, 0.5, (1, 25, 3))
    lab_r, lab_t, de, index = pair_differences(xyz_ref, xyz_test, white, correction)
    np.testing.assert_allclose(lab_r, _lab_values(xyz_ref / white[:, None]), atol=1e-10)  # CIE 15:2004 CIELAB
    np.testing.assert_allclose(de, colour.delta_E(colour.XYZ_to_Lab(xyz_ref / white[:, None, 1:2], colour.XYZ_to_xy(white)[:, None]),
                                                  colour.XYZ_to_Lab(xyz_test / white[:, None, 1:2], colour.XYZ_to_xy(white)[:, None]),
                                                  method="CIE 2000"), atol=1e-9)  # colour-science XYZ_to_Lab + delta_E
    corrected = np.clip(xyz_test - correction, 0, None)
    np.testing.assert_allclose(index, colour.delta_E(lab_r, _lab_values(corrected / white[:, None]), method="CIE 2000"),
                               atol=1e-9)  # colour-science delta_E of the corrected sample


def test_large_lab_uses_kernel_and_equals_colour_science(rng):
    xyz_values = rng.uniform(0.0, 1.2, (20_000, 3))
    xyz_values[:500] *= 0.003  # linear segment below ε
    xyz = xr.DataArray(xyz_values, dims=("stimulus", "xyz"), coords={"xyz": ["X", "Y", "Z"]})
    white = xr.DataArray([0.95047, 1.0, 1.08883], dims="xyz", coords={"xyz": ["X", "Y", "Z"]})
    theirs = colour.XYZ_to_Lab(xyz_values, colour.XYZ_to_xy(white.values))
    np.testing.assert_allclose(xyz_to_lab(xyz, white).values, theirs, atol=1e-9)  # colour-science XYZ_to_Lab
