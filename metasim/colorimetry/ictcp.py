"""ICtCp (ITU-R BT.2100, PQ) and the ΔE_ITP colour difference (ITU-R BT.2124) for absolute luminance.

ICtCp is defined on linear BT.2020 RGB in cd/m²; XYZ is taken to BT.2020 RGB with the BT.2020
primaries and D65 white (no chromatic adaptation: the XYZ is assumed already relative to D65 viewing).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
import xarray as xr

from metasim.errors import ColorimetryError

ICTCP = ("I", "Ct", "Cp")

# ITU-R BT.2100-2, Table 6 (PQ system reference non-linear transfer function) and Table 7 (ICtCp)
_M1 = 2610.0 / 16384.0
_M2 = 2523.0 / 4096.0 * 128.0
_C1 = 3424.0 / 4096.0
_C2 = 2413.0 / 4096.0 * 32.0
_C3 = 2392.0 / 4096.0 * 32.0
_RGB_TO_LMS = np.array([[1688, 2146, 262], [683, 2951, 462], [99, 309, 3688]], dtype=float) / 4096.0
_LMS_TO_ICTCP = np.array([[2048, 2048, 0], [6610, -13613, 7003], [17933, -17390, -543]], dtype=float) / 4096.0
_PQ_PEAK = 10000.0  # cd/m2


@lru_cache(maxsize=1)
def _xyz_to_bt2020() -> np.ndarray:
    """XYZ → linear BT.2020 RGB (ITU-R BT.2020 primaries, D65), from the chromaticities."""
    xy = np.array([[0.708, 0.292], [0.170, 0.797], [0.131, 0.046]])  # ITU-R BT.2020 Table 3
    white = np.array([0.3127, 0.3290])  # D65, ITU-R BT.2020
    primaries = np.column_stack([xy[:, 0] / xy[:, 1], np.ones(3), (1 - xy.sum(1)) / xy[:, 1]]).T
    white_xyz = np.array([white[0] / white[1], 1.0, (1 - white.sum()) / white[1]])
    scale = np.linalg.solve(primaries, white_xyz)
    return np.linalg.inv(primaries * scale)


def _pq_inverse_eotf(luminance: np.ndarray) -> np.ndarray:
    y = np.clip(luminance / _PQ_PEAK, 0.0, None) ** _M1
    return ((_C1 + _C2 * y) / (1.0 + _C3 * y)) ** _M2


def xyz_to_ictcp(xyz: xr.DataArray) -> xr.DataArray:
    """ICtCp (dim ``ictcp`` = I, Ct, Cp) of absolute XYZ in cd/m² (ITU-R BT.2100-2, PQ).

    Negative BT.2020 RGB (outside the BT.2020 gamut) is clipped to 0 before the PQ curve, as the
    curve is undefined for negative light.

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
    rgb = values @ _xyz_to_bt2020().T
    lms = rgb @ _RGB_TO_LMS.T
    ictcp = _pq_inverse_eotf(lms) @ _LMS_TO_ICTCP.T
    coords = {k: v for k, v in xyz.coords.items() if "xyz" not in v.dims}
    return xr.DataArray(ictcp, dims=(*dims, "ictcp"), coords={**coords, "ictcp": list(ICTCP)},
                        attrs={"units": "1", "long_name": "ICtCp (ITU-R BT.2100 PQ)"})


def delta_e_itp(ictcp_1: xr.DataArray, ictcp_2: xr.DataArray) -> xr.DataArray:
    """ΔE_ITP = 720·√(ΔI² + ΔT² + ΔP²), T = Ct/2, P = Cp (ITU-R BT.2124-0, 2019).

    A value of 1 is about one just-noticeable difference; broadcast by dim name over all but ``ictcp``.

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
    diff = ictcp_1 - ictcp_2
    weights = xr.DataArray([1.0, 0.5, 1.0], dims="ictcp", coords={"ictcp": list(ICTCP)})
    out = 720.0 * np.sqrt(((diff * weights) ** 2).sum("ictcp"))
    out.attrs = {"units": "1", "long_name": "ITU-R BT.2124 colour difference ΔE_ITP"}
    return out.rename("delta_e_itp")


__all__ = ["ICTCP", "xyz_to_ictcp", "delta_e_itp"]
