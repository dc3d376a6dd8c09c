"""CIE 2000 colour difference ΔE00 (CIE 142-2001 / ISO/CIE 11664-6:2014).

The formula of Sharma, Wu & Dalal (2005), with the same hue conventions as colour-science's
``delta_E_CIE2000`` (hue 0 for achromatic samples, the mean-hue rule of eq. 14): from CIELAB
pairs, a* rescaled by 1 + G, C' and h', the differences ΔL', ΔC', ΔH', the weights S_L, S_C, S_H
and the rotation term R_T,

    ΔE00 = √((ΔL'/k_L S_L)² + (ΔC'/S_C)² + (ΔH'/S_H)² + R_T (ΔC'/S_C)(ΔH'/S_H)).

It is evaluated by the compiled kernel :mod:`metasim.colorimetry._kernels.ciede2000` (a
vectorised, branch-free form of the same algebra, exact pairs recomputed step by step); results
agree with colour-science to ~1e-12.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim.colorimetry._kernels.ciede2000 import delta_e_2000_pairs
from metasim.labelling import labelled
from metasim.errors import ColorimetryError
from metasim.units import DELTA_E00


def delta_e_2000_array(lab_1, lab_2, *, k_L: float = 1.0) -> np.ndarray:
    """CIE 2000 colour difference of numpy arrays with L*, a*, b* on the last axis (broadcast).

    Parameters
    ----------
    lab_1, lab_2 : array_like
        CIELAB values, L*, a*, b* on the last axis (broadcast against each other).
    k_L : float
        Lightness weight (1 for reference conditions).

    Returns
    -------
    ndarray
        ΔE00, the broadcast shape without the last axis.

    Examples
    --------
    >>> from metasim.colorimetry import delta_e_2000_array
    >>> float(delta_e_2000_array([50.0, 2.6772, -79.7751], [50.0, 0.0, -82.7485]).round(4))  # Sharma et al. pair 1
    2.0425
    """
    a = np.asarray(lab_1, dtype=float)
    b = np.asarray(lab_2, dtype=float)
    if a.shape[-1:] != (3,) or b.shape[-1:] != (3,):
        raise ColorimetryError(
            f"CIELAB arrays need L*, a*, b* on the last axis (size 3); got shapes {a.shape} and {b.shape}"
        )
    try:
        a, b = np.broadcast_arrays(a, b)
    except ValueError:
        raise ColorimetryError(f"CIELAB shapes {a.shape} and {b.shape} do not broadcast") from None
    shape = a.shape[:-1]
    flat_a = np.ascontiguousarray(a).reshape(-1, 3)
    flat_b = np.ascontiguousarray(b).reshape(-1, 3)
    out = np.empty(flat_a.shape[0])
    delta_e_2000_pairs(flat_a, flat_b, float(k_L), out)
    return out.reshape(shape)


def _coordinates_agree(a: xr.DataArray, b: xr.DataArray) -> bool:
    """True when broadcasting ``a`` against ``b`` needs no alignment: three CIELAB components each,
    shared dims of one size, shared coordinates identical."""
    if a.sizes["lab"] != 3 or b.sizes["lab"] != 3:
        return False
    if any(a.sizes[d] != b.sizes[d] for d in set(a.dims) & set(b.dims)):
        return False
    a_coords, b_coords = a.coords.variables, b.coords.variables
    return all(a_coords[name].identical(b_coords[name]) for name in set(a_coords) & set(b_coords))


def delta_e_2000(lab_1, lab_2, *, k_L: float = 1.0):
    """CIE 2000 colour difference ΔE00, vectorised over any leading dims.

    Parameters
    ----------
    lab_1, lab_2 : array-like or DataArray
        CIELAB values: numpy arrays with L*, a*, b* on the last axis, or DataArrays with a ``lab``
        dim; broadcast against each other (by position for arrays, by dim name for DataArrays).
    k_L : float
        Lightness parametric factor (1 by default; 2 for textiles).

    Returns
    -------
    ndarray or DataArray
        ΔE00 with the broadcast shape minus the L*a*b* axis.

    References
    ----------
    CIE 142-2001 / ISO/CIE 11664-6:2014; Sharma, Wu & Dalal (2005) Color Res. Appl. 30(1) 21-30.

    Examples
    --------
    >>> import metasim
    >>> metasim.delta_e_2000([50.0, 2.6772, -79.7751], [50.0, 0.0, -82.7485]).round(4)  # Sharma et al. (2005) pair 1
    2.0425
    """
    if isinstance(lab_1, xr.DataArray) or isinstance(lab_2, xr.DataArray):
        if not (isinstance(lab_1, xr.DataArray) and isinstance(lab_2, xr.DataArray)):
            raise ColorimetryError("pass both CIELAB operands as DataArrays (dim 'lab') or both as arrays")
        for name, value in (("lab_1", lab_1), ("lab_2", lab_2)):
            if "lab" not in value.dims:
                raise ColorimetryError(f"{name} has no 'lab' dim (dims {tuple(value.dims)})")
        attrs = {"units": DELTA_E00, "long_name": "CIE 2000 colour difference", "k_L": float(k_L)}
        if _coordinates_agree(lab_1, lab_2):
            # no alignment needed: broadcast the bare variables by dim name (dims in order of
            # appearance, as xarray.broadcast orders them)
            sizes = {**dict(zip(lab_1.dims, lab_1.shape)), **dict(zip(lab_2.dims, lab_2.shape))}
            dims = [d for d in sizes if d != "lab"]
            full = {d: sizes[d] for d in (*dims, "lab")}
            values = delta_e_2000_array(lab_1.variable.set_dims(full).values, lab_2.variable.set_dims(full).values,
                                        k_L=k_L)
            return labelled(values, dims, (lab_1, lab_2), name="delta_e_2000", attrs=attrs)
        x, y = xr.broadcast(lab_1, lab_2)
        dims = [d for d in x.dims if d != "lab"]
        values = delta_e_2000_array(x.transpose(*dims, "lab").values, y.transpose(*dims, "lab").values, k_L=k_L)
        coords = {k: v for k, v in x.coords.items() if "lab" not in v.dims}
        return xr.DataArray(values, dims=dims, coords=coords, name="delta_e_2000", attrs=attrs)
    return delta_e_2000_array(lab_1, lab_2, k_L=k_L)


__all__ = ["delta_e_2000", "delta_e_2000_array"]
