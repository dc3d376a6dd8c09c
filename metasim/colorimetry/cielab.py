"""Chromaticity coordinates and CIELAB, vectorised over any leading dims by name."""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim.colorimetry._kernels.cielab import lab_of_ratios, lab_of_rows
from metasim.colorimetry.constants import CIELAB_EPSILON as _EPSILON
from metasim.colorimetry.constants import CIELAB_KAPPA as _KAPPA
from metasim.labelling import labelled
from metasim.errors import ColorimetryError

LAB = ("L*", "a*", "b*")


def _need(array: xr.DataArray, dim: str, what: str) -> None:
    if not isinstance(array, xr.DataArray) or dim not in array.dims:
        got = tuple(array.dims) if isinstance(array, xr.DataArray) else type(array).__name__
        raise ColorimetryError(f"{what} must be a DataArray with a '{dim}' dim, got {got}")


def _split(array: xr.DataArray, dim: str):
    labels = list(array.coords[dim].values) if dim in array.coords else None
    parts = [array.isel({dim: i}, drop=True) for i in range(array.sizes[dim])]
    return parts, labels


def _xyz_columns(xyz: xr.DataArray):
    """X, Y, Z as numpy arrays over the other dims (in their order) and those dims."""
    dims = [d for d in xyz.dims if d != "xyz"]
    values = xyz.variable.transpose(*dims, "xyz").values
    return (values[..., 0], values[..., 1], values[..., 2]), dims


def _chromaticity(first, second, xyz, dims, labels, long_name) -> xr.DataArray:
    return labelled(np.stack([first, second], axis=-1), (*dims, "chromaticity"), (xyz,),
                    labels={"chromaticity": labels}, attrs={"units": "1", "long_name": long_name}, name=xyz.name)


def xyz_to_xy(xyz: xr.DataArray) -> xr.DataArray:
    """CIE 1931 xy chromaticity (dim ``chromaticity`` = x, y) from XYZ (CIE 15:2004 §7.3).

    Black (X + Y + Z = 0) gives NaN.

    Parameters
    ----------
    xyz : DataArray
        Tristimulus values with an ``xyz`` dim, any scale; other dims are kept.

    Returns
    -------
    DataArray
        x, y (dim ``chromaticity``); NaN for black.

    Examples
    --------
    >>> import metasim
    >>> import xarray as xr
    >>> d65 = xr.DataArray([95.047, 100.0, 108.883], dims="xyz", coords={"xyz": ["X", "Y", "Z"]})
    >>> metasim.xyz_to_xy(d65).round(4).values.tolist()  # CIE 15:2004: D65 at x 0.3127, y 0.3290
    [0.3127, 0.329]
    """
    _need(xyz, "xyz", "xyz")
    if xyz.sizes["xyz"] != 3:
        (x, y, z), _ = _split(xyz, "xyz")  # raises the unpacking error
    (x, y, z), dims = _xyz_columns(xyz)
    total = x + y + z
    with np.errstate(invalid="ignore", divide="ignore"):
        return _chromaticity(x / total, y / total, xyz, dims, ("x", "y"), "CIE 1931 xy chromaticity")


def xyz_to_uv(xyz: xr.DataArray) -> xr.DataArray:
    """CIE 1976 u'v' chromaticity (dim ``chromaticity`` = u', v') from XYZ (CIE 15:2004 §8.1).

    Parameters
    ----------
    xyz : DataArray
        Tristimulus values with an ``xyz`` dim; u', v' do not depend on their scale.

    Returns
    -------
    DataArray
        u', v' over the ``chromaticity`` dim, in place of ``xyz``.

    Examples
    --------
    >>> import metasim
    >>> import xarray as xr
    >>> d65 = xr.DataArray([95.047, 100.0, 108.883], dims="xyz", coords={"xyz": ["X", "Y", "Z"]})
    >>> metasim.xyz_to_uv(d65).round(4).values.tolist()  # CIE 15:2004: D65 at u' 0.1978, v' 0.4683
    [0.1978, 0.4683]
    """
    _need(xyz, "xyz", "xyz")
    if xyz.sizes["xyz"] != 3:
        (x, y, z), _ = _split(xyz, "xyz")  # raises the unpacking error
    (x, y, z), dims = _xyz_columns(xyz)
    denominator = x + 15 * y + 3 * z
    with np.errstate(invalid="ignore", divide="ignore"):
        return _chromaticity(4 * x / denominator, 9 * y / denominator, xyz, dims, ("u'", "v'"),
                             "CIE 1976 u'v' chromaticity")


