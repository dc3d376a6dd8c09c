"""The SMPTE ST 2084 (PQ) curve on numpy arrays, with colour-science's published constants.

The constants m1, m2, c1, c2, c3 are colour-science's ``CONSTANTS_ST2084`` (their one home); the
arithmetic is the standard's formula written once here for the display transfer functions
(:mod:`metasim.display.transfer`) and ICtCp (:mod:`metasim.colorimetry.ictcp`). colour-science's
own ``eotf_ST2084`` / ``eotf_inverse_ST2084`` give the same numbers (the tests compare them) but
take 1.1-4 times as long on the arrays of a study (input conversion and domain handling per call),
measured in one run.

References
----------
SMPTE ST 2084:2014, equations 4.1 and 5.2; ITU-R BT.2100-2 Table 4.
"""

from __future__ import annotations

import numpy as np

#: Peak luminance of the PQ curve, cd/m² (SMPTE ST 2084).
PQ_PEAK_LUMINANCE = 10000.0


def _constants():
    from colour.models.rgb.transfer_functions.st_2084 import CONSTANTS_ST2084 as c

    return c.m_1, c.m_2, c.c_1, c.c_2, c.c_3


def _spow(x, p):
    return np.sign(x) * np.abs(x) ** p


def pq_eotf_values(signal: np.ndarray) -> np.ndarray:
    """Display light in cd/m² of PQ signals V (0..1): 10000·(max(V^(1/m2) − c1, 0) / (c2 − c3·V^(1/m2)))^(1/m1).

    Examples
    --------
    >>> from metasim.colorimetry.st2084 import pq_eotf_values
    >>> round(float(pq_eotf_values(0.5080784215)), 6)  # SMPTE ST 2084: 100 cd/m2 encodes as 0.508078
    100.0
    """
    m1, m2, c1, c2, c3 = _constants()
    vp = _spow(signal, 1.0 / m2)
    return PQ_PEAK_LUMINANCE * _spow(np.maximum(vp - c1, 0.0) / (c2 - c3 * vp), 1.0 / m1)


def pq_inverse_eotf_values(light: np.ndarray, *, clip_negative: bool = False) -> np.ndarray:
    """PQ signal of display light in cd/m²: ((c1 + c2·Y^m1) / (1 + c3·Y^m1))^m2 with Y = light / 10000.

    Negative light keeps its sign through the powers (as colour-science's ``spow``), or is taken as
    0 with ``clip_negative`` (ICtCp), which also skips the sign handling (about half the time).
    """
    m1, m2, c1, c2, c3 = _constants()
    if clip_negative:
        y = np.maximum(light / PQ_PEAK_LUMINANCE, 0.0) ** m1
        return ((c1 + c2 * y) / (1 + c3 * y)) ** m2
    y = _spow(light / PQ_PEAK_LUMINANCE, m1)
    return _spow((c1 + c2 * y) / (1 + c3 * y), m2)


__all__ = ["PQ_PEAK_LUMINANCE", "pq_eotf_values", "pq_inverse_eotf_values"]
