"""The standard RGB colour spaces metasim names, with colour-science's published data as their one home.

Primaries and white points come from ``colour.RGB_COLOURSPACES``; the RGB→XYZ matrix of every
space is the normalised primary matrix of SMPTE RP 177 computed from them
(:func:`normalised_primary_matrix`, white Y = 1). It equals colour-science's stored matrices to
1e-16 for ITU-R BT.709, Display P3, DCI-P3 and ITU-R BT.2020 (colour-science stores the four-digit
sRGB matrix printed in IEC 61966-2-1; metasim derives sRGB from its primaries like the others).
metasim keeps its own arithmetic for the last bit, so that results do not move: the CIE 2000
difference of near-neutral colours turns a 1e-16 change of the matrix into about 1e-6 (the hue
angle of a colour with a* and b* near 0). For the same reason the reference gamuts
(:mod:`metasim.gamut`) keep reading the matrix colour-science stores (``matrix_RGB_to_XYZ`` of
:func:`rgb_space`): the CIELAB coverage volume refines adaptively and moves by about 1e-5 with it.
Source signals (:mod:`metasim.display.sources`), ICtCp (:mod:`metasim.colorimetry.ictcp`, BT.2020)
and the reference gamuts all take their spaces from here; no module writes a primary chromaticity
or matrix of its own.

References
----------
ITU-R BT.709-6; IEC 61966-2-1:1999 (sRGB); SMPTE EG 432-1:2010 (Display P3); SMPTE RP 431-2:2011
(DCI-P3); ITU-R BT.2020-2; SMPTE RP 177-1993 (normalised primary matrix).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

from metasim.errors import ColorimetryError

#: metasim's name of each standard RGB space -> colour-science's name in ``colour.RGB_COLOURSPACES``.
RGB_SPACES = {
    "bt709": "ITU-R BT.709",
    "srgb": "sRGB",
    "display_p3": "Display P3",
    "dci_p3": "DCI-P3",
    "bt2020": "ITU-R BT.2020",
}


def is_rgb_space(value) -> bool:
    """True for a colour-science ``RGB_Colourspace`` (e.g. ``colour.RGB_COLOURSPACES["ITU-R BT.709"]``)."""
    return type(value).__name__ == "RGB_Colourspace" and type(value).__module__.split(".")[0] == "colour"


def rgb_space(name, error=ColorimetryError):
    """The colour-science ``RGB_Colourspace`` of a name of :data:`RGB_SPACES` (an ``RGB_Colourspace``
    is returned as it is); an unknown name raises ``error`` listing the known ones."""
    if is_rgb_space(name):
        return name
    if not isinstance(name, str) or name not in RGB_SPACES:
        raise error(f"colour space {name!r} is not known; allowed: {', '.join(RGB_SPACES)}")
    import colour  # lazily: colour-science takes a moment to import

    return colour.RGB_COLOURSPACES[RGB_SPACES[name]]


def normalised_primary_matrix(primaries_xy, white_xy) -> np.ndarray:
    """RGB → XYZ matrix from the primaries' and the white's CIE 1931 xy (white Y = 1).

    Each column is a primary's XYZ with Y = 1, scaled so that the columns add up to the white.

    References
    ----------
    SMPTE RP 177-1993 §3.3.
    """
    xy = np.asarray(primaries_xy, dtype=float)
    columns = np.stack([xy[:, 0] / xy[:, 1], np.ones(3), (1 - xy[:, 0] - xy[:, 1]) / xy[:, 1]])
    wx, wy = (float(v) for v in white_xy)
    white_xyz = np.array([wx / wy, 1.0, (1 - wx - wy) / wy])
    return columns * np.linalg.solve(columns, white_xyz)[None, :]


@lru_cache(maxsize=None)
def _matrix(name: str, inverse: bool) -> np.ndarray:
    space = rgb_space(name)
    matrix = normalised_primary_matrix(space.primaries, space.whitepoint)
    matrix = np.linalg.inv(matrix) if inverse else matrix
    matrix.flags.writeable = False
    return matrix


def rgb_to_xyz_matrix(name: str) -> np.ndarray:
    """Linear RGB → XYZ matrix (3 × 3, rows X, Y, Z; columns R, G, B; white Y = 1), read-only.

    References
    ----------
    SMPTE RP 177-1993 §3.3 (:func:`normalised_primary_matrix`), with the primaries and white of
    colour-science's ``RGB_COLOURSPACES``.

    Examples
    --------
    >>> from metasim.colorimetry.rgb_spaces import rgb_to_xyz_matrix
    >>> rgb_to_xyz_matrix("bt709")[1].round(4).tolist()  # ITU-R BT.709-6: Y = 0.2126 R + 0.7152 G + 0.0722 B
    [0.2126, 0.7152, 0.0722]
    """
    rgb_space(name)
    return _matrix(name, False)


def xyz_to_rgb_matrix(name: str) -> np.ndarray:
    """XYZ → linear RGB matrix, the inverse of :func:`rgb_to_xyz_matrix` (read-only)."""
    rgb_space(name)
    return _matrix(name, True)


__all__ = ["RGB_SPACES", "is_rgb_space", "rgb_space", "normalised_primary_matrix", "rgb_to_xyz_matrix",
           "xyz_to_rgb_matrix"]