def xy_to_xyz(xy: xr.DataArray, luminance: float | xr.DataArray = 1.0) -> xr.DataArray:
    """XYZ with the given Y from xy chromaticity (dim ``chromaticity`` = x, y).

    Parameters
    ----------
    xy : DataArray
        Chromaticity (dim ``chromaticity`` = x, y).
    luminance : float or DataArray
        Y of the result (default 1).

    Returns
    -------
    DataArray
        XYZ (dim ``xyz``), Y = ``luminance``.

    Examples
    --------
    >>> import metasim
    >>> import xarray as xr
    >>> xy = xr.DataArray([0.3127, 0.3290], dims="chromaticity", coords={"chromaticity": ["x", "y"]})
    >>> metasim.xy_to_xyz(xy, luminance=100.0).round(2).values.tolist()
    [95.05, 100.0, 108.91]
    """
    _need(xy, "chromaticity", "xy")
    x = xy.sel(chromaticity="x", drop=True)
    y = xy.sel(chromaticity="y", drop=True)
    if (np.asarray(y) <= 0).any():
        raise ColorimetryError("xy with y <= 0 has no XYZ; chromaticity y must be > 0")
    big_y = x * 0 + luminance
    out = xr.concat([x * big_y / y, big_y, (1 - x - y) * big_y / y], dim="xyz").assign_coords(xyz=["X", "Y", "Z"])
    out = out.transpose(*[d for d in xy.dims if d != "chromaticity"], "xyz")
    out.attrs = {"units": "1", "long_name": "tristimulus values"}
    return out


def _lab_values(ratio: np.ndarray) -> np.ndarray:
    """CIELAB from XYZ / XYZ_white with X, Y, Z on the last axis (CIE 15:2004 §8.2.1)."""
    f = np.where(ratio > _EPSILON, np.cbrt(ratio), (_KAPPA * ratio + 16.0) / 116.0)
    fx, fy, fz = f[..., 0], f[..., 1], f[..., 2]
    return np.stack([116.0 * fy - 16.0, 500.0 * (fx - fy), 200.0 * (fy - fz)], axis=-1)



def lab_of_ratio(ratio: np.ndarray) -> np.ndarray:
    """CIELAB from XYZ / XYZ_white (X, Y, Z on the last axis), through the compiled kernel.

    One code path for every size, so a colour's CIELAB does not depend on the array it came in.
    """
    ratio = np.asarray(ratio, dtype=float)
    flat = np.ascontiguousarray(ratio.reshape(-1, 3))
    out = np.empty_like(flat)
    if flat.shape[0]:
        lab_of_ratios(flat, out)
    return out.reshape(ratio.shape)


def xyz_to_lab_array(xyz: np.ndarray, white: np.ndarray) -> np.ndarray:
    """CIELAB of numpy XYZ (..., 3) against white (..., 3) broadcast over the leading axes.

    Inputs whose white varies only along the leading axes (one white per observer, say) go to the
    compiled kernel with one white per row; anything else as the ratio XYZ / white. Same formula
    either way (CIE 15:2004); the two paths can differ in the last bit of the ratio.
    """
    xyz = np.asarray(xyz, dtype=float)
    white = np.asarray(white, dtype=float)
    if xyz.ndim >= 2 and white.ndim == xyz.ndim and white.shape[-2] == 1:
        lead = np.broadcast_shapes(xyz.shape[:-2], white.shape[:-2])
        block = np.ascontiguousarray(np.broadcast_to(xyz, (*lead, *xyz.shape[-2:]))).reshape(-1, xyz.shape[-2], 3)
        whites = np.ascontiguousarray(np.broadcast_to(white, (*lead, 1, 3))).reshape(-1, 3)
        out = np.empty_like(block)
        if block.size:
            lab_of_rows(block, whites, out)
        return out.reshape(*lead, *xyz.shape[-2:])
    return lab_of_ratio(xyz / white)


