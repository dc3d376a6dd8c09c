"""Shifting a photopigment absorbance peak: the two readings of the individual-observer model.

The individual observer model moves each cone photopigment's absorbance so that its peak moves by
a given number of nanometres. Two readings are in use, and a fitted or drawn shift means a
different thing under each, so the axis is an explicit model option (``peak_shift_axis``), recorded
in every observer Dataset (attribute ``peak_shift_axis``):

* ``"log_wavelength"`` (the default): ``a'(λ) = a(λ · λmax / (λmax + shift))``. The absorbance keeps
  its shape on a log-wavelength (equivalently log-wavenumber) axis, the template property of
  photopigment spectra (Lamb 1995). It is what metasim has always done, so every earlier number
  stands; a change of default would change every population result and needs a source saying the
  other reading is the intended one.
* ``"wavelength"``: ``a'(λ) = a(λ − shift)``, every point of the curve moved by the same nm. This is
  how Asano, Fairchild & Blondé (2016) describe their λmax shift (from memory, not checked against
  the paper's text). Compared with the log reading, the long-wavelength flank moves less and the
  short-wavelength flank more (the log reading moves the point at λ by shift · λ / λmax).

Measured, not assumed: for 1,000 observers aged 20-70 (seed 7), a four-laser projector against a
Gaussian-primary monitor, primaries and secondaries (the README example), the mean CIE 2000
difference is 0.5 % lower with ``"wavelength"`` than with ``"log_wavelength"``; other displays
can go the other way.

The absorbance is tabulated at 1 nm, so a shifted reading position falls between nodes. It is
read linearly (``absorbance_interpolation="linear"``, the default, as always) or by monotone cubic
Hermite interpolation (``"monotone_cubic"``: PCHIP tangents, Fritsch & Carlson 1980, no overshoot,
continuous first derivative). Linear reading makes an observer's functions piecewise linear in
the shift, with a jump of the derivative whenever a reading position crosses a node; the observer
fit (:mod:`metasim.fitting`) needs functions smooth in the parameters and uses the cubic reading.
Observers with zero shifts are identical under both; in the example above the mean CIE 2000
difference changes by 0.01 % and single observer × stimulus values by up to 0.03.

References
----------
Lamb, T. D. (1995) Vision Research 35, 3083-3091.
Asano, Y., Fairchild, M. D. & Blondé, L. (2016) PLoS ONE 11(2), e0145671.
Fritsch, F. N. & Carlson, R. E. (1980) SIAM J. Numer. Anal. 17, 238-246.
"""

from __future__ import annotations

import numpy as np

from metasim.errors import ObserverError

#: Axes along which a peak-wavelength shift moves the photopigment absorbance (module docstring).
PEAK_SHIFT_AXES = {
    "log_wavelength": "a'(λ) = a(λ·λmax/(λmax + shift)): template shape kept on a log-wavelength axis (Lamb 1995)",
    "wavelength": "a'(λ) = a(λ − shift): template shape kept on a linear wavelength axis",
}
DEFAULT_PEAK_SHIFT_AXIS = "log_wavelength"
#: How the 1-nm absorbance table is read between its nodes when a shift moves the reading position.
ABSORBANCE_INTERPOLATIONS = {
    "linear": "linear between the 1-nm nodes (derivative jumps at every node)",
    "monotone_cubic": "monotone cubic Hermite through the 1-nm nodes (PCHIP, Fritsch & Carlson 1980; smooth in the shift)",
}
DEFAULT_ABSORBANCE_INTERPOLATION = "linear"


def check_peak_shift_axis(axis) -> str:
    """``axis`` if it is one of :data:`PEAK_SHIFT_AXES`, else an ObserverError naming the choices."""
    if not isinstance(axis, str) or axis not in PEAK_SHIFT_AXES:
        raise ObserverError(f"peak_shift_axis={axis!r} is not known; allowed: {', '.join(PEAK_SHIFT_AXES)}")
    return axis


def _node_slopes(table_nm: np.ndarray, absorbance: np.ndarray) -> np.ndarray:
    """Monotone cubic (PCHIP) tangents of the table at its nodes, per nm (Fritsch & Carlson 1980)."""
    key = (table_nm.tobytes(), absorbance.tobytes())
    slopes = _SLOPES.get(key)
    if slopes is None:
        from scipy.interpolate import PchipInterpolator

        slopes = PchipInterpolator(table_nm, absorbance, axis=1).derivative()(table_nm)
        _SLOPES.clear()
        _SLOPES[key] = slopes
    return slopes


