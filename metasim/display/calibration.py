"""White calibration: scale the primaries so the display white hits a target for one observer.

For the chosen observer (standard or individual), find non-negative gains g_p so that

    XYZ(black) + Σ_p g_p · XYZ(primary p) = XYZ_target  (chromaticity x, y and luminance Y)

and multiply each primary spectrum by its gain. With 3 primaries the gains are unique (and the
white must lie inside the primaries' triangle). With N > 3 the gains are underdetermined; metasim
keeps the primaries' native balance as far as possible: it minimises Σ_p (g_p − c)² with c the
uniform gain that alone would give the target luminance, subject to the three equations and
g ≥ 0 (a small QP, solved exactly by :func:`metasim.display.solvers.equality_box_qp`).

References
----------
SMPTE RP 177-1993 (derivation of the normalised primary matrix: white balance of three
primaries); IEC 61966-2-1:1999 (D65 white, x = 0.3127, y = 0.3290).
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim.colorimetry import tristimulus, xy_to_xyz, xyz_to_xy
from metasim.errors import DisplayError
from metasim.display.model import Display, observer_name, single_observer
from metasim.display.optics import observer_optics
from metasim.display.solvers import equality_box_qp
from metasim.display.transfer import check_luminance
from metasim.spectra.convert import as_spectra, is_colour_spectrum

#: Named white points: name -> colour-science's name of its CIE 1931 xy in ``colour.CCS_ILLUMINANTS``
#: (CIE 15:2004 / IEC 61966-2-1 four-decimal values; DCI: SMPTE RP 431-2; E: equal energy).
WHITE_POINTS = {"D65": "D65", "D50": "D50", "DCI": "DCI-P3", "E": "E"}


def white_xy(white) -> xr.DataArray:
    """A white chromaticity (dim ``chromaticity`` = x, y) from a name in :data:`WHITE_POINTS` or (x, y).

    Parameters
    ----------
    white : str, sequence of 2 floats or xarray.DataArray (chromaticity, ...)
        A name (``D65``, ``D50``, ``DCI``, ``E``), a CIE 1931 (x, y) pair, or chromaticities with a
        ``chromaticity`` dim (x, y), e.g. one per ``design``.

    Returns
    -------
    xarray.DataArray (chromaticity)
        CIE 1931 x, y (unit 1); a DataArray given keeps its other dims.

    Raises
    ------
    DisplayError
        An unknown name, not a pair, no ``chromaticity`` dim, or x < 0, y ≤ 0 or x + y > 1.

    References
    ----------
    CIE 15:2018 Colorimetry, 4th edition (CIE illuminants D65, D50, E); IEC 61966-2-1:1999 (D65,
    x = 0.3127, y = 0.3290); SMPTE RP 431-2:2011 (DCI white); values from colour-science.

    Examples
    --------
    >>> from metasim.display import white_xy
    >>> white_xy("D65").values.tolist(), white_xy("D65").dims
    ([0.3127, 0.329], ('chromaticity',))
    """
    if isinstance(white, str):
        if white not in WHITE_POINTS:
            raise DisplayError(f"white point {white!r} is not known; allowed: {', '.join(WHITE_POINTS)} or an (x, y) pair")
        import colour  # lazily: colour-science takes a moment to import

        white = colour.CCS_ILLUMINANTS["CIE 1931 2 Degree Standard Observer"][WHITE_POINTS[white]]
    if isinstance(white, xr.DataArray):
        if "chromaticity" not in white.dims:
            raise DisplayError(f"white chromaticity needs a 'chromaticity' dim, got {tuple(white.dims)}")
        xy = white
    else:
        values = np.asarray(white, dtype=float)
        if values.shape != (2,):
            raise DisplayError(f"white={white!r} is not allowed; give a name or an (x, y) pair")
        xy = xr.DataArray(values, dims=("chromaticity",), coords={"chromaticity": ["x", "y"]})
        x, y = values
    if isinstance(white, xr.DataArray):
        x, y = np.asarray(_component(xy, "x").values), np.asarray(_component(xy, "y").values)
    if not (np.isfinite(x).all() and np.isfinite(y).all()) or (y <= 0).any() or (x < 0).any() or (x + y > 1).any():
        raise DisplayError(f"white chromaticity (x, y) = ({x}, {y}) is not allowed; need x >= 0, y > 0, x + y <= 1")
    xy.attrs = {"units": "1", "long_name": "CIE 1931 xy chromaticity of the target white"}
    return xy


def _is_spectrum(white) -> bool:
    return is_colour_spectrum(white) or (isinstance(white, xr.DataArray) and "wavelength" in white.dims)


def _white_of_spectrum(white, display: Display, observer: xr.Dataset) -> xr.DataArray:
    """The chromaticity of a white given as a spectrum (an illuminant), for the calibration observer."""
    spectrum = as_spectra(white, wavelengths=display.wavelengths.values, where="white", dims_example=("wavelength",))
    if set(spectrum.dims) != {"wavelength"}:
        raise DisplayError(f"a white spectrum has only a 'wavelength' dim, got {tuple(spectrum.dims)}")
    return xyz_to_xy(tristimulus(spectrum, observer, scale="none"))


def _component(xy: xr.DataArray, name: str) -> xr.Variable:
    """The ``x`` or ``y`` part of a chromaticity DataArray as a Variable (what ``.sel`` picks, without
    building a DataArray); the usual KeyError when the label is missing."""
    labels = list(xy.coords.variables["chromaticity"].values) if "chromaticity" in xy.coords else []
    if name not in labels:
        return xy.sel(chromaticity=name, drop=True).variable
    return xy.variable.isel(chromaticity=labels.index(name))


def calibrate_white(display: Display, observer="cie1931_2", *, white="D65", luminance=None) -> Display:
    """Scale the primaries so that the display white (all drives 1) hits a target for ``observer``.

    Parameters
    ----------
    display : Display
        Any number of designs (the ``design`` dim is calibrated design by design, vectorised).
    observer : str or Dataset
        A standard observer name or an observer Dataset (variable ``cmf``, no ``observer`` dim or
        one of size 1) on the display's grid — standard or individual.
    white : str or (x, y) or DataArray or spectrum
        Target chromaticity (default D65); a DataArray may vary along ``design``. A spectrum (a
        ``wavelength`` DataArray or a colour-science ``SpectralDistribution`` such as
        ``colour.SDS_ILLUMINANTS["D65"]``, put on the display's grid) gives its chromaticity for
        ``observer``.
    luminance : float or DataArray, optional
        Target white luminance Y in cd/m² (default the display's ``peak_luminance``).

    Returns
    -------
    Display
        Primaries scaled by ``primary_gain``; ``peak_luminance`` set to the target luminance;
        attributes ``calibration_observer``, ``calibration_white_xy``, ``calibration_luminance``.

    Raises
    ------
    DisplayError
        The target white is outside what non-negative primary gains can reach.

    References
    ----------
    SMPTE RP 177-1993; see the module docstring for the N > 3 rule.

    Examples
    --------
    >>> import metasim
    >>> from metasim.emitters import gaussian
    >>> display = metasim.make_display(gaussian([455, 535, 615], [25, 30, 35], name=["B", "G", "R"]))
    >>> calibrated = metasim.calibrate_white(display, "cie1931_2", white="D65", luminance=100)
    >>> white = calibrated.white_tristimulus("cie1931_2")
    >>> metasim.xyz_to_xy(white).round(4).values.tolist(), round(float(white.sel(xyz="Y")), 6)
    ([0.3127, 0.329], 100.0)
    """
    if not isinstance(display, Display):
        raise DisplayError(f"calibrate_white needs a Display, got {type(display).__name__}")
    calibration_observer = single_observer(observer, display, "calibration needs one observer", "select one with .isel(observer=i)")
    target_luminance = display.peak_luminance if luminance is None else luminance
    if not isinstance(target_luminance, xr.DataArray):
        target_luminance = xr.DataArray(float(target_luminance))
    check_luminance(target_luminance if luminance is None else luminance, "luminance")
    xy = white_xy(_white_of_spectrum(white, display, calibration_observer) if _is_spectrum(white) else white)
    batch = display.batch_dims
    spectra = display.spectra
    n = display.n_primaries
    sizes = {d: spectra.sizes[d] for d in batch}
    target = _target_values(xy, target_luminance, spectra, sizes)
    if target is None:  # labels to align or dims to refuse: the labelled route
        need, A = _need_labelled(display, calibration_observer, xy, target_luminance, batch)
        b = need.transpose(*batch, "xyz").values.reshape(-1, 3)
        xy_rows = xy.broadcast_like(need.isel(xyz=0, drop=True)).transpose(*batch, "chromaticity").values
    else:
        _, A, black, _ = observer_optics(display, calibration_observer)
        b = target - black
        xy_rows = np.asarray(xy.variable.set_dims({**sizes, "chromaticity": xy.sizes["chromaticity"]}).values)
    scale = np.abs(b).max(-1, keepdims=True)
    A_n, b_n = A / scale[..., None], b / scale
    uniform = b_n[:, 1] / A_n[:, 1].sum(-1)
    H = np.broadcast_to(np.eye(n), (A.shape[0], 1, n, n))
    f = -uniform[:, None, None] * np.ones((A.shape[0], 1, n))
    gains, ok = equality_box_qp(H, f, A_n, b_n[:, None, :], np.zeros(n), np.full(n, np.inf), tol=1e-9)
    if not ok.all():
        i = int(np.argmin(ok[:, 0]))
        xy_i = xy_rows.reshape(-1, 2)[i]
        where = f" (design #{i})" if batch else ""
        raise DisplayError(
            f"white (x, y) = ({xy_i[0]:.4f}, {xy_i[1]:.4f}) cannot be reached with non-negative primary gains"
            f"{where} for observer {observer_name(observer)!r}; allowed: a white inside the primaries' gamut"
        )
    gains = gains[:, 0]
    shape = [spectra.sizes[d] for d in batch]
    gain_values = gains.reshape(shape + [n])
    scaled = xr.Variable((*batch, "primary", "wavelength"),
                         spectra.variable.transpose(*batch, "primary", "wavelength").values * gain_values[..., None])
    scaled = scaled.transpose(*spectra.dims).values
    gain_attrs = {"units": "1", "long_name": "gain applied to each primary by white calibration"}
    peak_attrs = {"units": "cd m-2", "long_name": "nominal white luminance (all drives 1)"}
    xy_values = np.asarray(xy.values, dtype=float)
    attrs = {"calibration_observer": observer_name(observer),
             "calibration_white_xy": xy_values.tolist() if xy_values.ndim == 1 else "per design",
             "calibration_luminance": float(target_luminance.values) if target_luminance.ndim == 0 else "per design",
             "calibration_method": "white balance, N>3: gains closest to uniform (metasim)"}
    primary_gain = display._ds["primary_gain"]
    if (gains > 0).all() and target_luminance.ndim == 0 and primary_gain.dims == (*batch, "primary"):
        # same shapes and dims throughout: swap the values (the primaries' checks are scale-invariant)
        peak = np.full(display.peak_luminance.shape, float(target_luminance.values))
        return display._rescaled({"spectra": scaled, "primary_gain": primary_gain.values * gain_values,
                                  "peak_luminance": peak},
                                 {"spectra": spectra.attrs, "primary_gain": gain_attrs, "peak_luminance": peak_attrs},
                                 attrs)
    new_spectra = spectra.copy(data=scaled)
    new_spectra.attrs = dict(spectra.attrs)
    primary_gain = primary_gain.transpose(*batch, "primary")
    total_gain = primary_gain.copy(data=primary_gain.values * gain_values)
    total_gain.attrs = gain_attrs
    peak = target_luminance.astype(float) * xr.ones_like(display.peak_luminance)
    peak.attrs = peak_attrs
    return display.replace(spectra=new_spectra, primary_gain=total_gain, peak_luminance=peak, attrs=attrs)


def _target_values(xy: xr.DataArray, luminance: xr.DataArray, spectra: xr.DataArray, sizes: dict):
    """Target white XYZ (P, 3) from xy and luminance on numpy values (the formulas of
    :func:`metasim.colorimetry.xy_to_xyz`), or None unless their dims and labels already agree with
    the display's batch dims (then xarray must align them, or refuse them)."""
    xy_dims = [d for d in xy.dims if d != "chromaticity"]
    if not set(xy_dims) <= set(sizes) or not set(luminance.dims) <= set(xy_dims):
        return None
    for array in (xy, luminance):
        for d in set(array.dims) & set(sizes):
            if array.sizes[d] != spectra.sizes[d]:
                return None
            if d in array.xindexes and d in spectra.xindexes and not array.xindexes[d].equals(spectra.xindexes[d]):
                return None
    x, y = _component(xy, "x"), _component(xy, "y")
    if x.ndim == 0 and luminance.ndim == 0:  # one white for every design: the same formulas on floats
        x, y, big_y = float(x.values), float(y.values), float(luminance.values)
        xyz = np.array([x * big_y / y, big_y, (1 - x - y) * big_y / y])
        return np.broadcast_to(xyz, (int(np.prod(list(sizes.values()), dtype=int)), 3)).copy()
    big_y = x * 0 + luminance.variable
    xyz = xr.Variable.concat([x * big_y / y, big_y, (1 - x - y) * big_y / y], dim="xyz")
    return np.asarray(xyz.set_dims({**sizes, "xyz": 3}).values).reshape(-1, 3)


def _need_labelled(display: Display, calibration_observer, xy, target_luminance, batch):
    """The labelled route of the target white minus black, for inputs xarray must align or refuse."""
    target = xy_to_xyz(xy, target_luminance)
    primaries = display.primary_tristimulus(calibration_observer)
    black = display.black_tristimulus(calibration_observer)
    need = target - black
    extra = [d for d in need.dims if d != "xyz" and d not in batch]
    if extra:
        raise DisplayError(f"calibration target varies along {extra}; only the display's dims {batch} may vary")
    need = need.broadcast_like(primaries.isel(primary=0, drop=True))
    return need, primaries.transpose(*batch, "xyz", "primary").values.reshape(-1, 3, display.n_primaries)


__all__ = ["WHITE_POINTS", "white_xy", "calibrate_white"]
