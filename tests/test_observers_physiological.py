"""CIE 170-1 physiological observer: pinned to published tables and to the model's physics."""

from __future__ import annotations

import colour
import numpy as np
import pytest
import xarray as xr

import metasim
from metasim.errors import ObserverError
from metasim.observers import (
    DEVIATIONS,
    cie2006_observer,
    lens_components_dataset,
    low_density_absorbance,
    ocular_media_density,
    physiological_observers,
    read_lens_components,
)
from metasim.observers.physiological import optical_density_table, _peak
from metasim.spectra import wavelength_grid

SS = {2: "Stockman & Sharpe 2 Degree Cone Fundamentals", 10: "Stockman & Sharpe 10 Degree Cone Fundamentals"}
CIE2015 = {2: "CIE 2015 2 Degree Standard Observer", 10: "CIE 2015 10 Degree Standard Observer"}
WL = np.arange(390.0, 831.0)


def _colour_table(name):
    return np.nan_to_num(colour.MSDS_CMFS[name].values.T)


def _peak_nm(array: xr.DataArray) -> np.ndarray:
    return _peak(array.transpose(..., "wavelength").values, array["wavelength"].values)[1]


@pytest.mark.parametrize("field", [2, 10])
def test_age_32_lms_matches_stockman_sharpe(field):
    lms = cie2006_observer(32, field)["lms"].transpose("cone", "wavelength").values
    assert np.abs(lms - _colour_table(SS[field])).max() < 5e-4  # Stockman & Sharpe (2000) via colour-science


@pytest.mark.parametrize("field", [2, 10])
def test_age_32_xyz_matches_cie_2015(field):
    cmf = cie2006_observer(32, field)["cmf"].transpose("xyz", "wavelength").values
    assert np.abs(cmf - _colour_table(CIE2015[field])).max() < 1e-3  # CIE 170-2:2015 via colour-science


def test_zero_deviations_give_the_cie_170_1_formula_exactly():
    age, field = 47.0, 4.0
    observer = cie2006_observer(age, field, **{name: 0 for name in DEVIATIONS})
    xr.testing.assert_identical(observer, cie2006_observer(age, field))
    # the CIE 170-1:2006 formula written out (DESIGN.md constants; vdK&vN 2007 ageing)
    a = low_density_absorbance().values
    d_mac = 0.485 * np.exp(-field / 6.132) / 0.35 * optical_density_table("macular_density_2deg_1nm.csv")
    d_ocul = ocular_media_density(age).values
    d_peak = np.array([0.38 + 0.54 * np.exp(-field / 1.333)] * 2 + [0.30 + 0.45 * np.exp(-field / 1.333)])
    reference = WL * (1 - 10 ** (-d_peak[:, None] * a)) * 10 ** (-d_mac - d_ocul)
    reference /= reference.max(axis=1, keepdims=True)
    lms = observer["lms"].values
    np.testing.assert_allclose(lms / lms.max(axis=1, keepdims=True), reference, rtol=1e-12, atol=1e-15)  # CIE 170-1:2006


def test_an_unshifted_cone_is_untouched_by_another_cones_shift():
    base = cie2006_observer(60, 3)["lms"]
    shifted = cie2006_observer(60, 3, m_shift_nm=1.7)["lms"]
    np.testing.assert_array_equal(base.sel(cone=["L", "S"]), shifted.sel(cone=["L", "S"]))  # common practice, no source


def test_s_cone_zero_beyond_615_nm_like_the_standard():
    s = cie2006_observer(70, 6)["lms"].sel(cone="S")
    table = _colour_table(SS[2])[2]
    assert (s.sel(wavelength=slice(616, None)) == 0).all()  # CIE 170-1:2006 (S defined to 615 nm)
    assert (table[WL > 615] == 0).all() and (table[WL <= 615] > 0).all()  # Stockman & Sharpe (2000) via colour-science
    assert (s.sel(wavelength=slice(None, 615)) > 0).all()


def test_short_wave_sensitivity_falls_with_age():
    ages = [20, 32, 45, 60, 80]
    observers = physiological_observers(ages, 2)
    s_400 = observers["lms"].sel(cone="S", wavelength=400).values
    z_420 = observers["cmf"].sel(xyz="Z", wavelength=420).values
    assert np.all(np.diff(s_400) < 0)  # van de Kraats & van Norren (2007): lens density grows with age
    assert np.all(np.diff(z_420) < 0)
    density_400 = [float(ocular_media_density(a).sel(wavelength=400)) for a in ages]
    assert np.all(np.diff(density_400) > 0)