_SLOPES: dict = {}


def check_absorbance_interpolation(interpolation) -> str:
    """``interpolation`` if it is one of :data:`ABSORBANCE_INTERPOLATIONS`, else an ObserverError."""
    if not isinstance(interpolation, str) or interpolation not in ABSORBANCE_INTERPOLATIONS:
        raise ObserverError(f"absorbance_interpolation={interpolation!r} is not known; allowed: "
                            f"{', '.join(ABSORBANCE_INTERPOLATIONS)}")
    return interpolation


def shifted_absorbance(table_nm: np.ndarray, absorbance: np.ndarray, peak_nm: np.ndarray, shift: np.ndarray,
                       axis: str = DEFAULT_PEAK_SHIFT_AXIS, wavelengths: np.ndarray | None = None, *,
                       interpolation: str = DEFAULT_ABSORBANCE_INTERPOLATION, derivative: bool = False):
    """Absorbances a'(λ) (n × 3 × len(wavelengths)) with their peaks shifted by ``shift`` (n × 3, nm).

    ``absorbance`` (3 × len(table_nm)) is tabulated on the uniform 1-nm grid ``table_nm`` (390-830 nm
    for the CIE 170-1 model), ``peak_nm`` (3,) are its peak wavelengths. The table is read at
    λ · λmax / (λmax + shift) (``"log_wavelength"``) or λ − shift (``"wavelength"``) by
    ``interpolation`` (:data:`ABSORBANCE_INTERPOLATIONS`); positions outside the table take the edge
    value. ``wavelengths``: the nodes to evaluate (default ``table_nm``). With ``derivative`` the
    pair (a', ∂a'/∂shift) is returned, the derivative being 0 where the position falls outside.
    """
    check_peak_shift_axis(axis)
    check_absorbance_interpolation(interpolation)
    size = absorbance.shape[1]
    first = float(table_nm[0])
    if wavelengths is None:
        wavelengths = table_nm
    if axis == "log_wavelength":
        position = wavelengths * (peak_nm / (peak_nm + shift))[..., None]
        rate = -position / (peak_nm + shift)[..., None] if derivative else None
    else:
        position = wavelengths - shift[..., None]
        rate = -np.ones_like(position) if derivative else None
    position -= first  # in place on (n, 3, wavelength) arrays, in samples of the 1-nm table
    if derivative:
        rate[(position < 0) | (position > size - 1)] = 0.0
    index = position.astype(np.intp)
    np.clip(index, 0, size - 2, out=index)
    position -= index
    np.clip(position, 0.0, 1.0, out=position)
    index += (np.arange(3) * size)[:, None]
    if interpolation == "linear":
        slope = np.diff(absorbance, axis=1, append=0.0).ravel()[index]
        values = absorbance.ravel()[index]
        position *= slope
        values += position
        return (values, rate * slope) if derivative else values
    # cubic Hermite on the unit interval t = position with the monotone tangents m (per sample)
    t = position
    flat, tangent = absorbance.ravel(), _node_slopes(table_nm, absorbance).ravel()
    a0, a1, m0, m1 = flat[index], flat[index + 1], tangent[index], tangent[index + 1]
    t2 = t * t
    values = a0 + t * m0 + t2 * (3.0 * (a1 - a0) - 2.0 * m0 - m1) + t2 * t * (2.0 * (a0 - a1) + m0 + m1)
    if not derivative:
        return values
    gradient = m0 + t * (6.0 * (a1 - a0) - 4.0 * m0 - 2.0 * m1) + t2 * (6.0 * (a0 - a1) + 3.0 * m0 + 3.0 * m1)
    return values, rate * gradient


__all__ = ["PEAK_SHIFT_AXES", "DEFAULT_PEAK_SHIFT_AXIS", "ABSORBANCE_INTERPOLATIONS", "DEFAULT_ABSORBANCE_INTERPOLATION",
           "check_peak_shift_axis", "check_absorbance_interpolation", "shifted_absorbance"]
