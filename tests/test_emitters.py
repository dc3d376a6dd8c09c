"""Emitters: shapes pinned to colour-science and to conservation laws."""

import numpy as np
import pytest
import xarray as xr

from metasim import emitters
from metasim.errors import EnergyOutsideGridError, SpectrumError
from metasim.spectra import RADIANCE_UNITS, SpectralEnergyWarning, wavelength_grid, write_spectra_csv


def test_ohno_led_equals_colour_science():
    colour = pytest.importorskip("colour")
    wl = np.arange(360.0, 781.0)
    for peak, width in [(455, 12), (530, 25), (630, 9.5)]:
        ours = emitters.ohno_led(peak, width, wl, normalise="peak").values[0]
        ref = colour.sd_single_led(peak, shape=colour.SpectralShape(360, 780, 1), method="Ohno 2005",
                                   half_spectral_width=width).values
        np.testing.assert_allclose(ours, ref, atol=1e-6)  # colour-science sd_single_led_Ohno2005


@pytest.mark.parametrize("linewidth", [0.05, 0.1, 0.3, 1.0, 2.0, 5.0])
@pytest.mark.parametrize("centre", [532.0, 532.37, 639.81])
def test_laser_line_keeps_energy_and_centroid(linewidth, centre):
    line = emitters.laser_line(centre, linewidth, normalise="none", relative_power=2.5)
    wl = line.wavelength.values
    values = line.values[0]
    energy = values.sum() * 1.0
    assert energy == pytest.approx(2.5, rel=1e-9)  # geometry: hat functions sum to one (common practice)
    assert (wl * values).sum() / values.sum() == pytest.approx(centre, abs=1e-6)  # hat functions reproduce λ


def test_laser_line_lorentzian_and_vectorised():
    lines = emitters.laser_line([450, 520, 638], 0.5, profile="lorentzian")
    assert lines.dims == ("primary", "wavelength")
    assert lines.attrs["units"] == RADIANCE_UNITS and "long_name" in lines.attrs
    np.testing.assert_allclose(lines.sum("wavelength").values, 1.0)
    assert list(lines.primary.values) == ["laser 450 nm", "laser 520 nm", "laser 638 nm"]


def test_gaussian_matches_colour_science_shape():
    colour = pytest.importorskip("colour")
    ours = emitters.gaussian(555, 25, np.arange(360.0, 781.0), normalise="peak").values[0]
    ref = colour.sd_gaussian(555, 25, shape=colour.SpectralShape(360, 780, 1), method="FWHM").values
    np.testing.assert_allclose(ours, ref, atol=1e-12)  # colour-science sd_gaussian_fwhm


def test_quantum_dot_peaks_at_peak_and_has_fwhm():
    qd = emitters.quantum_dot(630.0, 30.0, wavelength_grid(390, 830, 0.1))
    wl, v = qd.wavelength.values, qd.values[0]
    assert wl[np.argmax(v)] == pytest.approx(630.0, abs=0.1)
    above = wl[v >= v.max() / 2]
    assert above[-1] - above[0] == pytest.approx(30.0, rel=0.02)  # first-order width (model definition)
    assert (above[-1] - 630.0) > (630.0 - above[0])  # red tail of an energy-domain Gaussian


def test_phosphor_white_times_filters():
    white = emitters.phosphor_white_led()
    filters = emitters.band_pass_filter([455, 535, 640], [40, 60, 120], name=["B", "G", "R"])
    primaries = emitters.filtered_primaries(white, filters)
    assert primaries.dims == ("primary", "wavelength") and list(primaries.primary.values) == ["B", "G", "R"]
    assert primaries.attrs["units"] == RADIANCE_UNITS
    assert (primaries.values <= white.values + 1e-15).all()
    peaks = primaries.wavelength.values[primaries.values.argmax(-1)]
    assert peaks[0] < peaks[1] < peaks[2]


def test_measured_spectra_and_stacking(tmp_path):
    wl = np.arange(400.0, 701.0, 5.0)
    table = xr.DataArray(np.stack([np.exp(-((wl - c) / 20) ** 2) for c in (460, 540)]), dims=("channel", "wavelength"),
                         coords={"channel": ["b", "g"], "wavelength": wl}, attrs={"units": RADIANCE_UNITS})
    path = write_spectra_csv(table, tmp_path / "leds.csv")
    measured = emitters.measured_spectra(path, wavelength_grid())
    assert measured.dims == ("primary", "wavelength") and measured.sizes["wavelength"] == 441
    stacked = emitters.stack_primaries(measured, emitters.laser_line(638))
    assert list(stacked.primary.values) == ["b", "g", "laser 638 nm"]
    with pytest.raises(SpectrumError, match="repeat"):
        emitters.stack_primaries(measured, measured)


