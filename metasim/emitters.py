"""Parametric and measured subpixel emission spectra.

Every function returns a DataArray with dims ``primary`` × ``wavelength`` (one row per primary,
named by ``name``) in spectral radiance, W·sr⁻¹·m⁻²·nm⁻¹ (:data:`metasim.spectra.RADIANCE_UNITS`).
Shape parameters (``peak_nm``, ``fwhm_nm``, ...) may be scalars or equal-length sequences; a
sequence gives one primary per entry.

Scaling: ``relative_power`` (the keyword a spec's ``relative_power`` key reaches; it was
``radiance`` before, still accepted for one release with a warning) sets each primary's power
relative to the others. ``normalise="total"`` (default) scales each primary so that its integrated
radiance (rectangle rule, Σ S·Δλ) equals ``relative_power`` in W·sr⁻¹·m⁻²; ``normalise="peak"``
makes the largest sample equal ``relative_power`` in W·sr⁻¹·m⁻²·nm⁻¹; ``normalise="none"``
multiplies the model's own shape by ``relative_power`` (a laser line's profile has unit area on the real line, so its
grid integral shows exactly what the grid keeps; the other shapes peak at 1). Display calibration
(:func:`metasim.display.calibrate_white`) rescales primaries afterwards, so the absolute level
here only matters for uncalibrated designs.

Energy outside the grid: every parametric emitter computes the share of its model's energy that
falls outside the wavelength grid; more than 1 % is an error naming the primary, its peak and the
share lost, unless ``allow_outside_grid=True`` (then a warning states the share) — the rule measured
files follow too (:func:`metasim.spectra.check_energy_on_grid`). A 200 nm or 835 nm line on the
390-830 nm grid is therefore refused instead of becoming a rescaled comb or an 830 nm line.

Layer: imports only :mod:`metasim.spectra` and the utilities :mod:`metasim.errors` and :mod:`metasim.checks`.
"""

from __future__ import annotations

import math
import os
from typing import Sequence

import numpy as np
import xarray as xr
from scipy.special import erf, ndtr

from metasim.checks import renamed_keywords
from metasim.errors import SpectrumError
from metasim.spectra import (
    RADIANCE_UNITS,
    WAVELENGTH_ATTRS,
    check_energy_on_grid,
    check_spectra,
    check_wavelengths,
    default_grid,
    read_spectra_csv,
    require_same_grid,
)
from metasim.spectra.convert import as_spectra

NORMALISATIONS = ("total", "peak", "none")
LINE_PROFILES = ("gaussian", "lorentzian")
_FWHM_TO_SIGMA = 1.0 / (2.0 * math.sqrt(2.0 * math.log(2.0)))


# ----------------------------------------------------------------------------------------------
# helpers
# ----------------------------------------------------------------------------------------------


def _grid(wavelengths) -> np.ndarray:
    grid = default_grid() if wavelengths is None else wavelengths
    values = check_wavelengths(grid, where="emitter grid", uniform=True)
    return values


def _parameters(where: str, **values) -> tuple[int, dict[str, np.ndarray]]:
    """Broadcast scalar / sequence parameters to one value per primary, checking each is finite."""
    arrays = {k: np.atleast_1d(np.asarray(v, dtype=float)) for k, v in values.items()}
    sizes = {a.size for a in arrays.values() if a.size != 1}
    if len(sizes) > 1:
        text = ", ".join(f"{k} has {a.size}" for k, a in arrays.items())
        raise SpectrumError(f"{where}: parameter lengths differ ({text}); give scalars or equal-length sequences")
    count = sizes.pop() if sizes else 1
    out = {}
    for key, array in arrays.items():
        if array.ndim != 1:
            raise SpectrumError(f"{where}: {key} must be a scalar or a 1-D sequence, got shape {array.shape}")
        if not np.isfinite(array).all():
            raise SpectrumError(f"{where}: {key}={array.tolist()} must be finite")
        out[key] = np.broadcast_to(array, (count,)).copy()
    return count, out


def _positive(where: str, **values) -> None:
    for key, array in values.items():
        bad = np.asarray(array) <= 0
        if bad.any():
            raise SpectrumError(f"{where}: {key}={float(np.asarray(array)[bad][0]):g} is not allowed; must be > 0")


def _labels(name, count: int, default: Sequence[str]) -> list[str]:
    if name is None:
        labels = list(default)
    elif isinstance(name, str):
        labels = [name] if count == 1 else [f"{name} {i}" for i in range(count)]
    else:
        labels = [str(n) for n in name]
    if len(labels) != count:
        raise SpectrumError(f"name: {len(labels)} labels for {count} primaries; give one label per primary")
    if len(set(labels)) != len(labels):
        raise SpectrumError(f"name: primary labels {labels} repeat; labels must be unique")
    return labels


def _peak_details(peaks, widths, width_name: str) -> list[str]:
    return [f" (peak {p:g} nm, {width_name} {w:g} nm)" for p, w in zip(np.atleast_1d(peaks), np.atleast_1d(widths))]