def test_ocular_media_at_32_is_the_table_and_ageing_follows_the_published_terms():
    np.testing.assert_array_equal(ocular_media_density(32).values, optical_density_table("lens_density_32y_1nm.csv"))
    lam, age = 400.0, 70.0  # CIE 203:2012 / van de Kraats & van Norren (2007) age terms, evaluated by hand
    terms = (3.1e-5 * (400 / lam) ** 4 - 6.3e-5 * 2.13 * np.exp(-(0.029 * (lam - 370)) ** 2)
             + 1.86e-4 * 11.95 * np.exp(-(0.021 * (lam - 325)) ** 2) + 1.32e-4 * 1.43 * np.exp(-(0.008 * (lam - 325)) ** 2))
    expected = 1.76490 + (age**2 - 32**2) * terms  # 1.76490: lens table at 400 nm (Stockman, Sharpe & Fach 1999)
    assert float(ocular_media_density(age).sel(wavelength=lam)) == pytest.approx(expected, rel=1e-12)  # CIE 203:2012 age terms


def test_macular_absorption_falls_with_field_size():
    fields = [1, 2, 4, 7, 10]
    m = physiological_observers(40, fields)["lms"].sel(cone="M")
    # macular pigment absorbs around 460 nm and not at 600 nm (Stockman, Sharpe & Fach 1999)
    ratio = (m.sel(wavelength=460) / m.sel(wavelength=600)).values
    assert np.all(np.diff(ratio) > 0)  # CIE 170-1:2006: D_mac,max = 0.485 exp(-f/6.132)
    more_macula = cie2006_observer(40, 4, macular_density_pct=30)["lms"].sel(cone="M")
    assert float(more_macula.sel(wavelength=460)) < float(m.sel(wavelength=460)[2])


@pytest.mark.parametrize("cone, shift", [("L", 2.0), ("L", -2.0), ("M", 2.0), ("M", -1.5)])
def test_peak_wavelength_shift_moves_the_peak(cone, shift):
    base = _peak_nm(cie2006_observer(32, 2)["lms"].sel(cone=cone))
    moved = _peak_nm(cie2006_observer(32, 2, **{f"{cone.lower()}_shift_nm": shift})["lms"].sel(cone=cone))
    assert moved - base == pytest.approx(shift, abs=0.5)  # issue 3 physics check: +2 nm shift -> 2 ± 0.5 nm


def test_s_cone_shift_moves_its_peak_the_same_way():
    # the S fundamental peaks where the rising lens transmittance meets the falling absorbance, so
    # its peak moves less than the absorbance does; only the direction is a physical requirement
    base = _peak_nm(cie2006_observer(32, 2)["lms"].sel(cone="S"))
    assert _peak_nm(cie2006_observer(32, 2, s_shift_nm=2)["lms"].sel(cone="S")) > base  # common practice, no source
    assert _peak_nm(cie2006_observer(32, 2, s_shift_nm=-2)["lms"].sel(cone="S")) < base


def test_absorbance_is_peak_normalised():
    absorbance = low_density_absorbance()
    assert np.allclose(absorbance.max("wavelength"), 1.0)  # CIE 170-1:2006 (peak-normalised absorbance)
    assert float(absorbance["peak_nm"].sel(cone="S")) == pytest.approx(420, abs=3)  # S pigment peak near 420 nm, from memory


def test_more_pigment_density_broadens_the_fundamental():
    def width(observer):
        l_cone = observer["lms"].sel(cone="L")
        return float((l_cone > 0.5).sum())

    assert width(cie2006_observer(32, 2, l_density_pct=30)) > width(cie2006_observer(32, 2))  # self-screening, CIE 170-1:2006


def test_vectorised_equals_one_at_a_time():
    params = dict(age_years=[25, 50, 75], field_size_deg=[1.5, 5, 9], lens_density_pct=[10, -20, 5],
                  macular_density_pct=[-50, 0, 40], l_shift_nm=[1, -2, 0.5], s_density_pct=[3, -3, 0])
    many = physiological_observers(**params)
    for i in range(3):
        one = cie2006_observer(**{k: v[i] for k, v in params.items()})
        np.testing.assert_allclose(many["lms"].values[i], one["lms"].values, rtol=0, atol=1e-15)
        np.testing.assert_allclose(many["cmf"].values[i], one["cmf"].values, rtol=0, atol=1e-15)


def test_xyz_matrix_is_interpolated_by_field_size():
    y = physiological_observers(32, [2, 6, 10])["cmf"].sel(xyz="Z")
    lms_s = physiological_observers(32, [2, 6, 10])["lms"].sel(cone="S")
    scale = (y / lms_s.where(lms_s > 0.1)).mean("wavelength").values
    # CIE 170-2:2015 z-bar = 1.93485343 S (2°), 2.14687945 S (10°); midway at 6° by metasim's choice
    np.testing.assert_allclose(scale, [1.93485343, (1.93485343 + 2.14687945) / 2, 2.14687945], rtol=1e-12)


