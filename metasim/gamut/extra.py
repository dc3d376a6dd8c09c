"""Gain from an extra primary: chromaticity area and CIELAB volume added across candidate wavelengths.

For each candidate peak wavelength the candidate line (a laser line or a Gaussian band) is added to
the design as one more primary; the gain is the gamut of N + 1 primaries minus the gamut of the N.
The CIELAB volume uses a fixed white — the base design's white (sum of its primaries) unless one is
stated — so that the gain measures new colours, not a change of the reference white (with the white
fixed, adding a primary can only enlarge the colour solid: Z + [0, P] ⊇ Z).

How bright the candidate is matters for the volume, not for the area. By default it carries the same
radiant power as the mean base primary (``match="power"``, needs spectra); ``match="luminance"``
gives it the mean base primary's luminance Y instead; ``level`` scales either.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim.colorimetry import tristimulus
from metasim.errors import GamutError
from metasim.gamut._inputs import _spectra_of, check_space, gamut_inputs, primaries_xyz, white_xyz
from metasim.gamut.chromaticity import chromaticity_gamut
from metasim.gamut.volume import VOLUME_UNITS, lab_gamut_volume
from metasim.spectra import RADIANCE_UNITS, WAVELENGTH_ATTRS, check_wavelengths, grid_step

KINDS = ("laser", "gaussian")
MATCHES = ("power", "luminance")
PEAK_ATTRS = {"units": "nm", "long_name": "peak wavelength of the added primary"}


def candidate_spectra(peak_nm, wavelengths, kind: str = "laser", fwhm_nm: float | None = None) -> xr.DataArray:
    """Candidate primary spectra of unit radiant power (``peak_wavelength`` × ``wavelength``).

    ``laser``: a line of negligible width, its energy split between the two neighbouring grid
    points so that energy and centroid are kept (linear apportioning). ``gaussian``: a band with
    full width at half maximum ``fwhm_nm``, exp(−4 ln 2 (λ − peak)² / FWHM²), normalised on the grid.

    Parameters
    ----------
    peak_nm : float or sequence of float
        Peak wavelengths in nm, finite and within the grid.
    wavelengths : array_like or xarray.DataArray (wavelength)
        A uniform grid in nm.
    kind : {"laser", "gaussian"}
        The line shape.
    fwhm_nm : float, optional
        Full width at half maximum in nm, > 0 (``gaussian`` only).

    Returns
    -------
    xarray.DataArray (peak_wavelength, wavelength)
        Spectral radiance in W sr⁻¹ m⁻² nm⁻¹, each row integrating to 1 W sr⁻¹ m⁻² on the grid.

    Raises
    ------
    GamutError
        An unknown ``kind``, peaks that are not finite or lie outside the grid, or a missing or
        non-positive ``fwhm_nm`` for ``gaussian``.
    SpectrumError
        A grid that is not uniform.

    References
    ----------
    Gaussian line shape as a model of narrow-band emitters: Ohno (2005) Opt. Eng. 44 (LED spectra);
    common practice for laser and quantum-dot primaries.

    Examples
    --------
    A laser line at 532.4 nm on a 1 nm grid puts 60 % of its energy at 532 nm and 40 % at 533 nm:

    >>> from metasim.gamut import candidate_spectra
    >>> from metasim.spectra import integrate, wavelength_grid
    >>> lines = candidate_spectra([532.4, 640.0], wavelength_grid(500, 700, 1))
    >>> lines.dims, lines.sel(peak_wavelength=532.4, wavelength=[532, 533]).round(3).values.tolist()
    (('peak_wavelength', 'wavelength'), [0.6, 0.4])
    >>> integrate(lines).values.tolist()
    [1.0, 1.0]
    """
    if kind not in KINDS:
        raise GamutError(f"kind={kind!r} is not known; allowed: {', '.join(KINDS)}")
    wl = check_wavelengths(wavelengths, where="candidate grid", uniform=True)
    step = grid_step(wl)
    peaks = np.atleast_1d(np.asarray(peak_nm, dtype=float))
    if peaks.ndim != 1 or not np.isfinite(peaks).all():
        raise GamutError(f"peak_nm must be a 1-D sequence of finite wavelengths in nm, got {peak_nm!r}")
    outside = (peaks < wl[0]) | (peaks > wl[-1])
    if outside.any():
        raise GamutError(
            f"peak wavelength {peaks[outside][0]:g} nm lies outside the grid {wl[0]:g}-{wl[-1]:g} nm"
        )
    if kind == "laser":
        position = (peaks - wl[0]) / step
        low = np.clip(np.floor(position).astype(int), 0, wl.size - 2)
        upper_weight = position - low
        values = np.zeros((peaks.size, wl.size))
        rows = np.arange(peaks.size)
        values[rows, low] = (1.0 - upper_weight) / step
        values[rows, low + 1] += upper_weight / step
        description = "laser line (energy apportioned to the two nearest grid points)"
    else:
        if fwhm_nm is None or not np.isfinite(fwhm_nm) or fwhm_nm <= 0:
            raise GamutError(f"fwhm_nm={fwhm_nm!r} is not allowed; a Gaussian band needs a width > 0 nm")
        values = np.exp(-4.0 * np.log(2.0) * ((wl[None, :] - peaks[:, None]) / fwhm_nm) ** 2)
        values /= values.sum(axis=1, keepdims=True) * step
        description = f"Gaussian band, FWHM {fwhm_nm:g} nm"
    return xr.DataArray(
        values,
        dims=("peak_wavelength", "wavelength"),
        coords={"peak_wavelength": ("peak_wavelength", peaks, dict(PEAK_ATTRS)),
                "wavelength": ("wavelength", wl, dict(WAVELENGTH_ATTRS))},
        attrs={"units": RADIANCE_UNITS, "long_name": f"candidate primary: {description}, unit radiant power"},
    )


def extra_primary_gain(
    primaries,
    observer=None,
    *,
    peak_nm=None,
    kind: str = "laser",
    fwhm_nm: float | None = None,
    candidates: xr.DataArray | None = None,
    match: str = "power",
    level: float = 1.0,
    space: str = "xy",
    volume: bool = True,
    white=None,
    rtol: float = 1e-3,
) -> xr.Dataset:
    """Area and CIELAB volume gained by adding one primary, across candidate peak wavelengths.

    Parameters
    ----------
    primaries
        The base design: primary spectra (``primary`` × ``wavelength``, optional ``design``), a display
        with ``spectra``, or primary XYZ (then ``match="luminance"``).
    observer : Dataset
        Observer(s) (``cmf``; a leading ``observer`` dim gives gains per observer).
    peak_nm : sequence, optional
        Candidate peak wavelengths, default 450-650 nm in 1 nm steps.
    kind, fwhm_nm
        ``"laser"`` or ``"gaussian"`` (with ``fwhm_nm``), see :func:`candidate_spectra`.
    candidates : DataArray, optional
        Your own candidate spectra (``peak_wavelength`` × ``wavelength``) instead of ``kind``.
    match, level
        Candidate brightness: ``level`` × the mean base primary's radiant power (``"power"``) or
        luminance Y (``"luminance"``).
    space : {"xy", "uv"}
    volume : bool
        Also compute the CIELAB volume gain (white fixed, see the module notes).

    Returns
    -------
    Dataset
        Over ``peak_wavelength`` (nm) and the base's leading dims: ``area_gain``,
        ``area_gain_share`` (of the base area), ``area``; with ``volume`` also ``volume_gain``,
        ``volume_gain_share`` and ``volume``; and the base values ``base_area``, ``base_volume``.

    Examples
    --------
    >>> import metasim
    >>> from metasim.emitters import laser_line
    >>> base = laser_line([465, 532, 638], 1.0, name=["B", "G", "R"])
    >>> gain = metasim.extra_primary_gain(base, metasim.standard_observer("cie1931_2"), peak_nm=[500, 580])
    >>> gain["area_gain_share"].round(3).values.tolist()  # a cyan line widens the gamut, a yellow one hardly
    [0.263, 0.015]
    """
    check_space(space)
    if match not in MATCHES:
        raise GamutError(f"match={match!r} is not known; allowed: {', '.join(MATCHES)}")
    if not np.isfinite(level) or level <= 0:
        raise GamutError(f"level={level!r} is not allowed; need a finite number > 0")
    if observer is None:
        raise GamutError("extra_primary_gain needs an observer (a Dataset with 'cmf'), got none")
    primaries, observer = gamut_inputs(primaries, observer)
    base = primaries_xyz(primaries, observer)
    custom = candidates is not None
    if candidates is None:
        peaks = np.arange(450.0, 651.0, 1.0) if peak_nm is None else peak_nm
        candidates = candidate_spectra(peaks, observer["cmf"].coords["wavelength"], kind, fwhm_nm)
    if "peak_wavelength" not in candidates.dims or "wavelength" not in candidates.dims:
        raise GamutError(f"candidates need dims 'peak_wavelength' and 'wavelength', got {tuple(candidates.dims)}")
    candidate_xyz = tristimulus(candidates, observer, scale="none")
    if match == "power":
        spectra = _spectra_of(primaries)
        if not isinstance(spectra, xr.DataArray) or "wavelength" not in spectra.dims:
            raise GamutError("match='power' needs the base primaries as spectra; use match='luminance' for XYZ")
        step = grid_step(spectra)
        target = spectra.sum("wavelength").mean("primary") * step
        own = candidates.sum("wavelength") * grid_step(candidates)
    else:
        target = base.sel(xyz="Y", drop=True).mean("primary")
        own = candidate_xyz.sel(xyz="Y", drop=True)
    if (np.asarray(own) <= 0).any():
        raise GamutError("a candidate primary has zero radiant power or luminance; it cannot be scaled")
    candidate_xyz = candidate_xyz * (level * target / own)
    template = xr.broadcast(base.isel(primary=0, drop=True), candidate_xyz)[0]
    lead = [d for d in template.dims if d != "xyz"]
    on_primary = [c for c in base.coords if "primary" in base.coords[c].dims]
    base_b = base.drop_vars(on_primary).broadcast_like(template)
    extra_b = candidate_xyz.broadcast_like(template).expand_dims("primary")
    combined = xr.concat([base_b, extra_b], dim="primary", coords="minimal", compat="override")
    if "primary" in base.coords:
        combined = combined.assign_coords(primary=[*map(str, base.coords["primary"].values), "extra"])
    combined = combined.transpose(*lead, "primary", "xyz")
    base_area = chromaticity_gamut(base, space)["area"]
    area = chromaticity_gamut(combined, space)["area"]
    out = xr.Dataset(attrs={"candidates": "given" if custom else kind,
                            "match": match, "level": level, "space": space})
    area_units = {"units": "1"}
    out["area"] = area.assign_attrs(long_name=f"{space} gamut area with the added primary", **area_units)
    out["area_gain"] = (area - base_area).assign_attrs(long_name=f"{space} gamut area added by the extra primary",
                                                        **area_units)
    out["area_gain_share"] = ((area - base_area) / base_area).assign_attrs(
        long_name="area added, as a share of the base area", units="1")
    out["base_area"] = base_area.assign_attrs(long_name=f"{space} gamut area of the base design", **area_units)
    if volume:
        fixed_white = white_xyz(white, base, observer)
        base_volume = lab_gamut_volume(base, white=fixed_white, rtol=rtol).reset_coords(drop=True)
        new_volume = lab_gamut_volume(combined, white=fixed_white, rtol=rtol).reset_coords(drop=True)
        out["volume"] = new_volume.assign_attrs(long_name="CIELAB volume with the added primary",
                                                units=VOLUME_UNITS)
        out["volume_gain"] = (new_volume - base_volume).assign_attrs(
            long_name="CIELAB volume added by the extra primary (white fixed)", units=VOLUME_UNITS)
        out["volume_gain_share"] = ((new_volume - base_volume) / base_volume).assign_attrs(
            long_name="volume added, as a share of the base volume", units="1")
        out["base_volume"] = base_volume.assign_attrs(long_name="CIELAB volume of the base design",
                                                      units=VOLUME_UNITS)
    out.coords["peak_wavelength"].attrs.update(PEAK_ATTRS)
    return out
