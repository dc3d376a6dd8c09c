"""Display transfer functions: encoded signal ↔ displayed light, per channel.

All functions here return or take *display light in cd/m²* (the luminance a channel contributes
when driven alone, for an achromatic signal), so that one convention covers the relative SDR
curves and the absolute HDR ones:

==========  =========================================================================  ===========
name        EOTF L(V)                                                                  source
==========  =========================================================================  ===========
``srgb``    L_W · piecewise sRGB (linear below V = 0.04045, else ((V+0.055)/1.055)^2.4)  IEC 61966-2-1:1999
``gamma``   L_W · V^γ                                                                  pure power law
``linear``  L_W · V                                                                    identity
``bt1886``  a · max(V + b, 0)^2.4, a, b from L_W and L_B                               ITU-R BT.1886
``pq``      10000 · ((max(V^(1/m2) − c1, 0)) / (c2 − c3·V^(1/m2)))^(1/m1), absolute    SMPTE ST 2084
``hlg``     OOTF(inverse OETF) with black lift β, system gamma 1.2 + 0.42 log10(L_W/1000)  ITU-R BT.2100-2
==========  =========================================================================  ===========

HLG is not a per-channel curve: its OOTF scales every channel by the signal's luminance Y_S^(γ−1),
with Y_S = Σ w_i E_i. For RGB the weights are those of BT.2100 (0.2627, 0.6780, 0.0593); for a
display of N primaries metasim uses each primary's share of the white luminance (the natural
generalisation; it equals BT.2100 for a BT.2020 display). A signal without a ``primary`` dim is
treated as achromatic (R = G = B), as colour-science does for a single component.

PQ is :mod:`metasim.colorimetry.st2084` (colour-science's ST 2084 constants, one vectorised
formula shared with ICtCp). sRGB, gamma, linear and BT.1886 are a line each here, equal to
colour-science's functions (the tests compare them) and about twice as fast on large arrays. HLG
is written here: its OOTF takes a weight per primary for N-primary displays, and its b and c follow
from a by the defining formulas of BT.2100 (colour-science stores them rounded to eight digits).

References
----------
IEC 61966-2-1:1999 (sRGB); ITU-R BT.1886 (2011) Annex 1; SMPTE ST 2084:2014; ITU-R BT.2100-2
(2018) Table 5 (HLG, with the black-level lift of BT.2100-2); ARIB STD-B67 (HLG OETF constants).
"""

from __future__ import annotations

import math

import numpy as np
import xarray as xr

from metasim.colorimetry.st2084 import PQ_PEAK_LUMINANCE, pq_eotf_values, pq_inverse_eotf_values
from metasim.errors import DisplayError

TRANSFER_FUNCTIONS = ("srgb", "gamma", "linear", "bt1886", "pq", "hlg")
#: Default nominal peak (white) luminance L_W per transfer function, cd/m².
DEFAULT_PEAK_LUMINANCE = {"srgb": 80.0, "gamma": 100.0, "linear": 100.0, "bt1886": 100.0,
                          "pq": 1000.0, "hlg": 1000.0}
#: Largest white luminance metasim accepts, cd/m²: ten times the 10,000 cd/m² ceiling of SMPTE ST 2084
#: (common practice, no source). Brighter sources are outside display colorimetry; whether any
#: source is safe to look at is a question for IEC 62471 / IEC 60825-1, not for metasim.
MAX_LUMINANCE = 1e5
#: BT.2100 luminance weights of R, G, B for the HLG OOTF.
BT2100_WEIGHTS = (0.2627, 0.6780, 0.0593)

# ITU-R BT.2100 HLG constants: a as published, b = 1 - 4a, c = 0.5 - a ln(4a) (the defining formulas).
_HLG_A = 0.17883277
_HLG_B = 1.0 - 4.0 * _HLG_A
_HLG_C = 0.5 - _HLG_A * math.log(4.0 * _HLG_A)


def check_luminance(value, name: str = "luminance") -> None:
    """A white luminance in cd/m²: finite, > 0 and at most :data:`MAX_LUMINANCE`."""
    values = np.asarray(getattr(value, "values", value), dtype=float)
    if not np.isfinite(values).all() or (values <= 0).any() or (values > MAX_LUMINANCE).any():
        shown = float(values) if np.ndim(values) == 0 else values.tolist()
        raise DisplayError(f"{name}={shown!r} cd/m2 is not allowed; need a finite luminance > 0 and at most "
                           f"{MAX_LUMINANCE:g} cd/m2 (metasim computes display colorimetry, not eye safety)")