def test_other_grids_are_samples_of_the_native_grid():
    native = cie2006_observer(55, 3)
    coarse = cie2006_observer(55, 3, wavelengths=wavelength_grid(390, 830, 5))
    np.testing.assert_allclose(coarse["lms"].values, native["lms"].sel(wavelength=coarse["wavelength"]).values, atol=1e-15)
    wide = cie2006_observer(55, 3, wavelengths=wavelength_grid(360, 830, 1))
    assert (wide["lms"].sel(wavelength=slice(None, 389)) == 0).all()


def test_labels_units_and_provenance():
    observer = metasim.cie2006_observer(40, 3, l_shift_nm=1.0)
    assert observer["lms"].dims == ("cone", "wavelength") and observer["cmf"].dims == ("xyz", "wavelength")
    for name in ["lms", "cmf", "wavelength"]:
        assert {"units", "long_name"} <= set(observer[name].attrs)
    assert observer.attrs["l_shift_nm"] == 1.0 and observer.attrs["metasim_version"] == metasim.__version__
    many = physiological_observers([30, 40], 2)
    for name in ["age_years", "field_size_deg", *DEVIATIONS]:
        assert many[name].dims == ("observer",) and {"units", "long_name"} <= set(many[name].attrs)


@pytest.mark.parametrize("kwargs, words", [
    (dict(age_years=15), ["age_years=15", "20-80"]),
    (dict(age_years=95), ["age_years=95", "20-80"]),
    (dict(field_size_deg=0.5), ["field_size_deg=0.5", "1-10"]),
    (dict(field_size_deg=20), ["field_size_deg=20", "1-10"]),
    (dict(macular_density_pct=-120), ["macular_density_pct=-120", "-100"]),
    (dict(age_years=-3, extrapolate=True), ["age_years=-3", "> 0"]),
])
def test_bad_parameters_raise_observer_error(kwargs, words):
    with pytest.raises(ObserverError) as info:
        cie2006_observer(**kwargs)
    assert all(w in str(info.value) for w in words) and "\n" not in str(info.value)


def test_extrapolate_allows_outside_the_range():
    young = cie2006_observer(15, 0.5, extrapolate=True)
    assert young.attrs["extrapolate"] == 1 and np.isfinite(young["lms"].values).all()


def test_vector_errors():
    with pytest.raises(ObserverError, match="incompatible lengths"):
        physiological_observers([30, 40, 50], [2, 3])
    with pytest.raises(ObserverError, match="unknown deviation"):
        physiological_observers(30, 2, lens_pct=3)
    with pytest.raises(ObserverError, match="one number"):
        cie2006_observer([30, 40], 2)


def test_two_component_lens_table_gives_the_cie_170_1_age_formula(tmp_path):
    lens = optical_density_table("lens_density_32y_1nm.csv")
    path = tmp_path / "lens.csv"
    rows = "\n".join(f"{w:g},{0.7 * d!r},{0.3 * d!r}" for w, d in zip(WL, lens))
    path.write_text("# test table: D1 = 0.7 D, D2 = 0.3 D\nwavelength_nm,d1,d2\n" + rows + "\n")
    components = read_lens_components(path)
    np.testing.assert_allclose(ocular_media_density(32, lens_components=components).values, lens, rtol=1e-12)
    # CIE 170-1:2006 age formula (from memory): D1 (1 + 0.02 (A - 32)) + D2 to 60 y, D1 (1.56 + 0.0667 (A - 60)) + D2 above
    np.testing.assert_allclose(ocular_media_density(50, lens_components=components).values,
                               0.7 * lens * (1 + 0.02 * 18) + 0.3 * lens, rtol=1e-12)
    np.testing.assert_allclose(ocular_media_density(70, lens_components=components).values,
                               0.7 * lens * (1.56 + 0.0667 * 10) + 0.3 * lens, rtol=1e-12)
    same = cie2006_observer(32, 2, lens_components=components)
    np.testing.assert_allclose(same["lms"].values, cie2006_observer(32, 2)["lms"].values, atol=1e-12)
    assert "CIE 170-1" in same.attrs["ageing"]
    bad = tmp_path / "bad.csv"
    bad.write_text("wavelength_nm,a,b,c\n400,1,1,1\n401,1,1,1\n")
    with pytest.raises(ObserverError, match="exactly 2"):
        read_lens_components(bad)
    with pytest.raises(ObserverError, match=">= 0"):
        lens_components_dataset([1, -1], [0, 0], [400, 401])


# -- the public helpers of the model's tables ------------------------------------------------------