def test_bad_emitter_input():
    with pytest.raises(SpectrumError, match="linewidth_nm=-1"):
        emitters.laser_line(532, -1)
    with pytest.raises(SpectrumError, match="profile='square'"):
        emitters.laser_line(532, 1, profile="square")
    with pytest.raises(SpectrumError, match="no emission"):
        emitters.gaussian(1200, 10)
    with pytest.raises(SpectrumError, match="lengths differ"):
        emitters.gaussian([450, 550], [10, 20, 30])
    with pytest.raises(SpectrumError, match="transmittance"):
        emitters.band_pass_filter(500, 50, peak_transmittance=1.5)


def _share_outside_by_quadrature(shape, kept=None, lo=390.0, hi=830.0, reach=(200.0, 2000.0)) -> float:
    """Share of a continuous shape's area the grid [lo, hi] does not keep, by scipy's adaptive
    quadrature; ``kept(x)`` weighs what the grid keeps of wavelength x (default 1 inside, 0 outside)."""
    from scipy.integrate import quad

    def integral(f, a, b):
        return quad(f, a, b, limit=400, epsabs=0.0, epsrel=1e-10)[0]

    edges = [reach[0], lo - 1.0, lo, hi, hi + 1.0, reach[1]]
    total = sum(integral(shape, a, b) for a, b in zip(edges[:-1], edges[1:]))
    weight = kept or (lambda x: 1.0 if lo <= x <= hi else 0.0)
    inside = sum(integral(lambda x: shape(x) * weight(x), a, b) for a, b in zip(edges[1:-2], edges[2:-1]))
    return 1.0 - inside / total


def _hats(x, lo=390.0, hi=830.0, step=1.0):
    """The sum of the grid's hat functions: 1 inside, falling to 0 one step beyond each end."""
    return float(np.clip(1.0 - max(lo - x, x - hi, 0.0) / step, 0.0, 1.0))


_SIGMA = 1 / 2.3548200450309493  # Gaussian sigma per nm of FWHM


@pytest.mark.parametrize("make, shape, kept", [
    (lambda **kw: emitters.gaussian(400, 20, **kw),
     lambda x: np.exp(-((x - 400) ** 2) / (2 * (20 * _SIGMA) ** 2)), None),
    (lambda **kw: emitters.ohno_led(398, 12, long_side_half_spectral_width_nm=20, **kw),
     lambda x: (lambda g: (g + 2 * g ** 5) / 3)(np.exp(-(((x - 398) / (12 if x < 398 else 20)) ** 2))), None),
    (lambda **kw: emitters.quantum_dot(395, 40, **kw),
     lambda x: (lambda s, nc: np.exp(-((1 / x - nc) ** 2) / (2 * s ** 2)) / x ** 2)(
         40 / 395 ** 2 * _SIGMA, 1 / 395 - 2 * (40 / 395 ** 2 * _SIGMA) ** 2 * 395), None),
    (lambda **kw: emitters.laser_line(828.0, 3.0, **kw),
     lambda x: np.exp(-((x - 828.0) ** 2) / (2 * (3.0 * _SIGMA) ** 2)), _hats),
])
def test_energy_outside_the_grid_is_refused_or_stated(make, shape, kept):
    expected = _share_outside_by_quadrature(shape, kept)  # scipy.integrate.quad of the model's own formula
    assert expected > 0.01
    with pytest.raises(EnergyOutsideGridError, match=r"loses .* % of its energy outside .* allowed: at most 1 %"):
        make()
    with pytest.warns(SpectralEnergyWarning) as seen:
        spectrum = make(allow_outside_grid=True)
    share = float(str(seen[0].message).split(" loses ")[1].split(" %")[0]) / 100
    assert share == pytest.approx(expected, abs=5e-5)  # the message rounds to 0.01 %
    assert np.isclose(spectrum.values.sum(), 1.0)  # the part on the grid carries the stated radiance


def test_lines_far_outside_the_grid_have_no_emission_even_when_allowed():
    for peak in (200.0, 835.0, 1200.0):
        with pytest.raises(EnergyOutsideGridError, match=f"peak {peak:g} nm.*no emission"):
            emitters.laser_line(peak, 1.0, allow_outside_grid=True)  # not a comb rescaled to full power
    assert emitters.laser_line(639.0, 1.0, profile="lorentzian").sizes["primary"] == 1  # 0.14 % lost: accepted


def test_measured_primaries_follow_the_same_rule(tmp_path):
    path = tmp_path / "uv.csv"
    path.write_text("wavelength_nm,V\n350,1\n400,1\n450,0\n")
    with pytest.raises(EnergyOutsideGridError, match="uv.csv.*V.*loses 53.33 %"):
        emitters.measured_spectra(path, wavelength_grid())  # trapezoids: 40 of the 75 units of area (geometry)
    with pytest.warns(SpectralEnergyWarning):
        emitters.measured_spectra(path, wavelength_grid(), allow_outside_grid=True)
