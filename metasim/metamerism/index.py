"""Observer-change metamerism index with correction, after ISO 18314-4 (change of illuminant).

ISO 18314-4 judges a sample against a standard that match imperfectly under a reference
condition: the residual difference under the reference condition is removed by a correction
before the two are compared under the test condition. metasim applies the same construction to a
change of *observer*:

* reference condition r: the calibration observer (the one both sides were matched for);
* test condition t: each individual observer;
* standard: the reference rendering; sample: the test display.

With additive correction in XYZ, ``XYZ_corr = XYZ_spl,t − (XYZ_spl,r − XYZ_std,r)`` and the index is
the CIE 2000 difference between ``XYZ_std,t`` and ``XYZ_corr`` in CIELAB relative to the test
condition's white. (``correction="multiplicative"`` scales instead: ``XYZ_spl,t · XYZ_std,r /
XYZ_spl,r``; ``space="lab"`` applies the correction in CIELAB.)

References
----------
ISO 18314-4:2024 Analytical colorimetry — Part 4: Metamerism index for pairs of samples for change of
illuminant; CIE 15:2004 §9 (special metamerism index).
"""

from __future__ import annotations

import xarray as xr

from metasim.colorimetry import delta_e_2000, xyz_to_lab
from metasim.errors import MismatchError
from metasim.units import DELTA_E00

CORRECTIONS = ("additive", "multiplicative")


def observer_metamerism_index(
    xyz_sample_t: xr.DataArray,
    xyz_standard_t: xr.DataArray,
    xyz_sample_r: xr.DataArray,
    xyz_standard_r: xr.DataArray,
    white_t: xr.DataArray,
    *,
    correction: str = "additive",
    space: str = "xyz",
    white_r: xr.DataArray | None = None,
) -> xr.DataArray:
    """Metamerism index of sample vs standard for a change from condition r to condition t.

    Parameters
    ----------
    xyz_sample_t, xyz_standard_t : DataArray (dim ``xyz``)
        Sample and standard under the test condition (here: each observer).
    xyz_sample_r, xyz_standard_r : DataArray (dim ``xyz``)
        Sample and standard under the reference condition (here: the calibration observer).
    white_t : DataArray (dim ``xyz``)
        White of the test condition, same scale as the XYZ.
    correction : {"additive", "multiplicative"}
    space : {"xyz", "lab"}
        Where the correction is applied; ``"lab"`` needs ``white_r``, the reference condition's white.

    Returns
    -------
    DataArray
        The index (a CIE 2000 difference, ΔE00), broadcast over all dims but ``xyz``, named
        ``metamerism_index``.

    Raises
    ------
    MismatchError
        An unknown ``correction`` or ``space``, or ``space="lab"`` without ``white_r``.

    References
    ----------
    ISO 18314-4:2024; colour-science ``XYZ_to_metamerism_index`` / ``Lab_to_metamerism_index``.

    Examples
    --------
    A sample and standard that match for the calibration observer (condition r) but differ by
    0.5 in X for an individual observer (condition t):

    >>> import xarray as xr
    >>> from metasim.metamerism import observer_metamerism_index
    >>> def xyz(values):
    ...     return xr.DataArray(values, dims="xyz", coords={"xyz": ["X", "Y", "Z"]})
    >>> index = observer_metamerism_index(xyz([20.0, 21.0, 22.0]), xyz([20.5, 21.0, 22.0]),
    ...                                   xyz([20.0, 21.0, 21.5]), xyz([20.0, 21.0, 21.5]),
    ...                                   xyz([95.047, 100.0, 108.883]))
    >>> round(float(index), 3), index.attrs["units"]
    (3.412, 'ΔE00')
    """
    if correction not in CORRECTIONS:
        raise MismatchError(f"correction={correction!r} is not known; allowed: {', '.join(CORRECTIONS)}")
    if space == "xyz":
        if correction == "additive":
            corrected = xyz_sample_t - (xyz_sample_r - xyz_standard_r)
        else:
            corrected = xyz_sample_t * (xyz_standard_r / xyz_sample_r)
        out = delta_e_2000(xyz_to_lab(xyz_standard_t, white_t), xyz_to_lab(corrected, white_t))
    elif space == "lab":
        if white_r is None:
            raise MismatchError("space='lab' needs white_r, the white of the reference condition")
        lab_spl_t = xyz_to_lab(xyz_sample_t, white_t)
        lab_std_t = xyz_to_lab(xyz_standard_t, white_t)
        lab_spl_r = xyz_to_lab(xyz_sample_r, white_r)
        lab_std_r = xyz_to_lab(xyz_standard_r, white_r)
        if correction == "additive":
            corrected = lab_spl_t - (lab_spl_r - lab_std_r)
        else:
            corrected = lab_spl_t * (lab_std_r / lab_spl_r)
        out = delta_e_2000(lab_std_t, corrected)
    else:
        raise MismatchError(f"space={space!r} is not known; allowed: xyz, lab")
    out.attrs = {"units": DELTA_E00, "long_name": f"metamerism index, {correction} correction in {space.upper()}"}
    return out.rename("metamerism_index")


__all__ = ["CORRECTIONS", "observer_metamerism_index"]