def check_transfer(transfer: str, *, gamma: float = 2.2, peak_luminance: float | None = None,
                   black_luminance: float = 0.0) -> float:
    """Validate a transfer-function name and its parameters; return the peak luminance to use."""
    if not isinstance(transfer, str) or transfer not in TRANSFER_FUNCTIONS:
        raise DisplayError(f"transfer function {transfer!r} is not known; allowed: {', '.join(TRANSFER_FUNCTIONS)}")
    if not (isinstance(gamma, (int, float, np.number)) and math.isfinite(gamma) and gamma > 0):
        raise DisplayError(f"gamma={gamma!r} is not allowed; must be a finite number > 0")
    peak = DEFAULT_PEAK_LUMINANCE[transfer] if peak_luminance is None else peak_luminance
    peak_values = np.asarray(peak, dtype=float)
    check_luminance(peak, "peak_luminance")
    if not (math.isfinite(black_luminance) and 0 <= black_luminance) or (np.asarray(black_luminance) >= peak_values).any():
        raise DisplayError(
            f"black_luminance={black_luminance!r} cd/m2 is not allowed; need 0 <= black_luminance < peak_luminance"
        )
    return peak


def _spow(x, p):
    return np.sign(x) * np.abs(x) ** p


def _hlg_gamma(peak):
    return 1.2 + 0.42 * np.log10(peak / 1000.0)


def _hlg_beta(peak, black, system_gamma):
    return np.sqrt(3.0 * (black / peak) ** (1.0 / system_gamma))