def _gaussian_inside(lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Share of a unit normal distribution between the standard scores ``lo`` and ``hi``."""
    return np.clip(ndtr(hi) - ndtr(lo), 0.0, 1.0)


def _finish(values: np.ndarray, wl: np.ndarray, labels, *, relative_power, normalise: str, long_name: str,
            model: str, lost=None, details=None, allow_outside_grid: bool = False, where: str = "emitter",
            **attrs) -> xr.DataArray:
    if normalise not in NORMALISATIONS:
        raise SpectrumError(f"normalise={normalise!r} is not known; allowed: {', '.join(NORMALISATIONS)}")
    if lost is not None:  # share of each model spectrum's energy outside the grid: the one rule
        check_energy_on_grid(lost, labels, wl, where=where, allow=allow_outside_grid, details=details)
    power = np.broadcast_to(np.asarray(relative_power, dtype=float), (values.shape[0],))
    if not np.isfinite(power).all() or (power < 0).any():
        raise SpectrumError(f"relative_power={power.tolist()} is not allowed; must be finite and >= 0")
    step = float(wl[1] - wl[0])
    if normalise == "total":
        reference = values.sum(axis=-1) * step
    elif normalise == "peak":
        reference = values.max(axis=-1)
    else:
        reference = np.where(values.max(axis=-1) > 0, 1.0, 0.0)
    if (reference <= 0).any():
        i = int(np.argmax(reference <= 0))
        raise SpectrumError(
            f"{labels[i]}: no emission on the grid {wl[0]:g}-{wl[-1]:g} nm; move the peak inside the grid"
        )
    data = values * (power / reference)[:, None]
    array = xr.DataArray(
        data,
        dims=("primary", "wavelength"),
        coords={"primary": list(labels), "wavelength": ("wavelength", wl, dict(WAVELENGTH_ATTRS))},
        attrs={"units": RADIANCE_UNITS, "long_name": long_name, "model": model,
               "normalise": normalise, **attrs},
        name="spectra",
    )
    return check_spectra(array, where=long_name)


# ----------------------------------------------------------------------------------------------
# line and band shapes
# ----------------------------------------------------------------------------------------------


def _second_antiderivative(x: np.ndarray, centre: np.ndarray, width: np.ndarray, profile: str) -> np.ndarray:
    """G with G'' = the unit-area line profile (G(x) = ∫ CDF); width is σ or the Lorentz half-width γ."""
    u = (x - centre) / width
    if profile == "gaussian":
        cdf = 0.5 * (1.0 + erf(u / math.sqrt(2.0)))
        pdf = np.exp(-0.5 * u * u) / math.sqrt(2.0 * math.pi)
        return width * (u * cdf + pdf)
    return width * (0.5 * u + (u * np.arctan(u) - 0.5 * np.log1p(u * u)) / math.pi)


@renamed_keywords(radiance="relative_power")
def laser_line(
    peak_nm,
    linewidth_nm=0.1,
    wavelengths=None,
    *,
    profile: str = "gaussian",
    relative_power=1.0,
    normalise: str = "total",
    name=None,
    allow_outside_grid: bool = False,
) -> xr.DataArray:
    """Laser line(s) of a given full width at half maximum, integrated over the grid.

    The line profile (Gaussian, or Lorentzian for a homogeneously broadened line) is integrated
    analytically against the piecewise-linear "hat" basis of the grid: sample ``j`` receives
    ``∫ p(λ)·max(0, 1 − |λ − λ_j|/Δλ) dλ / Δλ``. Because the hat functions sum to one and
    reproduce linear functions exactly, the rectangle-rule energy *and* centroid of the sampled
    line equal those of the continuous line, however narrow it is (a 0.1 nm line on a 1 nm grid
    keeps both). A Lorentzian's tails beyond the grid are cut off; ``normalise`` then rescales.

    Parameters
    ----------
    peak_nm : float or sequence
        Line centre(s), nm, > 0.
    linewidth_nm : float or sequence
        Full width at half maximum, nm, > 0.
    wavelengths : array-like, optional
        Uniform grid, nm (default 390-830 nm at 1 nm).
    profile : {"gaussian", "lorentzian"}
        Line shape.
    relative_power : float or sequence
        Power of each primary relative to the others, >= 0 (see the module docstring; was
        ``radiance``, still accepted for one release with a warning).
    normalise : {"total", "peak", "none"}
        What ``relative_power`` sets: the integral over the grid, the largest sample, or a factor on
        the model's own shape.
    name : str or sequence of str, optional
        Primary label(s); a single string for several primaries is numbered. Default: the model
        and peak (e.g. ``"laser 532 nm"``).
    allow_outside_grid : bool
        Accept, with a warning, a primary that loses more than 1 % of its energy outside the grid
        (an error otherwise); the share lost is 1 − the grid integral of the unit-area line.

    Returns
    -------
    xarray.DataArray
        ``primary`` × ``wavelength`` spectral radiance (W·sr⁻¹·m⁻²·nm⁻¹), with the model and its
        parameters as attributes.

    Raises
    ------
    metasim.errors.SpectrumError
        A non-finite or non-positive peak or line width, sequences of different lengths, an unknown
        ``normalise`` or ``profile``, a non-uniform grid, no emission on the grid, or more than 1 % of the
        energy outside the grid (unless ``allow_outside_grid``).

    References
    ----------
    Siegman, *Lasers* (1986), ch. 2-3 (Lorentzian and Gaussian line shapes); the hat-function
    projection is the linear finite-element (cloud-in-cell) weighting — common practice, no source.

    Examples
    --------
    A 0.5 nm green line on the 1 nm grid keeps its energy and its centroid:

    >>> lines = laser_line([450, 532], [1.0, 0.5], name=["B", "G"])
    >>> dict(lines.sizes), lines.sum("wavelength").values.round(9).tolist()
    ({'primary': 2, 'wavelength': 441}, [1.0, 1.0])
    >>> green = lines.sel(primary="G")
    >>> round(float((green.wavelength * green).sum() / green.sum()), 6)
    532.0
    """
    if profile not in LINE_PROFILES:
        raise SpectrumError(f"profile={profile!r} is not known; allowed: {', '.join(LINE_PROFILES)}")
    wl = _grid(wavelengths)
    step = float(wl[1] - wl[0])
    count, p = _parameters("laser_line", peak_nm=peak_nm, linewidth_nm=linewidth_nm)
    _positive("laser_line", peak_nm=p["peak_nm"], linewidth_nm=p["linewidth_nm"])
    width = p["linewidth_nm"] * (_FWHM_TO_SIGMA if profile == "gaussian" else 0.5)
    centre = p["peak_nm"][:, None]
    width = width[:, None]
    nodes = wl[None, :]
    second = (_second_antiderivative(nodes + step, centre, width, profile)
              - 2.0 * _second_antiderivative(nodes, centre, width, profile)
              + _second_antiderivative(nodes - step, centre, width, profile))
    values = np.clip(second / (step * step), 0.0, None)
    labels = _labels(name, count, [f"laser {c:g} nm" for c in p["peak_nm"]])
    return _finish(values, wl, labels, relative_power=relative_power, normalise=normalise, long_name="spectral radiance",
                   lost=1.0 - values.sum(axis=-1) * step, where="laser_line", allow_outside_grid=allow_outside_grid,
                   details=_peak_details(p["peak_nm"], p["linewidth_nm"], "line width"),
                   model=f"laser line, {profile} profile integrated over the grid's hat functions",
                   peak_nm=p["peak_nm"].tolist(), linewidth_nm=p["linewidth_nm"].tolist())


@renamed_keywords(radiance="relative_power")
def gaussian(peak_nm, fwhm_nm, wavelengths=None, *, relative_power=1.0, normalise: str = "total", name=None,
             allow_outside_grid: bool = False) -> xr.DataArray:
    """Gaussian band(s) in wavelength, sampled at the grid points.

    ``S(λ) ∝ exp(−(λ − peak)² / (2σ²))`` with ``σ = fwhm / (2√(2 ln 2))`` — the same shape as
    colour-science's ``sd_gaussian_fwhm``. Point sampling suits bands several grid steps wide;
    for lines narrower than about two steps use :func:`laser_line`, which integrates over the grid.

    Parameters
    ----------
    peak_nm : float or sequence
        Peak wavelength(s), nm, > 0.
    fwhm_nm : float or sequence
        Full width at half maximum, nm, > 0.
    wavelengths : array-like, optional
        Uniform grid, nm (default 390-830 nm at 1 nm).
    relative_power : float or sequence
        Power of each primary relative to the others, >= 0 (see the module docstring; was
        ``radiance``, still accepted for one release with a warning).
    normalise : {"total", "peak", "none"}
        What ``relative_power`` sets: the integral over the grid, the largest sample, or a factor on
        the model's own shape.
    name : str or sequence of str, optional
        Primary label(s); a single string for several primaries is numbered. Default: the model
        and peak (e.g. ``"gaussian 530 nm"``).
    allow_outside_grid : bool
        Accept, with a warning, a primary that loses more than 1 % of its energy outside the grid
        (an error otherwise).

    Returns
    -------
    xarray.DataArray
        ``primary`` × ``wavelength`` spectral radiance (W·sr⁻¹·m⁻²·nm⁻¹), with the model and its
        parameters as attributes.

    Raises
    ------
    metasim.errors.SpectrumError
        A non-finite or non-positive peak or width, sequences of different lengths, an unknown
        ``normalise``, a non-uniform grid, no emission on the grid, or more than 1 % of the
        energy outside the grid (unless ``allow_outside_grid``).

    References
    ----------
    Common practice, no source (the normal distribution expressed by its full width at half maximum).

    Examples
    --------
    >>> band = gaussian(530, 30, relative_power=2.0)
    >>> band.primary.values.tolist(), float(band.sum().round(9)), float(band.idxmax("wavelength")[0])
    (['gaussian 530 nm'], 2.0, 530.0)
    >>> import colour  # the same shape as colour-science's
    >>> shape = colour.colorimetry.sd_gaussian_fwhm(530, 30, shape=colour.SpectralShape(390, 830, 1)).values
    >>> bool(abs(2.0 * shape / shape.sum() - band.values[0]).max() < 1e-12)
    True
    """
    wl = _grid(wavelengths)
    count, p = _parameters("gaussian", peak_nm=peak_nm, fwhm_nm=fwhm_nm)
    _positive("gaussian", peak_nm=p["peak_nm"], fwhm_nm=p["fwhm_nm"])
    sigma = p["fwhm_nm"][:, None] * _FWHM_TO_SIGMA
    values = np.exp(-((wl[None, :] - p["peak_nm"][:, None]) ** 2) / (2.0 * sigma**2))
    labels = _labels(name, count, [f"gaussian {c:g} nm" for c in p["peak_nm"]])
    inside = _gaussian_inside((wl[0] - p["peak_nm"]) / sigma[:, 0], (wl[-1] - p["peak_nm"]) / sigma[:, 0])
    return _finish(values, wl, labels, relative_power=relative_power, normalise=normalise, long_name="spectral radiance",
                   lost=1.0 - inside, where="gaussian", allow_outside_grid=allow_outside_grid,
                   details=_peak_details(p["peak_nm"], p["fwhm_nm"], "FWHM"),
                   model="Gaussian band in wavelength", peak_nm=p["peak_nm"].tolist(), fwhm_nm=p["fwhm_nm"].tolist())


@renamed_keywords(radiance="relative_power")
def ohno_led(
    peak_nm,
    half_spectral_width_nm,
    wavelengths=None,
    *,
    long_side_half_spectral_width_nm=None,
    relative_power=1.0,
    normalise: str = "total",
    name=None,
    allow_outside_grid: bool = False,
) -> xr.DataArray:
    """Single-colour LED spectrum of Ohno (2005).

    ``g(λ) = exp(−((λ − λ0)/Δλ0.5)²)``, ``S(λ) = (g + 2·g⁵) / 3`` (peak 1 before scaling), with
    ``Δλ0.5`` the half spectral width of the paper (the full width at half maximum of S is about
    1.29·Δλ0.5). Identical to colour-science's ``sd_single_led_Ohno2005``.

    ``long_side_half_spectral_width_nm`` (metasim's extension, default: equal to
    ``half_spectral_width_nm``) uses a different width for λ > λ0, giving the red-skewed shape of
    many real LEDs while keeping the peak at λ0.

    Parameters
    ----------
    peak_nm : float or sequence
        Peak wavelength(s) λ0, nm, > 0.
    half_spectral_width_nm : float or sequence
        Ohno's half spectral width Δλ0.5, nm, > 0 (the short side when the sides differ).
    wavelengths : array-like, optional
        Uniform grid, nm (default 390-830 nm at 1 nm).
    long_side_half_spectral_width_nm : float or sequence, optional
        Width for λ > λ0, nm, > 0 (default: ``half_spectral_width_nm``).
    relative_power : float or sequence
        Power of each primary relative to the others, >= 0 (see the module docstring; was
        ``radiance``, still accepted for one release with a warning).
    normalise : {"total", "peak", "none"}
        What ``relative_power`` sets: the integral over the grid, the largest sample, or a factor on
        the model's own shape.
    name : str or sequence of str, optional
        Primary label(s); a single string for several primaries is numbered. Default: the model
        and peak (e.g. ``"LED 630 nm"``).
    allow_outside_grid : bool
        Accept, with a warning, a primary that loses more than 1 % of its energy outside the grid
        (an error otherwise).

    Returns
    -------
    xarray.DataArray
        ``primary`` × ``wavelength`` spectral radiance (W·sr⁻¹·m⁻²·nm⁻¹), with the model and its
        parameters as attributes.

    Raises
    ------
    metasim.errors.SpectrumError
        A non-finite or non-positive peak or width, sequences of different lengths, an unknown
        ``normalise``, a non-uniform grid, no emission on the grid, or more than 1 % of the
        energy outside the grid (unless ``allow_outside_grid``).

    References
    ----------
    Ohno, Y. (2005) Spectral design considerations for white LED color rendering. Optical
    Engineering 44(11), 111302; Ohno, Y. (2008) NIST CQS simulation.

    Examples
    --------
    >>> led = ohno_led(630, 15)
    >>> led.primary.values.tolist(), float(led.idxmax("wavelength")[0]), led.attrs["model"]
    (['LED 630 nm'], 630.0, 'Ohno (2005) LED')
    >>> skewed = ohno_led(630, 12, long_side_half_spectral_width_nm=18)
    >>> bool(skewed.sel(wavelength=645).item() > skewed.sel(wavelength=615).item())  # a longer red side
    True
    """
    wl = _grid(wavelengths)
    long_side = half_spectral_width_nm if long_side_half_spectral_width_nm is None else long_side_half_spectral_width_nm
    count, p = _parameters("ohno_led", peak_nm=peak_nm, half_spectral_width_nm=half_spectral_width_nm,
                           long_side_half_spectral_width_nm=long_side)
    _positive("ohno_led", **p)
    centre = p["peak_nm"][:, None]
    width = np.where(wl[None, :] > centre, p["long_side_half_spectral_width_nm"][:, None],
                     p["half_spectral_width_nm"][:, None])
    g = np.exp(-(((wl[None, :] - centre) / width) ** 2))
    values = (g + 2.0 * g**5) / 3.0
    labels = _labels(name, count, [f"LED {c:g} nm" for c in p["peak_nm"]])
    lost = 1.0 - _ohno_inside(wl[0], wl[-1], p["peak_nm"], p["half_spectral_width_nm"],
                              p["long_side_half_spectral_width_nm"])
    return _finish(values, wl, labels, relative_power=relative_power, normalise=normalise, long_name="spectral radiance",
                   lost=lost, where="ohno_led", allow_outside_grid=allow_outside_grid,
                   details=_peak_details(p["peak_nm"], p["half_spectral_width_nm"], "half spectral width"),
                   model="Ohno (2005) LED", peak_nm=p["peak_nm"].tolist(),
                   half_spectral_width_nm=p["half_spectral_width_nm"].tolist(),
                   long_side_half_spectral_width_nm=p["long_side_half_spectral_width_nm"].tolist())


def _ohno_inside(lo: float, hi: float, centre: np.ndarray, short: np.ndarray, long: np.ndarray) -> np.ndarray:
    """Share of an Ohno (2005) LED's energy between ``lo`` and ``hi`` nm (analytic).

    Each side of the peak is (g + 2 g⁵)/3 with g = exp(−(u/w)²): Gaussians of standard deviation
    w/√2 and w/√10, weighted by their areas w√π·(1 and 2/√5)/3 per full line, halved per side.
    """
    def side(a, b, w):  # ∫_a^b (g + 2 g⁵)/3 du for one side's width w, a <= b
        one = w * math.sqrt(math.pi) / 2 * (erf(b / w) - erf(a / w))
        five = w / math.sqrt(5) * math.sqrt(math.pi) / 2 * (erf(b * math.sqrt(5) / w) - erf(a * math.sqrt(5) / w))
        return (one + 2 * five) / 3

    a, b = lo - centre, hi - centre
    left = side(np.minimum(a, 0.0), np.minimum(b, 0.0), short)
    right = side(np.maximum(a, 0.0), np.maximum(b, 0.0), long)
    total = side(-np.inf, 0.0, short) + side(0.0, np.inf, long)
    return np.clip((left + right) / total, 0.0, 1.0)


def _energy_gaussian(wl: np.ndarray, peak_nm: np.ndarray, fwhm_nm: np.ndarray) -> np.ndarray:
    """Band Gaussian in wavenumber ν = 1/λ, as spectral radiance per nm, peaking at ``peak_nm``."""
    nu = 1.0 / wl[None, :]
    nu_peak = 1.0 / peak_nm[:, None]
    sigma = (fwhm_nm[:, None] / peak_nm[:, None] ** 2) * _FWHM_TO_SIGMA  # |dν/dλ| = 1/λ²
    nu_centre = nu_peak - 2.0 * sigma**2 / nu_peak  # puts the per-nm maximum exactly at peak_nm
    return np.exp(-((nu - nu_centre) ** 2) / (2.0 * sigma**2)) * nu**2


def _energy_gaussian_inside(lo: float, hi: float, peak_nm: np.ndarray, fwhm_nm: np.ndarray) -> np.ndarray:
    """Share of a :func:`quantum_dot` band's energy between ``lo`` and ``hi`` nm: a normal
    distribution in wavenumber (∫ S dλ = ∫ exp(−(ν − ν_c)²/(2σ²)) dν)."""
    sigma = (fwhm_nm / peak_nm**2) * _FWHM_TO_SIGMA
    nu_centre = 1.0 / peak_nm - 2.0 * sigma**2 * peak_nm
    return _gaussian_inside((1.0 / hi - nu_centre) / sigma, (1.0 / lo - nu_centre) / sigma)


@renamed_keywords(radiance="relative_power")
def quantum_dot(peak_nm, fwhm_nm, wavelengths=None, *, relative_power=1.0, normalise: str = "total", name=None,
                allow_outside_grid: bool = False) -> xr.DataArray:
    """Quantum-dot emission peak(s): a Gaussian in photon energy, expressed per nm.

    The emission of a quantum-dot ensemble is broadened mainly by the spread of dot sizes, which
    gives a near-Gaussian line in photon energy E = hc/λ (equivalently in wavenumber ν = 1/λ).
    Model: ``S(λ) ∝ exp(−(ν − ν_c)²/(2σ_ν²)) · ν²`` (the ν² = |dν/dλ| converts per-wavenumber to
    per-nm), with ``σ_ν = fwhm_nm / peak_nm² / (2√(2 ln 2))`` and ``ν_c = ν_p − 2σ_ν²/ν_p``, chosen
    so that the per-nm spectrum peaks exactly at ``peak_nm``. The FWHM in nm equals ``fwhm_nm`` to
    first order in fwhm/peak; the shape has the slight red tail of measured QD spectra.

    Parameters
    ----------
    peak_nm : float or sequence
        Peak wavelength(s) of the per-nm spectrum, nm, > 0.
    fwhm_nm : float or sequence
        Full width at half maximum, nm, > 0 (to first order in fwhm/peak).
    wavelengths : array-like, optional
        Uniform grid, nm (default 390-830 nm at 1 nm).
    relative_power : float or sequence
        Power of each primary relative to the others, >= 0 (see the module docstring; was
        ``radiance``, still accepted for one release with a warning).
    normalise : {"total", "peak", "none"}
        What ``relative_power`` sets: the integral over the grid, the largest sample, or a factor on
        the model's own shape.
    name : str or sequence of str, optional
        Primary label(s); a single string for several primaries is numbered. Default: the model
        and peak (e.g. ``"QD 530 nm"``).
    allow_outside_grid : bool
        Accept, with a warning, a primary that loses more than 1 % of its energy outside the grid
        (an error otherwise).

    Returns
    -------
    xarray.DataArray
        ``primary`` × ``wavelength`` spectral radiance (W·sr⁻¹·m⁻²·nm⁻¹), with the model and its
        parameters as attributes.

    Raises
    ------
    metasim.errors.SpectrumError
        A non-finite or non-positive peak or width, sequences of different lengths, an unknown
        ``normalise``, a non-uniform grid, no emission on the grid, or more than 1 % of the
        energy outside the grid (unless ``allow_outside_grid``).

    References
    ----------
    Common practice, no source (inhomogeneous size broadening of an ensemble of emitters: a
    Gaussian in energy).

    Examples
    --------
    >>> dots = quantum_dot([530, 630], [25, 30])
    >>> dots.primary.values.tolist(), dots.idxmax("wavelength").values.tolist()
    (['QD 530 nm', 'QD 630 nm'], [530.0, 630.0])
    """
    wl = _grid(wavelengths)
    count, p = _parameters("quantum_dot", peak_nm=peak_nm, fwhm_nm=fwhm_nm)
    _positive("quantum_dot", **p)
    values = _energy_gaussian(wl, p["peak_nm"], p["fwhm_nm"])
    labels = _labels(name, count, [f"QD {c:g} nm" for c in p["peak_nm"]])
    return _finish(values, wl, labels, relative_power=relative_power, normalise=normalise, long_name="spectral radiance",
                   lost=1.0 - _energy_gaussian_inside(wl[0], wl[-1], p["peak_nm"], p["fwhm_nm"]), where="quantum_dot",
                   allow_outside_grid=allow_outside_grid, details=_peak_details(p["peak_nm"], p["fwhm_nm"], "FWHM"),
                   model="quantum dot: Gaussian in photon energy", peak_nm=p["peak_nm"].tolist(),
                   fwhm_nm=p["fwhm_nm"].tolist())


@renamed_keywords(radiance="relative_power", phosphor_to_pump="phosphor_pump_ratio")
def phosphor_white_led(
    wavelengths=None,
    *,
    pump_peak_nm: float = 450.0,
    pump_half_spectral_width_nm: float = 14.0,
    phosphor_peak_nm: float = 560.0,
    phosphor_fwhm_nm: float = 120.0,
    phosphor_pump_ratio: float = 2.5,
    relative_power=1.0,
    normalise: str = "total",
    name: str = "white LED",
    allow_outside_grid: bool = False,
) -> xr.DataArray:
    """Phosphor-converted white LED: a blue pump plus a broad phosphor band (one primary).

    Pump: the Ohno (2005) LED shape (:func:`ohno_led`). Phosphor: a broad Gaussian in photon
    energy (the :func:`quantum_dot` shape), which reproduces the long red tail of Ce:YAG-type
    phosphors. ``phosphor_pump_ratio`` is the ratio of integrated phosphor to pump radiance (larger
    gives a warmer white). Multiply by colour filters with :func:`filtered_primaries`.

    Parameters
    ----------
    wavelengths : array-like, optional
        Uniform grid, nm (default 390-830 nm at 1 nm).
    pump_peak_nm, pump_half_spectral_width_nm : float
        The pump's peak and Ohno half spectral width, nm, > 0.
    phosphor_peak_nm, phosphor_fwhm_nm : float
        The phosphor band's peak and full width at half maximum, nm, > 0.
    phosphor_pump_ratio : float
        Integrated phosphor over integrated pump radiance, finite and >= 0 (was
        ``phosphor_to_pump``, still accepted for one release with a warning).
    relative_power : float
        Power of the white relative to other primaries, >= 0 (see the module docstring; was
        ``radiance``).
    normalise : {"total", "peak", "none"}
        What ``relative_power`` sets (module docstring).
    name : str
        The primary's label.
    allow_outside_grid : bool
        Accept, with a warning, a pump or phosphor band that loses more than 1 % of its energy
        outside the grid (an error otherwise).

    Returns
    -------
    xarray.DataArray
        ``primary`` (one) × ``wavelength`` spectral radiance (W·sr⁻¹·m⁻²·nm⁻¹), with the model and its
        parameters as attributes.

    Raises
    ------
    metasim.errors.SpectrumError
        A non-finite or non-positive width or peak, a negative or non-finite ``phosphor_pump_ratio``, sequences of different lengths, an unknown
        ``normalise``, a non-uniform grid, no emission on the grid, or more than 1 % of the
        energy outside the grid (unless ``allow_outside_grid``).

    References
    ----------
    Ohno (2005) Optical Engineering 44(11) 111302 (pump shape); the phosphor band shape is common
    practice, no source.

    Examples
    --------
    >>> white = phosphor_white_led(phosphor_pump_ratio=3.0)
    >>> white.primary.values.tolist(), white.attrs["phosphor_pump_ratio"], float(white.sum().round(9))
    (['white LED'], 3.0, 1.0)
    """
    wl = _grid(wavelengths)
    if not (math.isfinite(phosphor_pump_ratio) and phosphor_pump_ratio >= 0):
        raise SpectrumError(f"phosphor_pump_ratio={phosphor_pump_ratio!r} is not allowed; must be finite and >= 0")
    pump = ohno_led(pump_peak_nm, pump_half_spectral_width_nm, wl, name=f"{name} pump",
                    allow_outside_grid=allow_outside_grid).values[0]
    phosphor = quantum_dot(phosphor_peak_nm, phosphor_fwhm_nm, wl, name=f"{name} phosphor",
                           allow_outside_grid=allow_outside_grid).values[0]  # each integrates to 1
    values = (pump + phosphor_pump_ratio * phosphor)[None, :]
    return _finish(values, wl, [name], relative_power=relative_power, normalise=normalise, long_name="spectral radiance",
                   model="phosphor-converted white LED (Ohno pump + energy-Gaussian phosphor)",
                   pump_peak_nm=float(pump_peak_nm), pump_half_spectral_width_nm=float(pump_half_spectral_width_nm),
                   phosphor_peak_nm=float(phosphor_peak_nm), phosphor_fwhm_nm=float(phosphor_fwhm_nm),
                   phosphor_pump_ratio=float(phosphor_pump_ratio))


# ----------------------------------------------------------------------------------------------
# colour filters
# ----------------------------------------------------------------------------------------------


@renamed_keywords(width_nm="passband_nm")
def band_pass_filter(
    centre_nm,
    passband_nm,
    wavelengths=None,
    *,
    edge_nm=10.0,
    peak_transmittance=0.9,
    floor_transmittance=0.0,
    name=None,
) -> xr.DataArray:
    """Parametric band-pass colour filter(s): transmittance (``primary`` × ``wavelength``, units 1).

    ``T(λ) = floor + (peak − floor) · σ((λ − λ_lo)/e) · σ((λ_hi − λ)/e)`` with logistic edges σ,
    ``λ_lo, λ_hi = centre ∓ passband/2`` (the 50 % points of each edge for a wide band) and edge
    scale ``e = edge_nm / (2 ln 9)`` so that each edge rises from 10 % to 90 % over ``edge_nm``.
    A long-pass red filter is a band with its upper edge beyond the grid.

    Parameters
    ----------
    centre_nm : float or sequence
        Centre(s) of the passband, nm, > 0.
    passband_nm : float or sequence
        Width of the passband between the 50 % points of its edges, nm, > 0 (the spec key
        ``passband_nm``; was ``width_nm``, still accepted for one release with a warning).
    wavelengths : array-like, optional
        Uniform grid, nm (default 390-830 nm at 1 nm).
    edge_nm : float or sequence
        Distance over which each edge rises from 10 % to 90 % of the passband, nm, > 0.
    peak_transmittance, floor_transmittance : float or sequence
        Transmittance inside the band and far outside it, 0 <= floor <= peak <= 1.
    name : str or sequence of str, optional
        Filter label(s) (default ``"filter <centre> nm"``).

    Returns
    -------
    xarray.DataArray
        ``primary`` × ``wavelength`` spectral transmittance (units 1).

    Raises
    ------
    metasim.errors.SpectrumError
        A non-finite or non-positive centre, passband or edge, sequences of different lengths,
        transmittances outside 0 <= floor <= peak <= 1, or a non-uniform grid.

    References
    ----------
    Common practice, no source (logistic edges are a smooth stand-in for measured filter curves;
    load measured ones with :func:`measured_spectra`).

    Examples
    --------
    >>> green = band_pass_filter(540, 80, edge_nm=20)
    >>> green.sel(wavelength=[500, 540]).values.round(3).tolist(), green.attrs["units"]
    ([[0.45, 0.9]], '1')
    """
    wl = _grid(wavelengths)
    count, p = _parameters("band_pass_filter", centre_nm=centre_nm, passband_nm=passband_nm, edge_nm=edge_nm,
                           peak_transmittance=peak_transmittance, floor_transmittance=floor_transmittance)
    _positive("band_pass_filter", centre_nm=p["centre_nm"], passband_nm=p["passband_nm"], edge_nm=p["edge_nm"])
    peak, floor = p["peak_transmittance"], p["floor_transmittance"]
    if ((peak > 1) | (floor < 0) | (floor > peak)).any():
        raise SpectrumError(
            f"band_pass_filter: peak_transmittance={peak.tolist()}, floor_transmittance={floor.tolist()}; "
            "need 0 <= floor <= peak <= 1"
        )
    scale = p["edge_nm"][:, None] / (2.0 * math.log(9.0))
    lo = (p["centre_nm"] - p["passband_nm"] / 2)[:, None]
    hi = (p["centre_nm"] + p["passband_nm"] / 2)[:, None]
    rise = 0.5 * (1.0 + np.tanh((wl[None, :] - lo) / (2.0 * scale)))
    fall = 0.5 * (1.0 + np.tanh((hi - wl[None, :]) / (2.0 * scale)))
    values = floor[:, None] + (peak - floor)[:, None] * rise * fall
    labels = _labels(name, count, [f"filter {c:g} nm" for c in p["centre_nm"]])
    array = xr.DataArray(
        values, dims=("primary", "wavelength"),
        coords={"primary": labels, "wavelength": ("wavelength", wl, dict(WAVELENGTH_ATTRS))},
        attrs={"units": "1", "long_name": "spectral transmittance", "model": "logistic band-pass filter"},
        name="transmittance",
    )
    return check_spectra(array, where="band_pass_filter")


def filtered_primaries(source: xr.DataArray, filters: xr.DataArray) -> xr.DataArray:
    """Subpixel spectra of a filtered backlight: ``source`` (one spectrum) × each filter.

    Parameters
    ----------
    source : DataArray
        The backlight spectrum (``wavelength``, or ``primary`` of size 1 × ``wavelength``), radiance;
        or a colour-science ``SpectralDistribution``.
    filters : DataArray
        Transmittances (``primary`` × ``wavelength``, units 1, within 0..1), on the same grid; or
        colour-science distributions (labels → ``primary``). A colour-science input is put on the
        grid of the other argument (:mod:`metasim.spectra.convert`).

    Returns
    -------
    xarray.DataArray
        ``primary`` × ``wavelength`` in the source's radiance units, labelled by the filters.

    Raises
    ------
    metasim.errors.SpectrumError
        More than one backlight spectrum, a transmittance above 1, or a spectrum that is not
        usable (negative or non-finite values).
    metasim.errors.GridMismatchError
        Source and filters on different grids.

    References
    ----------
    Common practice, no source (Beer-Lambert: transmitted radiance = incident × transmittance).

    Examples
    --------
    >>> white = phosphor_white_led()
    >>> filters = band_pass_filter([460, 540, 640], [50, 80, 120], name=["B", "G", "R"])
    >>> subpixels = filtered_primaries(white, filters)
    >>> subpixels.primary.values.tolist(), subpixels.attrs["units"]
    (['B', 'G', 'R'], 'W sr-1 m-2 nm-1')
    """
    if isinstance(source, xr.DataArray) or not isinstance(filters, xr.DataArray):
        source = as_spectra(source, where="source", dims_example=("wavelength",))
        filters = as_spectra(filters, dim="primary", wavelengths=source.coords["wavelength"].values, where="filters",
                             units="1", long_name="spectral transmittance")
    else:  # colour-science source, labelled filters: the source goes on the filters' grid
        source = as_spectra(source, wavelengths=filters.coords["wavelength"].values, where="source")
    check_spectra(source, where="source")
    check_spectra(filters, where="filters")
    if "primary" in source.dims:
        if source.sizes["primary"] != 1:
            raise SpectrumError(f"source: one backlight spectrum expected, got {source.sizes['primary']} primaries")
        source = source.isel(primary=0, drop=True)
    if "primary" not in filters.dims:
        filters = filters.expand_dims(primary=["filtered"])
    require_same_grid(source, filters, names=("source", "filters"))
    if float(filters.max()) > 1.0 + 1e-12:
        raise SpectrumError(f"filters: transmittance {float(filters.max()):g} > 1; transmittance must lie in 0..1")
    out = (filters.transpose("primary", "wavelength") * source).transpose("primary", "wavelength")
    out.attrs = {"units": source.attrs.get("units", RADIANCE_UNITS), "long_name": "spectral radiance",
                 "model": f"{source.attrs.get('model', 'source')} x colour filter"}
    out.name = "spectra"
    return out


# ----------------------------------------------------------------------------------------------
# measured spectra and stacking
# ----------------------------------------------------------------------------------------------


def measured_spectra(
    path: str | os.PathLike,
    wavelengths=None,
    *,
    units: str = RADIANCE_UNITS,
    long_name: str = "spectral radiance",
    allow_outside_grid: bool = False,
) -> xr.DataArray:
    """Measured spectra (emission, or transmittance with ``units="1"``) from a CSV file.

    The file layout is that of :func:`metasim.spectra.read_spectra_csv` (a ``wavelength_nm``
    column, one column per primary); the result has dims ``primary`` × ``wavelength`` and is
    resampled onto ``wavelengths`` when given (linear inside the measured range, zero outside).

    Parameters
    ----------
    path : str or os.PathLike
        The CSV file.
    wavelengths : array-like, optional
        Grid to resample onto, nm (default: the file's own wavelengths).
    units : str
        Units of the values (``"1"`` for a transmittance).
    long_name : str
        What the values are, for labels.
    allow_outside_grid : bool
        Accept, with a warning, a spectrum with more than 1 % of its energy outside ``wavelengths``
        (an error otherwise).

    Returns
    -------
    xarray.DataArray
        ``primary`` × ``wavelength``, named ``spectra``, in ``units``.

    Raises
    ------
    metasim.errors.FileFormatError
        A file that cannot be read as such a table (the message names the row or cell).
    metasim.errors.SpectrumError
        Values that are not usable, or energy outside the grid (unless ``allow_outside_grid``).

    References
    ----------
    Common practice, no source (linear interpolation of tabulated spectra).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "red.csv"
    >>> rows = ["wavelength_nm,R", "600,0", "620,1", "640,2", "660,1", "680,0"]
    >>> _ = path.write_text("\\n".join(rows), encoding="utf-8")
    >>> red = measured_spectra(path, np.arange(600, 681, 10.0))
    >>> red.primary.values.tolist(), red.values.tolist()
    (['R'], [[0.0, 0.5, 1.0, 1.5, 2.0, 1.5, 1.0, 0.5, 0.0]])
    """
    array = read_spectra_csv(path, wavelengths=wavelengths, units=units, long_name=long_name, dim="primary",
                             allow_outside_grid=allow_outside_grid)
    array.name = "spectra"
    return array


def stack_primaries(*spectra: xr.DataArray) -> xr.DataArray:
    """Stack single or multi-primary spectra into one ``primary`` × ``wavelength`` array.

    Each argument has dims ``wavelength`` (labelled by its ``name``) or ``primary`` × ``wavelength``;
    all share the grid and the units; primary labels must be unique. colour-science distributions
    are accepted and put on the grid of the first DataArray (else of the first argument).

    Parameters
    ----------
    *spectra : xarray.DataArray or colour-science distribution
        The parts, in order (or one list or tuple of them).

    Returns
    -------
    xarray.DataArray
        ``primary`` × ``wavelength`` in the parts' units, named ``spectra``.

    Raises
    ------
    metasim.errors.SpectrumError
        No spectra, dims other than ``primary`` and ``wavelength``, different units, or repeated
        labels.
    metasim.errors.GridMismatchError
        Parts on different grids.

    References
    ----------
    Common practice, no source.

    Examples
    --------
    >>> display = stack_primaries(laser_line(465, name="B"), gaussian([530, 630], [30, 20], name=["G", "R"]))
    >>> display.primary.values.tolist(), display.attrs["units"]
    (['B', 'G', 'R'], 'W sr-1 m-2 nm-1')
    """
    if len(spectra) == 1 and isinstance(spectra[0], (list, tuple)):
        spectra = tuple(spectra[0])
    if not spectra:
        raise SpectrumError("stack_primaries: no spectra given; pass at least one DataArray")
    parts = []
    labelled = next((item for item in spectra if isinstance(item, xr.DataArray)), None)
    for i, item in enumerate(spectra):
        grid = (labelled if labelled is not None else parts[0] if parts else None)
        item = as_spectra(item, dim="primary", where=f"spectra #{i}", units=RADIANCE_UNITS,
                          wavelengths=None if grid is None else grid.coords["wavelength"].values)
        check_spectra(item, where=f"spectra #{i}", non_negative=False)
        if "primary" not in item.dims:
            item = item.expand_dims(primary=[str(item.name or f"primary{i}")])
        extra = set(item.dims) - {"primary", "wavelength"}
        if extra:
            raise SpectrumError(f"spectra #{i}: unexpected dims {sorted(extra)}; allowed: primary, wavelength")
        require_same_grid(parts[0] if parts else item, item, names=("spectra #0", f"spectra #{i}"))
        if parts and item.attrs.get("units") != parts[0].attrs.get("units"):
            raise SpectrumError(
                f"spectra #{i}: units {item.attrs.get('units')!r} differ from {parts[0].attrs.get('units')!r}"
            )
        parts.append(item.transpose("primary", "wavelength"))
    labels = [str(v) for part in parts for v in part.coords["primary"].values]
    if len(set(labels)) != len(labels):
        raise SpectrumError(f"stack_primaries: primary labels {labels} repeat; labels must be unique")
    out = xr.concat([p.drop_vars([c for c in p.coords if c not in ("primary", "wavelength")]) for p in parts],
                    dim="primary", combine_attrs="drop")
    out.attrs = {"units": parts[0].attrs.get("units", RADIANCE_UNITS), "long_name": "spectral radiance",
                 "model": "; ".join(str(p.attrs.get("model", "spectrum")) for p in parts)}
    out.name = "spectra"
    return out


__all__ = [
    "NORMALISATIONS",
    "LINE_PROFILES",
    "laser_line",
    "gaussian",
    "ohno_led",
    "quantum_dot",
    "phosphor_white_led",
    "band_pass_filter",
    "filtered_primaries",
    "measured_spectra",
    "stack_primaries",
]