def test_optical_density_tables_hold_the_cie_170_1_values_on_the_base_grid():
    from metasim.observers.physiological import BASE_WAVELENGTHS, LENS_TABLE, MACULAR_TABLE

    lens, macula = optical_density_table(LENS_TABLE), optical_density_table(MACULAR_TABLE)
    assert lens.shape == macula.shape == BASE_WAVELENGTHS.shape
    at = {nm: int(nm - BASE_WAVELENGTHS[0]) for nm in (400, 450, 460, 500, 550)}
    # CIE 170-1:2006 ocular media at age 32 (Stockman, Sharpe & Fach 1999, CVRL lensss_1)
    assert lens[at[400]] == pytest.approx(1.76490, abs=1e-12)  # CIE 170-1:2006
    assert lens[at[450]] == pytest.approx(0.26288, abs=1e-12)  # CIE 170-1:2006
    assert lens[at[500]] == pytest.approx(0.15370, abs=1e-12)  # CIE 170-1:2006
    # CIE 170-1:2006 macular pigment at 2°: 0.35 at 460 nm (the scale of D_max), highest near 458 nm,
    # none at 550 nm (CVRL macss_1)
    assert macula[at[460]] == pytest.approx(0.35, abs=1e-12)  # CIE 170-1:2006
    assert macula.max() == pytest.approx(0.35211, abs=1e-12) and abs(int(np.argmax(macula)) - at[460]) <= 2  # CIE 170-1:2006
    assert macula[at[550]] == 0.0  # CIE 170-1:2006


def test_absorbance_table_rebuilds_the_2_degree_fundamentals_it_was_inverted_from():
    from metasim.observers.physiological import (
        BASE_WAVELENGTHS, INVERSION_PEAK_DENSITY, LENS_TABLE, MACULAR_TABLE, S_CONE_LIMIT_NM, absorbance_table)

    absorbance, peak_nm = absorbance_table()
    assert absorbance.shape == (3, BASE_WAVELENGTHS.size)
    np.testing.assert_allclose(absorbance.max(axis=1), 1.0, rtol=0, atol=1e-15)  # peak-normalised (CIE 170-1:2006)
    assert np.all(absorbance[2, BASE_WAVELENGTHS > S_CONE_LIMIT_NM] == 0.0)
    assert np.all(np.abs(peak_nm - BASE_WAVELENGTHS[np.argmax(absorbance, axis=1)]) <= 0.5)  # the sub-nm peak
    # CIE 170-1 forward model at 2°, age 32 with the tables gives back the 2° fundamentals it was
    # inverted from (colour-science's Stockman & Sharpe 2° data)
    media = optical_density_table(LENS_TABLE) + optical_density_table(MACULAR_TABLE)
    lms = (1.0 - 10.0 ** (-INVERSION_PEAK_DENSITY[:, None] * absorbance)) * 10.0**-media * BASE_WAVELENGTHS
    lms /= lms.max(axis=1, keepdims=True)
    reference = _colour_table(SS[2])
    inside = BASE_WAVELENGTHS <= S_CONE_LIMIT_NM
    np.testing.assert_allclose(lms[:2], reference[:2], rtol=5e-5, atol=1e-9)  # colour-science (6 figures)
    np.testing.assert_allclose(lms[2, inside], reference[2, inside], rtol=5e-5, atol=1e-9)  # colour-science


def test_ocular_density_values_is_the_table_aged_by_the_published_formulas():
    from metasim.observers.physiological import LENS_TABLE, ocular_density_values

    ages = np.array([20.0, 32.0, 45.0, 60.0, 75.0])
    values = ocular_density_values(ages)
    assert values.shape == (ages.size, WL.size)
    np.testing.assert_array_equal(values[1], optical_density_table(LENS_TABLE))  # age 32 is the table (CIE 170-1:2006)
    for age, row in zip(ages, values):
        np.testing.assert_array_equal(row, ocular_media_density(age).values)  # the labelled form's numbers
    # CIE 170-1:2006 two-component formula: D1·(1 + 0.02(A − 32)) + D2 up to 60 years,
    # D1·(1.56 + 0.0667(A − 60)) + D2 above (from memory of CIE 170-1:2006)
    d1, d2 = np.linspace(0.5, 0.1, WL.size), np.full(WL.size, 0.05)
    components = lens_components_dataset(d1, d2, WL)
    aged = ocular_density_values(ages, components)
    factors = np.array([1 + 0.02 * (20 - 32), 1.0, 1 + 0.02 * (45 - 32), 1.56, 1.56 + 0.0667 * 15])
    np.testing.assert_allclose(aged, factors[:, None] * d1 + d2, rtol=1e-14)  # CIE 170-1:2006, from memory