def _hlg_oetf(e):
    e = np.asarray(e, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        log_part = _HLG_A * np.log(np.maximum(12.0 * e - _HLG_B, 1e-300)) + _HLG_C
    return np.where(e <= 1.0 / 12.0, np.sqrt(3.0 * np.maximum(e, 0.0)), log_part)


def _hlg_oetf_inverse(v):
    v = np.asarray(v, dtype=float)
    return np.where(v <= 0.5, v * v / 3.0, (np.exp((v - _HLG_C) / _HLG_A) + _HLG_B) / 12.0)


def _weights(array: xr.DataArray, luminance_weights, channel_dim: str) -> xr.DataArray | None:
    if channel_dim not in array.dims:
        return None
    n = array.sizes[channel_dim]
    if luminance_weights is None:
        if n != 3:
            raise DisplayError(
                f"HLG with {n} channels needs luminance_weights (one per {channel_dim}); "
                "the BT.2100 weights apply to 3 channels only"
            )
        luminance_weights = BT2100_WEIGHTS
    if isinstance(luminance_weights, xr.DataArray):
        weights = luminance_weights
    else:
        values = np.asarray(luminance_weights, dtype=float)
        if values.shape != (n,):
            raise DisplayError(f"luminance_weights has shape {values.shape}; need one weight per {channel_dim} ({n})")
        weights = xr.DataArray(values, dims=(channel_dim,),
                               coords={channel_dim: array.coords[channel_dim]} if channel_dim in array.coords else None)
    return weights


def _as_array(value, what: str) -> xr.DataArray:
    array = value if isinstance(value, xr.DataArray) else xr.DataArray(np.asarray(value, dtype=float))
    if not np.isfinite(np.asarray(array.values, dtype=float)).all():
        raise DisplayError(f"{what} contains non-finite values; values must be finite numbers")
    return array


def eotf_values(v: np.ndarray, transfer: str, peak: float, black_luminance: float, gamma: float,
                weights: np.ndarray | None = None) -> np.ndarray:
    """:func:`eotf` on numpy values with validated float parameters (the same formulas).

    For HLG, ``weights`` broadcast against ``v`` with the channels on the last axis (None: the
    signal is achromatic, as a DataArray without a channel dim).
    """
    if transfer == "srgb":
        return peak * np.where(v <= 0.04045, v / 12.92, _spow((v + 0.055) / 1.055, 2.4))
    if transfer == "gamma":
        return peak * _spow(v, gamma)
    if transfer == "linear":
        return peak * v
    if transfer == "bt1886":
        n = peak ** (1 / 2.4) - black_luminance ** (1 / 2.4)
        return n**2.4 * np.maximum(v + black_luminance ** (1 / 2.4) / n, 0.0) ** 2.4
    if transfer == "pq":
        return pq_eotf_values(v)
    system_gamma = _hlg_gamma(peak)
    beta = _hlg_beta(peak, black_luminance, system_gamma)
    scene = _hlg_oetf_inverse(np.maximum((1 - beta) * v + beta, 0.0))
    y_s = scene if weights is None else np.nansum(scene * weights, axis=-1, keepdims=True)
    return peak * scene * np.abs(y_s) ** (system_gamma - 1.0)


def eotf_inverse_values(light: np.ndarray, transfer: str, peak: float, black_luminance: float, gamma: float,
                        weights: np.ndarray | None = None) -> np.ndarray:
    """:func:`eotf_inverse` on numpy values with validated float parameters (see :func:`eotf_values`)."""
    if transfer == "srgb":
        rel = light / peak
        return np.where(rel <= 0.0031308, rel * 12.92, 1.055 * _spow(rel, 1 / 2.4) - 0.055)
    if transfer == "gamma":
        return _spow(light / peak, 1.0 / gamma)
    if transfer == "linear":
        return light / peak
    if transfer == "bt1886":
        n = peak ** (1 / 2.4) - black_luminance ** (1 / 2.4)
        return _spow(light / n**2.4, 1 / 2.4) - black_luminance ** (1 / 2.4) / n
    if transfer == "pq":
        return pq_inverse_eotf_values(light)
    system_gamma = _hlg_gamma(peak)
    beta = _hlg_beta(peak, black_luminance, system_gamma)
    y_d = light if weights is None else np.nansum(light * weights, axis=-1, keepdims=True)
    with np.errstate(invalid="ignore", divide="ignore"):
        scene = np.where(y_d == 0, 0.0, np.abs(y_d / peak) ** ((1 - system_gamma) / system_gamma) * light / peak)
    return (_hlg_oetf(scene) - beta) / (1 - beta)


def eotf(signal, transfer: str, *, peak_luminance: float | None = None, black_luminance: float = 0.0,
         gamma: float = 2.2, luminance_weights=None, channel_dim: str = "primary") -> xr.DataArray:
    """Electro-optical transfer function: encoded signal V (0..1) → display light in cd/m².

    Parameters
    ----------
    signal : DataArray or array-like
        Non-linear signal values, nominally 0..1.
    transfer : str
        One of :data:`TRANSFER_FUNCTIONS` (see the module table).
    peak_luminance : float, optional
        Nominal white luminance L_W in cd/m² (default from :data:`DEFAULT_PEAK_LUMINANCE`);
        PQ is absolute and ignores it.
    black_luminance : float
        L_B in cd/m² for ``bt1886`` and ``hlg`` (default 0).
    gamma : float
        Exponent of the ``gamma`` curve.
    luminance_weights : sequence or DataArray, optional
        HLG only: weight of each channel in Y_S (default BT.2100 for 3 channels).
    channel_dim : str
        The channel dim for HLG (default ``primary``).

    Returns
    -------
    xarray.DataArray
        Display light in cd/m², the dims of ``signal`` (a plain array becomes an unlabelled
        DataArray), attribute ``transfer_function``.

    Raises
    ------
    DisplayError
        An unknown transfer function, a luminance or gamma not allowed, or a non-finite signal.

    References
    ----------
    IEC 61966-2-1:1999 (sRGB); ITU-R BT.1886 (2011) Annex 1; SMPTE ST 2084:2014 (PQ);
    ITU-R BT.2100-2 (2018) Table 5 (HLG).

    Examples
    --------
    >>> from metasim.display import eotf
    >>> eotf([0.0, 0.5, 1.0], "srgb", peak_luminance=100.0).round(3).values.tolist()  # IEC 61966-2-1
    [0.0, 21.404, 100.0]
    >>> eotf([0.5081], "pq").round(1).values.tolist()  # SMPTE ST 2084: absolute, 100 cd/m²
    [100.0]
    """
    peak = check_transfer(transfer, gamma=gamma, peak_luminance=peak_luminance, black_luminance=black_luminance)
    v = _as_array(signal, "signal")
    if transfer != "hlg":
        light = xr.apply_ufunc(lambda values, p: eotf_values(values, transfer, p, black_luminance, gamma), v, peak)
    else:
        system_gamma = _hlg_gamma(peak)
        beta = _hlg_beta(peak, black_luminance, system_gamma)
        scene = xr.apply_ufunc(_hlg_oetf_inverse, np.maximum((1 - beta) * v + beta, 0.0))
        weights = _weights(scene, luminance_weights, channel_dim)
        y_s = scene if weights is None else (scene * weights).sum(channel_dim)
        light = peak * scene * np.abs(y_s) ** (system_gamma - 1.0)
    light = light.transpose(*v.dims) if isinstance(light, xr.DataArray) else light
    light.attrs = {"units": "cd m-2", "long_name": f"display light ({transfer} EOTF)", "transfer_function": transfer}
    return light


def eotf_inverse(light, transfer: str, *, peak_luminance: float | None = None, black_luminance: float = 0.0,
                 gamma: float = 2.2, luminance_weights=None, channel_dim: str = "primary") -> xr.DataArray:
    """Inverse EOTF: display light in cd/m² → encoded signal V; parameters as :func:`eotf`.

    Parameters
    ----------
    light : xarray.DataArray or array_like
        Display light in cd/m².
    transfer : str
        One of :data:`TRANSFER_FUNCTIONS`.
    peak_luminance : float, optional
        Nominal white luminance L_W in cd/m² (default from :data:`DEFAULT_PEAK_LUMINANCE`; PQ
        ignores it).
    black_luminance : float
        L_B in cd/m² for ``bt1886`` and ``hlg``.
    gamma : float
        Exponent of the ``gamma`` curve.
    luminance_weights : sequence or xarray.DataArray, optional
        HLG only: weight of each channel (default BT.2100 for 3 channels).
    channel_dim : str
        The channel dim for HLG.

    Returns
    -------
    xarray.DataArray
        The encoded signal V (unit 1), the dims of ``light``, attribute ``transfer_function``.

    Raises
    ------
    DisplayError
        An unknown transfer function, a luminance or gamma not allowed, or non-finite light.

    References
    ----------
    IEC 61966-2-1:1999 (sRGB); ITU-R BT.1886 (2011) Annex 1; SMPTE ST 2084:2014 (PQ);
    ITU-R BT.2100-2 (2018) Table 5 (HLG).

    Examples
    --------
    >>> from metasim.display import eotf_inverse
    >>> eotf_inverse([100.0], "pq").round(4).values.tolist()  # SMPTE ST 2084
    [0.5081]
    >>> eotf_inverse([21.404], "srgb", peak_luminance=100.0).round(4).values.tolist()
    [0.5]
    """
    peak = check_transfer(transfer, gamma=gamma, peak_luminance=peak_luminance, black_luminance=black_luminance)
    lum = _as_array(light, "light")
    if transfer != "hlg":
        signal = xr.apply_ufunc(lambda values, p: eotf_inverse_values(values, transfer, p, black_luminance, gamma),
                                lum, peak)
    else:
        system_gamma = _hlg_gamma(peak)
        beta = _hlg_beta(peak, black_luminance, system_gamma)
        weights = _weights(lum, luminance_weights, channel_dim)
        y_d = lum if weights is None else (lum * weights).sum(channel_dim)
        with np.errstate(invalid="ignore", divide="ignore"):
            scene = xr.where(y_d == 0, 0.0, np.abs(y_d / peak) ** ((1 - system_gamma) / system_gamma) * lum / peak)
        signal = (xr.apply_ufunc(_hlg_oetf, scene) - beta) / (1 - beta)
    signal = signal.transpose(*lum.dims) if isinstance(signal, xr.DataArray) else signal
    signal.attrs = {"units": "1", "long_name": f"encoded signal ({transfer})", "transfer_function": transfer}
    return signal


__all__ = ["TRANSFER_FUNCTIONS", "DEFAULT_PEAK_LUMINANCE", "MAX_LUMINANCE", "check_luminance",
           "BT2100_WEIGHTS", "PQ_PEAK_LUMINANCE", "check_transfer", "eotf", "eotf_inverse", "eotf_values", "eotf_inverse_values"]
