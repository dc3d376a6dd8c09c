"""ICtCp (ITU-R BT.2100, PQ) and the ΔE_ITP colour difference (ITU-R BT.2124) for absolute luminance.

ICtCp is defined on linear BT.2020 RGB in cd/m²; XYZ is taken to BT.2020 RGB with the BT.2020
primaries and D65 white (no chromatic adaptation: the XYZ is assumed already relative to D65 viewing).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
import xarray as xr

from metasim.colorimetry.rgb_spaces import xyz_to_rgb_matrix
from metasim.colorimetry.st2084 import pq_inverse_eotf_values
from metasim.errors import ColorimetryError
from metasim.units import DELTA_E_ITP

ICTCP = ("I", "Ct", "Cp")
#: Weights of ΔI, ΔCt, ΔCp in ΔE_ITP (T = Ct / 2; ITU-R BT.2124-0).
ITP_WEIGHTS = (1.0, 0.5, 1.0)
#: ΔE_ITP scale: 720 makes 1 about one just-noticeable difference (ITU-R BT.2124-0).
ITP_SCALE = 720.0


def xyz_to_ictcp_values(xyz: np.ndarray) -> np.ndarray:
    """ICtCp of absolute XYZ in cd/m² on the last axis (numpy; :func:`xyz_to_ictcp` labels it).

    XYZ → linear BT.2020 RGB (:func:`metasim.colorimetry.rgb_spaces.xyz_to_rgb_matrix`) → LMS →
    SMPTE ST 2084 inverse EOTF (10,000 cd/m² peak, :mod:`metasim.colorimetry.st2084`) → ICtCp, with
    colour-science's published BT.2100 matrices (``MATRIX_ICTCP_RGB_TO_LMS``,
    ``MATRIX_ICTCP_LMS_P_TO_ICTCP``). Negative LMS (light outside what the PQ curve encodes) is
    clipped to 0.

    References
    ----------
    ITU-R BT.2100-2 (2018), Tables 4, 6 and 7; SMPTE ST 2084:2014.
    """
    from colour.models.rgb.ictcp import MATRIX_ICTCP_LMS_P_TO_ICTCP

    lms = np.asarray(xyz, dtype=float) @ _xyz_to_lms().T
    return pq_inverse_eotf_values(lms, clip_negative=True) @ MATRIX_ICTCP_LMS_P_TO_ICTCP.T


@lru_cache(maxsize=1)
def _xyz_to_lms() -> np.ndarray:
    """XYZ → BT.2100 LMS: colour-science's ``MATRIX_ICTCP_RGB_TO_LMS`` after XYZ → BT.2020 RGB."""
    from colour.models.rgb.ictcp import MATRIX_ICTCP_RGB_TO_LMS

    return MATRIX_ICTCP_RGB_TO_LMS @ xyz_to_rgb_matrix("bt2020")


def delta_e_itp_values(ictcp_1: np.ndarray, ictcp_2: np.ndarray) -> np.ndarray:
    """ΔE_ITP of ICtCp on the last axis (numpy; :func:`delta_e_itp` broadcasts by dim name).

    References
    ----------
    ITU-R BT.2124-0 (2019).
    """
    diff = np.asarray(ictcp_1, dtype=float) - np.asarray(ictcp_2, dtype=float)
    w_i, w_t, w_p = ITP_WEIGHTS
    return ITP_SCALE * np.sqrt((w_i * diff[..., 0]) ** 2 + (w_t * diff[..., 1]) ** 2 + (w_p * diff[..., 2]) ** 2)


def xyz_to_ictcp(xyz: xr.DataArray) -> xr.DataArray:
    """ICtCp (dim ``ictcp`` = I, Ct, Cp) of absolute XYZ in cd/m² (ITU-R BT.2100-2, PQ).

    Negative LMS (far outside the BT.2020 gamut) is clipped to 0 before the PQ curve, as the curve
    is undefined for negative light (:func:`xyz_to_ictcp_values`).

    Parameters
    ----------
    xyz : DataArray
        Absolute XYZ in cd/m² (dim ``xyz``).

    Returns
    -------
    DataArray
        ICtCp (dim ``ictcp``).

    References
    ----------
    ITU-R BT.2100-2 (2018), Tables 4, 6 and 7.

    Examples
    --------
    >>> import metasim
    >>> import xarray as xr
    >>> white = xr.DataArray([95.047, 100.0, 108.883], dims="xyz", coords={"xyz": ["X", "Y", "Z"]})
    >>> round(float(metasim.xyz_to_ictcp(white).sel(ictcp="I")), 4)  # SMPTE ST 2084: 100 cd/m2 encodes as 0.5081
    0.5081
    """
    if not isinstance(xyz, xr.DataArray) or "xyz" not in xyz.dims:
        raise ColorimetryError("xyz_to_ictcp needs a DataArray with an 'xyz' dim (absolute XYZ in cd/m2)")
    dims = [d for d in xyz.dims if d != "xyz"]
    values = xyz.transpose(*dims, "xyz").values
    ictcp = xyz_to_ictcp_values(values)
    coords = {k: v for k, v in xyz.coords.items() if "xyz" not in v.dims}
    return xr.DataArray(ictcp, dims=(*dims, "ictcp"), coords={**coords, "ictcp": list(ICTCP)},
                        attrs={"units": "1", "long_name": "ICtCp (ITU-R BT.2100 PQ)"})


def delta_e_itp(ictcp_1: xr.DataArray, ictcp_2: xr.DataArray) -> xr.DataArray:
    """ΔE_ITP = 720·√(ΔI² + ΔT² + ΔP²), T = Ct/2, P = Cp (ITU-R BT.2124-0, 2019).

    A value of 1 is about one just-noticeable difference; broadcast by dim name over all but ``ictcp``.

    Parameters
    ----------
    ictcp_1, ictcp_2 : DataArray
        ICtCp values (dim ``ictcp``), from :func:`xyz_to_ictcp`.

    Returns
    -------
    DataArray
        ΔE_ITP, the inputs' dims without ``ictcp``.

    Examples
    --------
    >>> import metasim
    >>> import xarray as xr
    >>> white = xr.DataArray([95.047, 100.0, 108.883], dims="xyz", coords={"xyz": ["X", "Y", "Z"]})
    >>> ictcp = metasim.xyz_to_ictcp(white)
    >>> round(float(metasim.delta_e_itp(ictcp, metasim.xyz_to_ictcp(white * 1.05))), 2)  # 5 % brighter
    3.53
    """
    for name, value in (("ictcp_1", ictcp_1), ("ictcp_2", ictcp_2)):
        if not isinstance(value, xr.DataArray) or "ictcp" not in value.dims:
            raise ColorimetryError(f"{name} must be a DataArray with an 'ictcp' dim")
    ordered = [value.sel(ictcp=list(ICTCP)) if "ictcp" in value.indexes else value for value in (ictcp_1, ictcp_2)]
    out = xr.apply_ufunc(delta_e_itp_values, *ordered, input_core_dims=[["ictcp"], ["ictcp"]])
    out.attrs = {"units": DELTA_E_ITP, "long_name": "ITU-R BT.2124 colour difference ΔE_ITP"}
    return out.rename("delta_e_itp")


__all__ = ["ICTCP", "ITP_WEIGHTS", "ITP_SCALE", "xyz_to_ictcp", "xyz_to_ictcp_values", "delta_e_itp",
           "delta_e_itp_values"]
