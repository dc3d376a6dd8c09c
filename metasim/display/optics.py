"""A display as its observers see it: primary, black and white XYZ (cd/m²) as numpy values.

The integration behind drive solving, white calibration, :meth:`metasim.display.Display.observed_xyz`
and the mismatch engine: the display's primary and black spectra against observer functions, each
wavelength sum through :func:`metasim.colorimetry.integration.spectral_products` (fixed order per
element), times the grid step and K_m = 683 lm/W (CIE 15:2004).
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim.colorimetry.integration import spectral_products
from metasim.colorimetry.tristimulus import K_M, grid_of, observer_responses
from metasim.errors import DisplayError


def display_rows(display) -> np.ndarray:
    """A display's primaries and black as rows to integrate: (batch, N + 1, wavelength)."""
    batch = display.batch_dims
    variable = display.spectra.variable
    spectra = variable.transpose(*batch, "primary", "wavelength").values
    sizes = {**{d: variable.sizes[d] for d in batch}, "wavelength": variable.sizes["wavelength"]}
    black = np.asarray(display.black.variable.set_dims(sizes).values)
    n_wavelengths = spectra.shape[-1]
    return np.concatenate([spectra.reshape(-1, display.n_primaries, n_wavelengths), black.reshape(-1, 1, n_wavelengths)], axis=1)


def observer_xyz(cmf: np.ndarray, step: float, rows: np.ndarray) -> np.ndarray:
    """XYZ (cd/m²) of radiance rows (R, wavelength) for observers cmf (O, 3, wavelength): (O·3, R)."""
    n_wavelengths = cmf.shape[-1]
    return K_M * step * spectral_products(cmf.reshape(-1, n_wavelengths), rows.reshape(-1, n_wavelengths))


def display_matrices(displays, cmf: np.ndarray, step: float) -> list[tuple[np.ndarray, np.ndarray]]:
    """Observer × primary XYZ (cd/m²) of each display: (batch, observer, 3, N) and black (batch, observer, 3).

    All displays are integrated in one :func:`~metasim.colorimetry.integration.spectral_products`
    call (one pass over the observer functions).
    """
    stacks = [display_rows(display) for display in displays]
    n_wavelengths = cmf.shape[-1]
    o = cmf.shape[0]
    values = observer_xyz(cmf, step, np.concatenate([stack.reshape(-1, n_wavelengths) for stack in stacks]))
    out, start = [], 0
    for stack in stacks:
        count = stack.shape[0] * stack.shape[1]
        part = values[:, start:start + count].reshape(o, 3, stack.shape[0], stack.shape[1]).transpose(2, 0, 1, 3)
        out.append((part[..., :-1], part[..., -1]))  # (B, O, 3, N+1) split into primaries and black
        start += count
    return out


def observer_optics(display, observer: xr.Dataset):
    """One observer's functions and, in cd/m², the XYZ of a display's primaries (P, 3, N), black
    (P, 3) and white (P, 3) as numpy arrays, P the product of the batch dims (in their order).

    The same validation, products and values as :meth:`Display.primary_tristimulus`,
    :meth:`Display.black_tristimulus` and :meth:`Display.white_tristimulus` for an observer
    Dataset (variable ``cmf`` with dims ``xyz`` and ``wavelength`` only).
    """
    spectra = display.spectra
    batch = display.batch_dims
    P = int(np.prod([spectra.sizes[d] for d in batch], dtype=int))
    N = spectra.sizes["primary"]
    responses = observer_responses(observer, "xyz")
    step = grid_of(spectra, responses)
    extra = [d for d in responses.dims if d not in ("wavelength", "xyz")]
    shared = set(batch) & set(extra)
    if shared:
        raise DisplayError(f"spectra and observer functions share dims {sorted(shared)}; rename one "
                           "(only 'wavelength' may be shared)")
    if extra:
        raise DisplayError(f"the observer's functions vary along {extra}; give one observer (dims xyz, wavelength)")
    cmf = responses.variable.transpose("xyz", "wavelength").values
    W = cmf.shape[-1]
    sizes = {d: spectra.sizes[d] for d in batch}
    rows = spectra.variable.transpose(*batch, "primary", "wavelength").values.reshape(P, N, W)
    black_var = display._ds["black"].variable
    black_dims = [d for d in batch if d in black_var.dims]
    black_rows = black_var.transpose(*black_dims, "wavelength").values
    white_rows = np.asarray(black_var.set_dims({**sizes, "wavelength": W}).values).reshape(P, W) + rows.sum(axis=1)

    def xyz(values):  # as the separate tristimulus calls compute them
        return spectral_products(values.reshape(-1, W), cmf) * step * K_M

    primaries = np.swapaxes(xyz(rows).reshape(P, N, 3), -1, -2)
    black = xr.Variable((*black_dims, "xyz"), xyz(black_rows).reshape(*black_rows.shape[:-1], 3))
    black = np.asarray(black.set_dims({**sizes, "xyz": 3}).values).reshape(P, 3)
    return responses, primaries, black, xyz(white_rows)


__all__ = ["display_matrices", "display_rows", "observer_optics", "observer_xyz"]