def xyz_to_lab(xyz: xr.DataArray, white: xr.DataArray) -> xr.DataArray:
    """CIELAB (dim ``lab`` = L*, a*, b*) of XYZ relative to an explicit white.

    Parameters
    ----------
    xyz : DataArray with an ``xyz`` dim.
    white : DataArray with an ``xyz`` dim, broadcast by dim name (for example one white per
        ``observer``). Same scale as ``xyz``.

    Returns
    -------
    DataArray
        CIELAB (dim ``lab`` = L*, a*, b*).

    References
    ----------
    CIE 15:2004 §8.2.1; ISO/CIE 11664-4:2019 (exact ε = 216/24389, κ = 24389/27).

    Examples
    --------
    >>> import metasim
    >>> import xarray as xr
    >>> white = xr.DataArray([95.047, 100.0, 108.883], dims="xyz", coords={"xyz": ["X", "Y", "Z"]})
    >>> round(float(metasim.xyz_to_lab(white * 0.18, white).sel(lab="L*")), 3)  # CIE 15:2004: 116 * 0.18^(1/3) - 16
    49.496
    """
    _need(xyz, "xyz", "xyz")
    _need(white, "xyz", "white")
    if (np.asarray(white) <= 0).any():
        raise ColorimetryError("the white must have X, Y, Z > 0 to define CIELAB")
    attrs = {"units": "1", "long_name": "CIELAB (CIE 1976 L*a*b*)"}
    if _aligned(xyz, white):
        # labels already agree: broadcast the bare variables by dim name, no alignment copies
        ratio = xyz.variable / white.variable
        dims = [d for d in ratio.dims if d != "xyz"]
        return labelled(lab_of_ratio(ratio.transpose(*dims, "xyz").values), (*dims, "lab"), (xyz, white),
                        labels={"lab": LAB}, attrs=attrs)
    xyz = xyz.assign_coords(xyz=["X", "Y", "Z"])
    white = white.assign_coords(xyz=["X", "Y", "Z"])
    ratio = xyz / white
    dims = [d for d in ratio.dims if d != "xyz"]
    ratio = ratio.transpose(*dims, "xyz")
    coords = {k: v for k, v in ratio.coords.items() if "xyz" not in v.dims}
    lab = xr.DataArray(lab_of_ratio(ratio.values), dims=(*dims, "lab"), coords={**coords, "lab": list(LAB)})
    lab.attrs = attrs
    return lab


def _aligned(a: xr.DataArray, b: xr.DataArray) -> bool:
    """True when ``a / b`` needs no alignment: 3 components each, shared dims of one size and shared
    coordinates identical (so xarray would neither reindex nor drop a conflicting coordinate)."""
    if a.sizes["xyz"] != 3 or b.sizes["xyz"] != 3:
        return False
    if any(a.sizes[d] != b.sizes[d] for d in set(a.dims) & set(b.dims)):
        return False
    a_coords, b_coords = a.coords.variables, b.coords.variables
    for name in set(a_coords) & set(b_coords):
        if "xyz" in a_coords[name].dims or "xyz" in b_coords[name].dims:
            continue
        if not a_coords[name].identical(b_coords[name]):
            return False
    return True


def lab_to_lch(lab: xr.DataArray) -> xr.DataArray:
    """CIE LCh(ab): lightness, chroma C*ab and hue angle h_ab in degrees [0, 360).

    Parameters
    ----------
    lab : DataArray
        CIELAB values along a ``lab`` dim.

    Returns
    -------
    DataArray
        L*, C*ab and h_ab (degrees, 0-360) along an ``lch`` dim.

    Examples
    --------
    >>> import xarray as xr
    >>> from metasim.colorimetry import lab_to_lch
    >>> lab = xr.DataArray([50.0, 0.0, 10.0], dims="lab", coords={"lab": ["L*", "a*", "b*"]})
    >>> lab_to_lch(lab).values.round(6).tolist()
    [50.0, 10.0, 90.0]
    """
    _need(lab, "lab", "lab")
    L = lab.sel(lab="L*", drop=True)
    a = lab.sel(lab="a*", drop=True)
    b = lab.sel(lab="b*", drop=True)
    out = xr.concat([L, np.hypot(a, b), np.degrees(np.arctan2(b, a)) % 360.0], dim="lch")
    out = out.assign_coords(lch=["L*", "C*ab", "h_ab"]).transpose(*[d for d in lab.dims if d != "lab"], "lch")
    out.attrs = {"units": "1 (h_ab in degrees)", "long_name": "CIE LCh(ab)"}
    return out


__all__ = ["LAB", "xyz_to_xy", "xyz_to_uv", "xy_to_xyz", "xyz_to_lab", "lab_to_lch"]
