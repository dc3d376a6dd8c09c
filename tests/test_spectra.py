"""Wavelength grids, validation, resampling policy and CSV exchange."""

import warnings

import numpy as np
import pytest

from metasim.errors import FileFormatError, GridMismatchError, SpectrumError
from metasim.spectra import (
    SpectralEnergyWarning,
    check_wavelengths,
    default_grid,
    make_spectra,
    read_spectra_csv,
    require_same_grid,
    resample,
    wavelength_grid,
    write_spectra_csv,
)


def test_default_grid_is_cie_170_1_range():
    grid = default_grid()
    # CIE 170-1:2006 tabulates its physiological observer from 390 to 830 nm
    assert grid.values[0] == 390.0 and grid.values[-1] == 830.0 and grid.size == 441
    assert grid.attrs["units"] == "nm"


@pytest.mark.parametrize("values, message", [
    ([400, 410, 405], "405 nm follows 410 nm"),
    ([400, 410, 410, 420], "duplicate wavelength 410 nm"),
    ([400, np.nan, 420], "must be finite"),
    ([-5, 400], "must be > 0"),
    ([400], "at least 2"),
])
def test_bad_wavelengths_are_named(values, message):
    with pytest.raises(SpectrumError, match=message):
        check_wavelengths(np.asarray(values, dtype=float), where="probe")


def test_non_uniform_grid_refused_when_uniform_required():
    with pytest.raises(SpectrumError, match="must be uniform"):
        check_wavelengths([400, 401, 403], uniform=True)


def test_negative_emission_and_nan_refused():
    with pytest.raises(SpectrumError, match="negative value -0.5 at channel=c1, wavelength=401"):
        make_spectra([[1, 1, 1], [1, -0.5, 1]], [400, 401, 402], labels=["c0", "c1"])
    with pytest.raises(SpectrumError, match="must be finite"):
        make_spectra([1, np.nan, 1], [400, 401, 402])


def test_resample_linear_inside_zero_outside():
    spectrum = make_spectra([0.0, 2.0, 4.0], [500, 502, 504])
    out = resample(spectrum, wavelength_grid(498, 506))
    np.testing.assert_allclose(out.values, [0, 0, 0, 1, 2, 3, 4, 0, 0])


def test_resample_warns_when_energy_is_dropped():
    spectrum = make_spectra(np.ones(101), np.arange(350.0, 451.0))
    with pytest.warns(SpectralEnergyWarning, match="drops 40.00 % of its energy"):
        resample(spectrum, wavelength_grid(390, 830))
    # within the grid: no warning
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        resample(make_spectra(np.ones(11), np.arange(400.0, 411.0)), wavelength_grid(390, 830))


def test_resample_preserves_energy_of_smooth_spectrum():
    fine = np.arange(380.0, 781.0, 0.5)
    values = np.exp(-0.5 * ((fine - 550) / 30) ** 2)
    out = resample(make_spectra(values, fine), wavelength_grid(380, 780, 5))
    # trapezoid integrals agree to 1e-4 for a 30 nm Gaussian (numerical fact, common practice)
    assert np.trapezoid(out.values, out.wavelength.values) == pytest.approx(np.trapezoid(values, fine), rel=1e-4)


def test_grid_mismatch_names_both_grids():
    a = make_spectra(np.ones(3), [400, 401, 402])
    b = make_spectra(np.ones(3), [400, 402, 404])
    with pytest.raises(GridMismatchError, match="400-402 nm .*400-404 nm"):
        require_same_grid(a, b, names=("display", "observer"))


def test_csv_round_trip(tmp_path):
    spectra = make_spectra(np.abs(np.random.default_rng(3).normal(size=(3, 441))), default_grid(),
                           labels=["R", "G", "B"])
    path = write_spectra_csv(spectra, tmp_path / "primaries.csv", notes=["demo primaries"])
    back = read_spectra_csv(path)
    np.testing.assert_array_equal(back.values, spectra.values)
    np.testing.assert_array_equal(back.wavelength.values, spectra.wavelength.values)
    assert list(back.channel.values) == ["R", "G", "B"]
    assert "demo primaries" in back.attrs["source_notes"]


def test_csv_resamples_onto_grid(tmp_path):
    path = tmp_path / "coarse.csv"
    path.write_text("wavelength_nm,lamp\n390,1\n830,1\n")
    out = read_spectra_csv(path, wavelengths=default_grid())
    assert out.sizes["wavelength"] == 441 and np.allclose(out.values, 1.0)


@pytest.mark.parametrize("content, error, message", [
    ("", FileFormatError, "file is empty"),
    ("# only a comment\n", FileFormatError, "file is empty"),
    ("wavelength_nm,a\n", FileFormatError, "header but no data rows"),
    ("wavelength_nm,a\n400,1\n401,x\n", FileFormatError, r":3: cell 'x' in column 'a' is not a number"),
    ("wavelength_nm,a\n400,1\n401\n", FileFormatError, r":3: 1 cells but the header has 2 columns"),
    ("wavelength_nm,a\n401,1\n400,1\n", SpectrumError, r":3: wavelength 400 nm follows 401 nm"),
    ("wavelength_nm,a\n400,1\n400,1\n", SpectrumError, r":3: duplicate wavelength 400 nm"),
    ("wavelength_nm,a\n400,1\n401,nan\n", SpectrumError, r":3: value nan in column 'a'"),
    ("wavelength_nm,a\n400,1\n401,-2\n", SpectrumError, r":3: negative value -2 in column 'a'"),
    ("400,1\n401,2\n", FileFormatError, "a header line"),
])
def test_csv_errors_name_file_line_and_value(tmp_path, content, error, message):
    path = tmp_path / "bad.csv"
    path.write_text(content)
    with pytest.raises(error, match=message) as info:
        read_spectra_csv(path)
    assert "bad.csv" in str(info.value)


def test_csv_missing_file(tmp_path):
    with pytest.raises(FileFormatError, match="no such file"):
        read_spectra_csv(tmp_path / "absent.csv")
