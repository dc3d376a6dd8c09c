"""Peak-shift axis and absorbance interpolation of the individual observer model."""

from __future__ import annotations

import numpy as np
import pytest

import metasim
from metasim import emitters
from metasim.errors import ObserverError
from metasim.metamerism import primaries_and_secondaries
from metasim.observers import physiological_observers
from metasim.observers.physiological import BASE_WAVELENGTHS, absorbance_table, _peak
from metasim.observers.pigments import shifted_absorbance


@pytest.mark.parametrize("axis", ["log_wavelength", "wavelength"])
@pytest.mark.parametrize("interpolation", ["linear", "monotone_cubic"])
def test_shifted_absorbance_peak_moves_by_the_shift(axis, interpolation):
    table, peak_nm = absorbance_table()
    shift = np.array([[2.0, -1.5, 1.3], [-3.0, 2.5, -0.7]])
    fine = np.arange(400.0, 700.0, 0.01)
    curves = shifted_absorbance(BASE_WAVELENGTHS, table, peak_nm, shift, axis, fine, interpolation=interpolation)
    peaks = fine[np.argmax(curves, axis=-1)]
    # a λmax shift moves the absorbance peak by the given nm (Asano, Fairchild & Blondé 2016)
    assert np.abs(peaks - (peak_nm + shift)).max() < 0.6  # linear reading peaks on a node: within half a step


def test_the_two_axes_move_the_flanks_differently():
    table, peak_nm = absorbance_table()
    shift = np.array([[3.0, 0.0, 0.0]])
    wl = np.array([450.0, 650.0])
    log = shifted_absorbance(BASE_WAVELENGTHS, table, peak_nm, shift, "log_wavelength", wl, interpolation="monotone_cubic")
    lin = shifted_absorbance(BASE_WAVELENGTHS, table, peak_nm, shift, "wavelength", wl, interpolation="monotone_cubic")
    plain = shifted_absorbance(BASE_WAVELENGTHS, table, peak_nm, np.zeros((1, 3)), "wavelength", wl - np.array([
        3.0 * 450 / (peak_nm[0] + 3.0), 3.0 * 650 / (peak_nm[0] + 3.0)]), interpolation="monotone_cubic")
    # log-wavelength reading: the point at λ moves by shift · λ / (λmax + shift) (Lamb 1995)
    assert np.abs(log[0, 0] - plain[0, 0]).max() < 1e-12
    assert lin[0, 0, 1] < log[0, 0, 1]  # long flank of L moves less on the linear axis (common practice, no source)


def test_defaults_are_unchanged_and_recorded():
    rng = np.random.default_rng(1)
    kwargs = {"l_shift_nm": rng.normal(0, 2, 5), "s_shift_nm": rng.normal(0, 1.3, 5)}
    default = physiological_observers(40, 2, **kwargs)
    explicit = physiological_observers(40, 2, peak_shift_axis="log_wavelength", absorbance_interpolation="linear", **kwargs)
    np.testing.assert_array_equal(default["cmf"].values, explicit["cmf"].values)
    assert default.attrs["peak_shift_axis"] == "log_wavelength"  # Lamb (1995) template, metasim's default
    assert default.attrs["absorbance_interpolation"] == "linear"
    other = metasim.observer_population(5, seed=3, peak_shift_axis="wavelength")
    assert other.attrs["peak_shift_axis"] == "wavelength" and '"peak_shift_axis": "wavelength"' in other.attrs["parameters"]
    assert metasim.cie2006_observer(32, 2, l_shift_nm=1, peak_shift_axis="wavelength").attrs["peak_shift_axis"] == "wavelength"
    monitor = metasim.make_display(emitters.gaussian([612, 548, 455], [38, 42, 28], name=["R", "G", "B"]))
    lasers = metasim.make_display(emitters.laser_line([638, 532, 465], 1.0, name=["R", "G", "B"]))
    result = metasim.mismatch(monitor, lasers, other, primaries_and_secondaries())
    assert result.attrs["observer_peak_shift_axis"] == "wavelength"
    with pytest.raises(ObserverError, match="peak_shift_axis='log' is not known; allowed: log_wavelength, wavelength"):
        physiological_observers(peak_shift_axis="log")
    with pytest.raises(ObserverError, match="absorbance_interpolation='spline' is not known"):
        physiological_observers(absorbance_interpolation="spline")


def test_monotone_cubic_reading_agrees_at_nodes_and_is_smooth_in_the_shift():
    table, peak_nm = absorbance_table()
    zero = np.zeros((1, 3))
    cubic = shifted_absorbance(BASE_WAVELENGTHS, table, peak_nm, zero, interpolation="monotone_cubic")
    assert np.array_equal(cubic[0], table)  # no shift: the table itself (CIE 170-1:2006 observer unchanged)
    near = shifted_absorbance(BASE_WAVELENGTHS, table, peak_nm, np.full((1, 3), 1.7), interpolation="monotone_cubic")
    linear = shifted_absorbance(BASE_WAVELENGTHS, table, peak_nm, np.full((1, 3), 1.7), interpolation="linear")
    assert np.abs(near - linear).max() < 2e-3  # two readings of one smooth curve (common practice, no source)
    assert near.min() >= 0  # monotone cubic: no overshoot below zero (Fritsch & Carlson 1980)
    # derivative in the shift just below and above a node crossing: equal for cubic, a jump for linear
    wl = np.array([600.0])
    crossing = peak_nm[0] * (600.0 / 599.0) - peak_nm[0]  # the shift that reads L at exactly 599 nm
    slopes = {}
    for interpolation in ("linear", "monotone_cubic"):
        d = [shifted_absorbance(BASE_WAVELENGTHS, table, peak_nm, np.array([[crossing + e, 0, 0]]), wavelengths=wl,
                                interpolation=interpolation, derivative=True)[1][0, 0, 0] for e in (-1e-7, 1e-7)]
        slopes[interpolation] = abs(d[0] / d[1] - 1)
    assert slopes["monotone_cubic"] < 1e-4 < slopes["linear"]
    assert _peak(cubic[0], BASE_WAVELENGTHS)[1] == pytest.approx(peak_nm)
