"""Source RGB colour spaces (BT.709 / sRGB, Display P3, BT.2020) and their decoding to XYZ.

Each space is defined by its primaries' and white's CIE 1931 xy chromaticities, as colour-science
publishes them; the RGB→XYZ matrix is the normalised primary matrix of SMPTE RP 177 (white Y = 1),
both from :mod:`metasim.colorimetry.rgb_spaces`. Decoding applies the space's encoding (an EOTF
from :mod:`metasim.display.transfer`) and scales to cd/m²:

* SDR encodings (``srgb``, ``bt1886``, ``gamma``, ``linear``) are relative: RGB = 1 maps to the
  white luminance given (the display's white, so white is shown as white).
* ``pq`` is absolute (cd/m² per SMPTE ST 2084); ``hlg`` is display-referred with nominal peak
  ``peak_luminance`` (ITU-R BT.2100).

The XYZ so obtained are taken as the *calibration observer's* XYZ: a display calibrated for an
observer reproduces the source colours relative to the white it was calibrated to, for that
observer (for the CIE 1931 observer this is ordinary colorimetric reproduction).

References
----------
ITU-R BT.709-6 (primaries, D65); IEC 61966-2-1:1999 (sRGB); SMPTE EG 432-1:2010 (Display P3:
P3 primaries with D65 white); ITU-R BT.2020-2 and BT.2100-2 (primaries, PQ/HLG); SMPTE
RP 177-1993 (normalised primary matrix).
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim.colorimetry.rgb_spaces import rgb_to_xyz_matrix
from metasim.errors import DisplayError
from metasim.display.transfer import BT2100_WEIGHTS, check_transfer, eotf, eotf_values

#: name -> default encoding of the signal (a transfer function of :mod:`metasim.display.transfer`);
#: primaries, white and matrix of each space come from :mod:`metasim.colorimetry.rgb_spaces`.
SOURCE_SPACES = {
    "bt709": "bt1886",
    "srgb": "srgb",
    "display_p3": "srgb",
    "bt2020": "bt1886",
}
RGB = ("R", "G", "B")


def _space(source: str) -> str:
    """The default encoding of a known source space; DisplayError naming the allowed ones otherwise."""
    if not isinstance(source, str) or source not in SOURCE_SPACES:
        raise DisplayError(f"source colour space {source!r} is not known; allowed: {', '.join(SOURCE_SPACES)}")
    return SOURCE_SPACES[source]


def source_matrix(source: str) -> xr.DataArray:
    """RGB→XYZ normalised primary matrix of a source space (dims ``xyz`` × ``primary`` = R, G, B).

    Parameters
    ----------
    source : str
        ``bt709``, ``srgb``, ``display_p3`` or ``bt2020``.

    Returns
    -------
    xarray.DataArray (xyz, primary)
        The matrix (unit 1): XYZ of linear R, G, B, white (R = G = B = 1) at Y = 1.

    Raises
    ------
    DisplayError
        An unknown source space (naming the allowed ones).

    References
    ----------
    SMPTE RP 177-1993 §3.3 (normalised primary matrix from primary and white chromaticities);
    primaries and whites of ITU-R BT.709-6, IEC 61966-2-1:1999, SMPTE EG 432-1:2010 and
    ITU-R BT.2020-2.

    Examples
    --------
    >>> from metasim.display import source_matrix
    >>> source_matrix("bt709").round(4).values.tolist()  # ITU-R BT.709-6 / IEC 61966-2-1
    [[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722], [0.0193, 0.1192, 0.9505]]
    """
    _space(source)
    return xr.DataArray(rgb_to_xyz_matrix(source).copy(), dims=("xyz", "primary"), coords={"xyz": ["X", "Y", "Z"], "primary": list(RGB)},
                        attrs={"units": "1", "long_name": f"{source} RGB to XYZ matrix (white Y = 1)"})


def rgb_to_xyz(rgb: xr.DataArray, source: str = "bt709", *, encoding: str | None = None,
               white_luminance=100.0, peak_luminance=None, black_luminance: float = 0.0,
               gamma: float = 2.2) -> xr.DataArray:
    """XYZ in cd/m² of encoded source RGB (dim ``primary`` = R, G, B).

    Parameters
    ----------
    rgb : DataArray
        Encoded signals 0..1 with a ``primary`` dim of size 3 (R, G, B) and any other dims.
    source : str
        ``bt709``, ``srgb``, ``display_p3`` or ``bt2020``.
    encoding : str, optional
        Transfer function of the signal (default per source: ``bt709`` → ``bt1886``, ``srgb`` and
        ``display_p3`` → ``srgb``, ``bt2020`` → ``bt1886``; use ``pq`` or ``hlg`` for BT.2100).
    white_luminance : float or DataArray
        cd/m² of RGB = 1 for SDR encodings (for example the display white, per ``design``).
    peak_luminance : float, optional
        Nominal peak L_W for ``hlg`` (default ``white_luminance``).
    black_luminance, gamma : see :func:`metasim.display.transfer.eotf`.

    Returns
    -------
    xarray.DataArray (..., xyz)
        X, Y, Z in cd/m² (``rgb``'s other dims first), named ``target``.

    Raises
    ------
    DisplayError
        An unknown source space or transfer function, or ``rgb`` without a ``primary`` dim of size 3.

    References
    ----------
    ITU-R BT.709-6 (primaries, D65); IEC 61966-2-1:1999 (sRGB); SMPTE EG 432-1:2010 (Display P3);
    ITU-R BT.2020-2 and BT.2100-2 (primaries, PQ/HLG); ITU-R BT.1886 (2011) Annex 1; SMPTE
    ST 2084:2014; SMPTE RP 177-1993 (normalised primary matrix).

    Examples
    --------
    >>> import xarray as xr
    >>> from metasim.display import rgb_to_xyz
    >>> rgb = xr.DataArray([[1.0, 1.0, 1.0], [1.0, 0.0, 0.0]], dims=("stimulus", "primary"),
    ...                    coords={"stimulus": ["white", "red"]})
    >>> xyz = rgb_to_xyz(rgb, "srgb", white_luminance=100.0)
    >>> xyz.dims, xyz.round(2).values.tolist(), xyz.attrs["units"]
    (('stimulus', 'xyz'), [[95.05, 100.0, 108.91], [41.24, 21.26, 1.93]], 'cd m-2')
    """
    encoding = _space(source) if encoding is None else encoding
    check_transfer(encoding, gamma=gamma)
    if not isinstance(rgb, xr.DataArray) or "primary" not in rgb.dims or rgb.sizes["primary"] != 3:
        raise DisplayError("source RGB must be a DataArray with a 'primary' dim of size 3 (R, G, B)")
    rgb = rgb.assign_coords(primary=list(RGB))
    if encoding in ("pq",):
        light = eotf(rgb, "pq")
    elif encoding == "hlg":
        peak = white_luminance if peak_luminance is None else peak_luminance
        peak = float(np.max(np.asarray(peak)))
        light = eotf(rgb, "hlg", peak_luminance=peak, black_luminance=black_luminance)
    else:
        light = eotf(rgb, encoding, peak_luminance=1.0, gamma=gamma) * white_luminance
    xyz = xr.dot(source_matrix(source), light, dim="primary")
    xyz = xyz.transpose(..., "xyz")
    xyz.attrs = {"units": "cd m-2", "long_name": f"tristimulus values of {source} RGB ({encoding})"}
    xyz.name = "target"
    return xyz


def source_light(rgb, source: str, encoding: str | None, *, peak_luminance: float, gamma: float = 2.2):
    """Validated numpy decoding of source RGB, as :func:`rgb_to_xyz` does it before the white scaling.

    Returns the light (``rgb``'s dims with ``primary`` moved last; relative, RGB = 1 → 1, for SDR
    encodings, cd/m² for ``pq`` and ``hlg``), whether it is relative, the RGB→XYZ matrix (3 × 3)
    and the dims of the light without ``primary``. Raises the errors of :func:`rgb_to_xyz`.
    """
    encoding = _space(source) if encoding is None else encoding
    check_transfer(encoding, gamma=gamma)
    if not isinstance(rgb, xr.DataArray) or "primary" not in rgb.dims or rgb.sizes["primary"] != 3:
        raise DisplayError("source RGB must be a DataArray with a 'primary' dim of size 3 (R, G, B)")
    dims = [d for d in rgb.dims if d != "primary"]
    values = rgb.variable.transpose(*dims, "primary").values
    if encoding == "pq":
        peak, relative = check_transfer("pq"), False
    elif encoding == "hlg":
        peak, relative = check_transfer("hlg", gamma=2.2, peak_luminance=peak_luminance), False
    else:
        peak, relative = check_transfer(encoding, gamma=gamma, peak_luminance=1.0), True
    if not np.isfinite(np.asarray(values, dtype=float)).all():
        raise DisplayError("signal contains non-finite values; values must be finite numbers")
    weights = np.asarray(BT2100_WEIGHTS) if encoding == "hlg" else None
    light = eotf_values(values, encoding, peak, 0.0, gamma, weights)
    return light, relative, rgb_to_xyz_matrix(source), dims


__all__ = ["SOURCE_SPACES", "RGB", "source_matrix", "rgb_to_xyz"]
