"""The CIE 170-1:2006 physiological observer, vectorised over any number of individual observers.

Model (energy-based, peak-normalised cone fundamentals, CIE 170-1:2006)::

    lms_c(λ) ∝ λ · [1 − 10^(−D_peak,c · a_c(λ))] · 10^(−D_mac(λ) − D_ocul(λ))

* ``a_c(λ)``: low-density absorbance of cone c (peak 1). Not shipped: derived once (cached at first
  use) from the Stockman & Sharpe (2000) 2° fundamentals in colour-science by inverting the formula
  with the 2° values D_mac,max = 0.35 and D_peak = 0.50 / 0.50 / 0.40.
  ``scripts/derive_absorbances.py`` reproduces and prints the table.
* ``D_mac(λ)``: macular pigment, shape ``data/macular_density_2deg_1nm.csv`` (peak 0.35) scaled to
  ``D_mac,max = 0.485·exp(−f/6.132)`` for a field of f degrees.
* ``D_peak``: L, M ``0.38 + 0.54·exp(−f/1.333)``; S ``0.30 + 0.45·exp(−f/1.333)``.
* ``D_ocul(λ, A)``: ocular media. At age 32 the table ``data/lens_density_32y_1nm.csv``. Other ages:
  by default the age terms of van de Kraats & van Norren (2007), as adopted in CIE 203:2012, added
  as a difference from age 32 (CIE 170-1's own age formula needs a two-component lens table that is
  not shipped); negative totals (young eyes, long wavelengths) are clipped to 0. With a user's
  two-component table (:func:`read_lens_components`) the CIE 170-1 age formula itself is used.
* The S-cone is defined only up to 615 nm, as in the standard: the derived S absorbance is 0 above
  615 nm, so S is 0 there.

Individual deviations (Asano, Fairchild & Blondé 2016) act on this observer of a given age and field:

* ``lens_density_pct``, ``macular_density_pct``: D_ocul and D_mac are multiplied by
  ``max(0, 1 + pct/100)``;
* ``l_density_pct``, ``m_density_pct``, ``s_density_pct``: the cone's D_peak likewise;
* ``l_shift_nm``, ``m_shift_nm``, ``s_shift_nm``: the absorbance is shifted so that its peak moves
  by exactly the given nm, along ``peak_shift_axis`` — ``"log_wavelength"`` (default, as always):
  ``a'(λ) = a(λ · λmax / (λmax + shift))``, λmax the peak of the derived absorbance (L 545 nm, M
  525 nm, S 420 nm); or ``"wavelength"``: ``a'(λ) = a(λ − shift)`` — reading the 1-nm table
  linearly (default) or by monotone cubic interpolation (``absorbance_interpolation``); both
  options, their sources and why the defaults are kept: :mod:`metasim.observers.pigments`. The
  shift acts on the absorbance before density, media and macula, so the fundamental's peak moves
  by about (L, M) or less than (S, whose peak is set by the lens) the shift. Outside 390-830 nm the
  shifted absorbance takes the edge value.

XYZ (CIE 170-2:2015): ``xyz = M(f) · lms``. An observer of field f gets the 2° matrix for f ≤ 2°,
the 10° matrix for f ≥ 10°, and the element-wise linear interpolation in f between them. The
matrix depends only on the field size, never on age or the individual deviations: every observer
of one field size is expressed in the same linear frame of cone space, so differences between
observers' XYZ are differences in what they see, not in the choice of transformation; the
interpolation keeps XYZ continuous in field size and reproduces CIE 170-2 exactly at 2° and 10°.

All computation is on the model's native grid, 390-830 nm at 1 nm (the tables' sampling), and then
interpolated linearly onto the requested grid (0 outside 390-830 nm). Peak normalisation uses the
parabolic vertex through the largest sample and its neighbours, so peaks do not depend on sampling.

References
----------
CIE 170-1:2006 Fundamental chromaticity diagram with physiological axes - Part 1.
CIE 170-2:2015 Fundamental chromaticity diagram with physiological axes - Part 2.
CIE 203:2012 A computerized approach to transmission and absorption characteristics of the human eye.
Stockman, A. & Sharpe, L. T. (2000) Vision Research 40, 1711-1737.
Stockman, A., Sharpe, L. T. & Fach, C. (1999) Vision Research 39, 2901-2927.
van de Kraats, J. & van Norren, D. (2007) J. Opt. Soc. Am. A 24, 1842-1857.
Asano, Y., Fairchild, M. D. & Blondé, L. (2016) PLoS ONE 11(2), e0145671.
Lamb, T. D. (1995) Vision Research 35, 3083-3091.
"""

from __future__ import annotations

import os
from functools import lru_cache

import numpy as np
import xarray as xr

from metasim._paths import data_dir
from metasim._version import __version__
from metasim.checks import numbers
from metasim.errors import ObserverError
from metasim.observers.pigments import (DEFAULT_ABSORBANCE_INTERPOLATION, DEFAULT_PEAK_SHIFT_AXIS, PEAK_SHIFT_AXES,
                                        check_absorbance_interpolation, check_peak_shift_axis, shifted_absorbance)
from metasim.observers.standard import CONES, XYZ
from metasim.spectra import WAVELENGTH_ATTRS, check_wavelengths, default_grid, read_spectra_csv, resample

DATA_DIR = data_dir()
#: Native grid of the model (nm): the sampling of the shipped tables and of the S&S fundamentals.
BASE_WAVELENGTHS = np.arange(390.0, 831.0, 1.0)
AGE_RANGE_YEARS = (20.0, 80.0)
FIELD_RANGE_DEG = (1.0, 10.0)
#: The ranges of the model's two observer parameters (CIE 170-1:2006): name -> (range, units).
PARAMETER_RANGES = {"age_years": (AGE_RANGE_YEARS, "years"), "field_size_deg": (FIELD_RANGE_DEG, "degrees")}
#: Last wavelength (nm) at which the S-cone is defined (CIE 170-1:2006).
S_CONE_LIMIT_NM = 615.0
#: Peak densities of the 2° inversion (CIE 170-1:2006): macula, and L, M, S photopigment.
INVERSION_MACULAR_PEAK = 0.35
INVERSION_PEAK_DENSITY = np.array([0.50, 0.50, 0.40])

#: CIE 170-2:2015 LMS -> XYZ matrices (checked against colour-science's CIE 2015 tables).
XYZ_MATRIX_2DEG = np.array(
    [[1.94735469, -1.41445123, 0.36476327], [0.68990272, 0.34832189, 0.0], [0.0, 0.0, 1.93485343]]
)
XYZ_MATRIX_10DEG = np.array(
    [[1.93986443, -1.34664359, 0.43044935], [0.69283932, 0.34967567, 0.0], [0.0, 0.0, 2.14687945]]
)

#: The eight individual deviations: name -> (units, long_name).
DEVIATIONS = {
    "lens_density_pct": ("%", "deviation of ocular media (lens) optical density"),
    "macular_density_pct": ("%", "deviation of macular pigment optical density"),
    "l_density_pct": ("%", "deviation of L-cone photopigment peak optical density"),
    "m_density_pct": ("%", "deviation of M-cone photopigment peak optical density"),
    "s_density_pct": ("%", "deviation of S-cone photopigment peak optical density"),
    "l_shift_nm": ("nm", "shift of L-cone photopigment peak wavelength"),
    "m_shift_nm": ("nm", "shift of M-cone photopigment peak wavelength"),
    "s_shift_nm": ("nm", "shift of S-cone photopigment peak wavelength"),
}
PARAMETER_ATTRS = {
    "age_years": {"units": "year", "long_name": "observer age"},
    "field_size_deg": {"units": "degree", "long_name": "visual field size"},
    **{name: {"units": u, "long_name": ln} for name, (u, ln) in DEVIATIONS.items()},
}
MODEL = "CIE 170-1:2006 physiological observer"
#: Observers per block of array work in the vectorised core (bounds temporaries to a few MB each).
BLOCK_OBSERVERS = 1024


# -- tables and the derived absorbances ---------------------------------------------------------

#: The shipped optical-density tables (``data/``, with their sources in the file headers).
LENS_TABLE = "lens_density_32y_1nm.csv"
MACULAR_TABLE = "macular_density_2deg_1nm.csv"


@lru_cache(maxsize=4)
def optical_density_table(filename: str) -> np.ndarray:
    """A shipped optical-density table (:data:`LENS_TABLE`, :data:`MACULAR_TABLE`) on the base grid
    (:data:`BASE_WAVELENGTHS`); cached, so callers do not modify it.

    References
    ----------
    CIE 170-1:2006 (macular pigment at 2°, ocular media at age 32), as the files' headers say.
    """
    table = read_spectra_csv(DATA_DIR / filename, units="1", long_name="optical density")
    return resample(table, BASE_WAVELENGTHS, warn_share=None).values[0]


def _peak(values: np.ndarray, wavelengths: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Peak value and wavelength along the last axis: parabola through the largest sample ± 1."""
    i = np.clip(np.argmax(values, axis=-1), 1, values.shape[-1] - 2)[..., None]
    below, top, above = (np.take_along_axis(values, i + k, axis=-1)[..., 0] for k in (-1, 0, 1))
    curvature = below - 2.0 * top + above
    with np.errstate(invalid="ignore", divide="ignore"):
        offset = np.where(curvature < 0, 0.5 * (below - above) / curvature, 0.0)
    step = wavelengths[1] - wavelengths[0]
    return top - 0.25 * (below - above) * offset, wavelengths[i[..., 0]] + offset * step


@lru_cache(maxsize=1)
def absorbance_table() -> tuple[np.ndarray, np.ndarray]:
    """Low-density absorbances (3 × base grid, peak 1) and their peak wavelengths (nm).

    Inversion of the CIE 170-1 formula at 2° for the Stockman & Sharpe (2000) 2° fundamentals.
    """
    from metasim.observers.standard import _sample

    wl = BASE_WAVELENGTHS
    fundamentals = _sample("Stockman & Sharpe 2 Degree Cone Fundamentals", wl)
    media = optical_density_table(LENS_TABLE) + optical_density_table(MACULAR_TABLE)
    quantal = fundamentals / wl * 10.0**media  # absorptance up to a factor per cone
    absorptance = quantal / quantal.max(axis=1, keepdims=True) * (1.0 - 10.0**-INVERSION_PEAK_DENSITY)[:, None]
    absorbance = -np.log10(1.0 - absorptance) / INVERSION_PEAK_DENSITY[:, None]
    absorbance /= absorbance.max(axis=1, keepdims=True)
    absorbance[2, wl > S_CONE_LIMIT_NM] = 0.0
    return absorbance, _peak(absorbance, wl)[1]


def low_density_absorbance(wavelengths=None) -> xr.DataArray:
    """Low-density photopigment absorbances a(λ) of L, M, S (``cone`` × ``wavelength``, peak 1).

    Derived from the Stockman & Sharpe (2000) 2° cone fundamentals by inverting the CIE 170-1
    formula with f = 2° (D_mac,max 0.35, D_peak 0.50/0.50/0.40); S is 0 above 615 nm.

    Parameters
    ----------
    wavelengths : optional
        The grid (default 390-830 nm at 1 nm).

    Returns
    -------
    DataArray
        ``cone`` × ``wavelength``, each row peaking at 1.

    References
    ----------
    CIE 170-1:2006; Stockman & Sharpe (2000) Vision Research 40, 1711-1737.

    Examples
    --------
    >>> from metasim.observers import low_density_absorbance
    >>> absorbance = low_density_absorbance()
    >>> absorbance.max("wavelength").round(12).values.tolist()
    [1.0, 1.0, 1.0]
    """
    absorbance, peaks = absorbance_table()
    wl = _grid(wavelengths)
    return xr.DataArray(
        _to_grid(absorbance, wl),
        dims=("cone", "wavelength"),
        coords={"cone": list(CONES), "wavelength": ("wavelength", wl, dict(WAVELENGTH_ATTRS)),
                "peak_nm": ("cone", peaks, {"units": "nm", "long_name": "absorbance peak wavelength"})},
        attrs={"units": "1", "long_name": "low-density photopigment absorbance (peak-normalised)",
               "source": "derived from Stockman & Sharpe (2000) 2° cone fundamentals (colour-science)"},
    )


# -- ocular media and ageing ---------------------------------------------------------------------

def macular_peak_density(field_size_deg) -> np.ndarray:
    """Peak optical density of the macular pigment, D_mac,max = 0.485·exp(−f/6.132) (CIE 170-1:2006)."""
    return 0.485 * np.exp(-np.asarray(field_size_deg, dtype=float) / 6.132)


def photopigment_peak_density(field_size_deg) -> np.ndarray:
    """Peak optical densities of the L, M, S photopigments (n × 3): L, M 0.38 + 0.54·exp(−f/1.333),
    S 0.30 + 0.45·exp(−f/1.333) (CIE 170-1:2006)."""
    pigment = np.exp(-np.asarray(field_size_deg, dtype=float) / 1.333)
    return np.stack([0.38 + 0.54 * pigment, 0.38 + 0.54 * pigment, 0.30 + 0.45 * pigment], axis=-1)


def _ageing_terms(wl: np.ndarray) -> np.ndarray:
    """Age terms of van de Kraats & van Norren (2007) / CIE 203:2012: ΔD = (A² − 32²) · this."""
    return (
        3.1e-5 * (400.0 / wl) ** 4
        - 6.3e-5 * 2.13 * np.exp(-((0.029 * (wl - 370.0)) ** 2))
        + 1.86e-4 * 11.95 * np.exp(-((0.021 * (wl - 325.0)) ** 2))
        + 1.32e-4 * 1.43 * np.exp(-((0.008 * (wl - 325.0)) ** 2))
    )


def _cie170_age_factor(age_years: np.ndarray) -> np.ndarray:
    """Factor on the age-dependent lens component (CIE 170-1:2006 as recalled from memory)."""
    return np.where(age_years <= 60.0, 1.0 + 0.02 * (age_years - 32.0), 1.56 + 0.0667 * (age_years - 60.0))


def ocular_density_values(age_years: np.ndarray, lens_components: xr.Dataset | None = None) -> np.ndarray:
    """D_ocul (n × base grid) for ages ``age_years`` (n,): the age-32 table plus the van de Kraats &
    van Norren (2007) / CIE 203:2012 age terms, or CIE 170-1's formula with ``lens_components``
    (numpy form of :func:`ocular_media_density`).

    References
    ----------
    CIE 170-1:2006; van de Kraats & van Norren (2007) J. Opt. Soc. Am. A 24, 1842-1857; CIE 203:2012.
    """
    age_years = np.asarray(age_years, dtype=float)[:, None]
    if lens_components is None:
        density = optical_density_table(LENS_TABLE) + (age_years**2 - 32.0**2) * _ageing_terms(BASE_WAVELENGTHS)
    else:
        d1, d2 = (_to_base(lens_components[name]) for name in ("lens_density_1", "lens_density_2"))
        density = d1 * _cie170_age_factor(age_years) + d2
    return np.maximum(density, 0.0)


def read_lens_components(path: str | os.PathLike) -> xr.Dataset:
    """Read a two-component ocular media table for CIE 170-1's own age formula.

    The CSV layout is that of :func:`metasim.spectra.read_spectra_csv`: ``wavelength_nm`` then two
    columns, in this order, the age-dependent component D_ocul,1(λ) and the constant component
    D_ocul,2(λ) (optical densities at age 32). Pass the result as ``lens_components=`` to
    :func:`cie2006_observer`, :func:`physiological_observers`, or :func:`ocular_media_density`.

    Parameters
    ----------
    path : path-like
        The CSV file.

    Returns
    -------
    Dataset
        As :func:`lens_components_dataset` makes it.

    Raises
    ------
    FileFormatError
        A file that cannot be read as spectra, or without exactly two columns.

    References
    ----------
    CIE 170-1:2006, ocular media density as a function of age.

    Examples
    --------
    >>> import os, tempfile
    >>> from metasim.observers import read_lens_components
    >>> path = os.path.join(tempfile.mkdtemp(), "lens.csv")
    >>> with open(path, "w") as f:
    ...     _ = f.write("wavelength_nm,age_dependent,constant\\n400,0.2,0.05\\n401,0.1,0.05\\n")
    >>> read_lens_components(path)["lens_density_1"].values.tolist()
    [0.2, 0.1]
    """
    table = read_spectra_csv(path, units="1", long_name="ocular media optical density")
    if table.sizes["channel"] != 2:
        raise ObserverError(f"{path}: {table.sizes['channel']} density columns; a two-component lens table "
                            "has exactly 2 (age-dependent D_ocul,1, then constant D_ocul,2)")
    return lens_components_dataset(table.values[0], table.values[1], table["wavelength"].values, source=str(path))


def lens_components_dataset(age_dependent, constant, wavelengths, *, source: str = "user") -> xr.Dataset:
    """Build a two-component lens table (variables ``lens_density_1``, ``lens_density_2``).

    Parameters
    ----------
    age_dependent, constant : array_like
        D_ocul,1(λ) and D_ocul,2(λ), optical densities at age 32, one value per wavelength.
    wavelengths : array_like
        Their grid in nm.
    source : str
        Where the table comes from (kept in the ``source`` attribute).

    Returns
    -------
    Dataset
        ``lens_density_1`` and ``lens_density_2`` over ``wavelength``.

    Raises
    ------
    ObserverError
        Negative or non-finite densities, or lengths that do not match the grid.

    Examples
    --------
    >>> import numpy as np
    >>> from metasim.observers import lens_components_dataset
    >>> table = lens_components_dataset([0.2, 0.1], [0.05, 0.05], [400.0, 401.0])
    >>> sorted(table.data_vars)
    ['lens_density_1', 'lens_density_2']
    """
    wl = check_wavelengths(wavelengths, where="lens table")
    values = [np.asarray(v, dtype=float) for v in (age_dependent, constant)]
    for name, v in zip(("age-dependent", "constant"), values):
        if v.shape != wl.shape or not np.isfinite(v).all() or (v < 0).any():
            raise ObserverError(f"{source}: {name} lens density must be {wl.size} finite values >= 0")
    return xr.Dataset(
        {"lens_density_1": ("wavelength", values[0], {"units": "1", "long_name": "age-dependent ocular media density at age 32"}),
         "lens_density_2": ("wavelength", values[1], {"units": "1", "long_name": "age-independent ocular media density"})},
        coords={"wavelength": ("wavelength", wl, dict(WAVELENGTH_ATTRS))},
        attrs={"source": source, "model": "CIE 170-1:2006 two-component ocular media"})


def ocular_media_density(age_years=32, wavelengths=None, *, lens_components: xr.Dataset | None = None,
                         extrapolate: bool = False) -> xr.DataArray:
    """Optical density of the lens and ocular media at an age (``wavelength``).

    Without ``lens_components``: the age-32 table of Stockman, Sharpe & Fach (1999) plus the age
    terms of van de Kraats & van Norren (2007) / CIE 203:2012. With a two-component table: CIE
    170-1's formula D1·(1 + 0.02·(A − 32)) + D2 up to 60 years, D1·(1.56 + 0.0667·(A − 60)) + D2
    above (the formula is quoted from memory, not from the standard's text).

    Parameters
    ----------
    age_years : float
        Age in years (20-80 unless ``extrapolate``).
    wavelengths : optional
        The grid (default 390-830 nm at 1 nm).
    lens_components : Dataset, optional
        A two-component table (:func:`read_lens_components`) for CIE 170-1's own formula.
    extrapolate : bool
        Allow any positive age.

    Returns
    -------
    DataArray
        Optical density over ``wavelength`` (attribute ``age_years``).

    Raises
    ------
    ObserverError
        An age outside the model's range.

    References
    ----------
    CIE 170-1:2006; CIE 203:2012; van de Kraats & van Norren (2007) JOSA A 24, 1842.

    Examples
    --------
    >>> from metasim.observers import ocular_media_density
    >>> round(float(ocular_media_density(32).sel(wavelength=400)), 5)  # the age-32 table
    1.7649
    """
    age_years = check_parameter("age_years", age_years, extrapolate)
    wl = _grid(wavelengths)
    model = ("CIE 170-1:2006 two-component formula" if lens_components is not None
             else "van de Kraats & van Norren (2007) / CIE 203:2012 ageing of the age-32 table")
    density = _to_grid(ocular_density_values(age_years.reshape(1), lens_components)[0], wl)
    return xr.DataArray(density, dims=("wavelength",), coords={"wavelength": ("wavelength", wl, dict(WAVELENGTH_ATTRS))},
                        attrs={"units": "1", "long_name": "ocular media optical density", "age_years": float(age_years[0]),
                               "model": model})


# -- the vectorised core -------------------------------------------------------------------------

def _grid(wavelengths) -> np.ndarray:
    return check_wavelengths(default_grid() if wavelengths is None else wavelengths, where="observer grid")


def _to_base(array: xr.DataArray) -> np.ndarray:
    return resample(array, BASE_WAVELENGTHS, warn_share=None).values


def _to_grid(values: np.ndarray, wl: np.ndarray) -> np.ndarray:
    """Linear interpolation from the base grid onto ``wl`` along the last axis (0 outside)."""
    if wl.shape == BASE_WAVELENGTHS.shape and np.array_equal(wl, BASE_WAVELENGTHS):
        return values
    pos = wl - BASE_WAVELENGTHS[0]
    i0 = np.clip(np.floor(pos).astype(int), 0, BASE_WAVELENGTHS.size - 2)
    frac = pos - i0
    out = values[..., i0] * (1.0 - frac) + values[..., i0 + 1] * frac
    return np.where((wl >= BASE_WAVELENGTHS[0]) & (wl <= BASE_WAVELENGTHS[-1]), out, 0.0)


def check_parameter(name: str, values, extrapolate: bool = False) -> np.ndarray:
    """An age or field size (one number or a vector) checked against the model's range.

    ``name`` is ``"age_years"`` or ``"field_size_deg"`` (:data:`PARAMETER_RANGES`); with
    ``extrapolate`` any finite value > 0 is allowed. Returns the values as a float64 vector.

    Raises
    ------
    ObserverError
        Naming the first value outside the range and the range (CIE 170-1:2006).
    """
    if extrapolate:
        return numbers(values, name, error=ObserverError, above=0.0, note="extrapolate=True")
    (low, high), units = PARAMETER_RANGES[name]
    return numbers(values, name, error=ObserverError, minimum=low, maximum=high, units=units,
                   note="CIE 170-1 model; or extrapolate=True")


def _xyz_matrices(field_size_deg: np.ndarray) -> np.ndarray:
    """CIE 170-2 LMS->XYZ matrix per observer (n × 3 × 3), linear in field size between 2° and 10°."""
    weight = np.clip((field_size_deg - 2.0) / 8.0, 0.0, 1.0)[:, None, None]
    return XYZ_MATRIX_2DEG * (1.0 - weight) + XYZ_MATRIX_10DEG * weight


def _observer_functions(parameters: dict, wl: np.ndarray, lens_components=None,
                        peak_shift_axis: str = DEFAULT_PEAK_SHIFT_AXIS,
                        interpolation: str = DEFAULT_ABSORBANCE_INTERPOLATION) -> tuple[np.ndarray, np.ndarray]:
    """LMS and XYZ functions (n × 3 × len(wl)) for parameter vectors of length n.

    Each block of up to :data:`BLOCK_OBSERVERS` observers is one set of numpy array operations
    (no per-observer Python code); blocks keep the temporaries small enough to stay in cache.
    """
    n = parameters["age_years"].size
    lms = np.empty((n, 3, wl.size))
    xyz = np.empty((n, 3, wl.size))
    for start in range(0, n, BLOCK_OBSERVERS):
        part = slice(start, start + BLOCK_OBSERVERS)
        block_lms, block_xyz = _block_functions({k: v[part] for k, v in parameters.items()}, lens_components,
                                                peak_shift_axis, interpolation)
        lms[part], xyz[part] = _to_grid(block_lms, wl), _to_grid(block_xyz, wl)
    return lms, xyz


def _block_functions(parameters: dict, lens_components=None,
                     peak_shift_axis: str = DEFAULT_PEAK_SHIFT_AXIS,
                     interpolation: str = DEFAULT_ABSORBANCE_INTERPOLATION) -> tuple[np.ndarray, np.ndarray]:
    """LMS and XYZ functions (n × 3 × base grid) for parameter vectors of length n, array-wise."""
    wl = BASE_WAVELENGTHS
    absorbance, peak_nm = absorbance_table()
    age_years, field_size_deg = parameters["age_years"], parameters["field_size_deg"]
    n = age_years.size

    def factor(name):
        return np.maximum(1.0 + parameters[name] / 100.0, 0.0)

    macular_peak = macular_peak_density(field_size_deg) * factor("macular_density_pct")
    density = np.outer(macular_peak / 0.35, optical_density_table(MACULAR_TABLE))
    density += ocular_density_values(age_years, lens_components) * factor("lens_density_pct")[:, None]
    transmittance = np.exp(density * -np.log(10.0))  # 10^(−D), exp being faster than pow
    peak_density = photopigment_peak_density(field_size_deg) * np.stack(
        [factor("l_density_pct"), factor("m_density_pct"), factor("s_density_pct")], axis=1)
    shift = np.stack([parameters[f"{c}_shift_nm"] for c in "lms"], axis=1)
    if np.any(shift != 0):
        absorbance = shifted_absorbance(wl, absorbance, peak_nm, shift, peak_shift_axis, interpolation=interpolation)
    else:
        absorbance = np.broadcast_to(absorbance, (n, 3, wl.size))
    # 1 − 10^(−D·a) = −expm1(−ln10 · D · a), times λ and the media transmittance
    lms = absorbance * (-np.log(10.0) * peak_density[..., None])
    np.expm1(lms, out=lms)
    lms *= (-wl * transmittance)[:, None, :]
    lms /= _peak(lms, wl)[0][..., None]
    xyz = np.einsum("nij,njw->niw", _xyz_matrices(field_size_deg), lms)
    return lms, xyz


def observer_parameters(age_years, field_size_deg, deviations: dict, extrapolate: bool = False) -> dict:
    """Checked parameter vectors of n observers: ``age_years``, ``field_size_deg`` and the eight
    :data:`DEVIATIONS` (missing ones 0), each a float64 vector of length n (numbers broadcast).

    Raises
    ------
    ObserverError
        An age or field size outside the model (:func:`check_parameter`), an unknown or non-finite
        deviation, or vectors of different lengths.
    """
    unknown = set(deviations) - set(DEVIATIONS)
    if unknown:
        raise ObserverError(f"unknown deviation(s) {sorted(unknown)}; allowed: {', '.join(DEVIATIONS)}")
    arrays = {"age_years": check_parameter("age_years", age_years, extrapolate),
              "field_size_deg": check_parameter("field_size_deg", field_size_deg, extrapolate)}
    for name in DEVIATIONS:
        arrays[name] = numbers(deviations.get(name, 0.0), name, error=ObserverError)
    try:
        shapes = np.broadcast_shapes(*(v.shape for v in arrays.values()))
    except ValueError:
        sizes = {k: v.size for k, v in arrays.items() if v.size != 1}
        raise ObserverError(f"observer parameters have incompatible lengths {sizes}; give 1 or n values each") from None
    if len(shapes) != 1:
        raise ObserverError(f"observer parameters must be scalars or 1-D vectors, got shape {shapes}")
    return {k: np.broadcast_to(v, shapes).astype(float) for k, v in arrays.items()}


def physiological_observers(age_years=32, field_size_deg=2, *, wavelengths=None, extrapolate: bool = False,
                            lens_components: xr.Dataset | None = None,
                            peak_shift_axis: str = DEFAULT_PEAK_SHIFT_AXIS,
                            absorbance_interpolation: str = DEFAULT_ABSORBANCE_INTERPOLATION, **deviations) -> xr.Dataset:
    """Many CIE 170-1 individual observers in one vectorised call (leading ``observer`` dim).

    Parameters
    ----------
    age_years : float or 1-D array_like
        Age in years, 20-80.
    field_size_deg : float or 1-D array_like
        Field size in degrees, 1-10.
    wavelengths : optional
        Output grid (default 390-830 nm at 1 nm).
    extrapolate : bool
        Allow any positive age and field size.
    lens_components : Dataset, optional
        A two-component lens table (:func:`read_lens_components`) to age the media by CIE 170-1's
        own formula.
    peak_shift_axis : {"log_wavelength", "wavelength"}
        The axis along which the peak shifts move the absorbance (:data:`PEAK_SHIFT_AXES`, module
        docstring); recorded as an attribute.
    absorbance_interpolation : {"linear", "monotone_cubic"}
        How the 1-nm absorbance table is read at shifted positions
        (:mod:`metasim.observers.pigments`); recorded as an attribute.
    **deviations : float or 1-D array_like
        Any of the eight :data:`DEVIATIONS` (default 0; below −100 % means zero density).

    Numbers broadcast against vectors; every vector has one value per observer.

    Returns
    -------
    Dataset
        ``lms`` (observer, cone, wavelength) and ``cmf`` (observer, xyz, wavelength), every
        parameter an ``observer`` coordinate.

    Raises
    ------
    ObserverError
        An age or field size outside the model, an unknown deviation, vectors of different lengths,
        an unknown peak-shift axis or interpolation.

    References
    ----------
    CIE 170-1:2006; CIE 170-2:2015; Asano, Fairchild & Blondé (2016) PLoS ONE 11, e0145671.

    Examples
    --------
    >>> import metasim
    >>> observers = metasim.physiological_observers(age_years=[25, 45, 65], field_size_deg=2)
    >>> dict(observers["lms"].sizes), observers["age_years"].values.tolist()
    ({'observer': 3, 'cone': 3, 'wavelength': 441}, [25.0, 45.0, 65.0])
    """
    parameters = observer_parameters(age_years, field_size_deg, deviations, extrapolate)
    check_peak_shift_axis(peak_shift_axis)
    check_absorbance_interpolation(absorbance_interpolation)
    return observers_dataset(parameters, wavelengths=wavelengths, extrapolate=extrapolate,
                             lens_components=lens_components, peak_shift_axis=peak_shift_axis,
                             absorbance_interpolation=absorbance_interpolation)


def observers_dataset(parameters: dict, *, wavelengths=None, extrapolate: bool = False,
                      lens_components: xr.Dataset | None = None,
                      peak_shift_axis: str = DEFAULT_PEAK_SHIFT_AXIS,
                      absorbance_interpolation: str = DEFAULT_ABSORBANCE_INTERPOLATION) -> xr.Dataset:
    """The observer Dataset of :func:`physiological_observers` for parameters already checked by
    :func:`observer_parameters` (or drawn inside the checked ranges, as populations do) and a
    checked ``peak_shift_axis`` and ``absorbance_interpolation``. ``extrapolate`` is only recorded
    in the attributes here.
    """
    wl = _grid(wavelengths)
    lms, xyz = _observer_functions(parameters, wl, lens_components, peak_shift_axis, absorbance_interpolation)
    n = parameters["age_years"].size
    coords = {
        "observer": ("observer", np.arange(n), {"long_name": "observer index", "units": "1"}),
        "cone": ("cone", list(CONES), {"long_name": "cone class"}),
        "xyz": ("xyz", list(XYZ), {"long_name": "CIE tristimulus channel"}),
        "wavelength": ("wavelength", wl, dict(WAVELENGTH_ATTRS)),
        **{k: ("observer", v, dict(PARAMETER_ATTRS[k])) for k, v in parameters.items()},
    }
    return xr.Dataset(
        {
            "lms": (("observer", "cone", "wavelength"), lms,
                    {"units": "1", "long_name": "cone fundamentals (energy-based, peak-normalised)"}),
            "cmf": (("observer", "xyz", "wavelength"), xyz,
                    {"units": "1", "long_name": "colour-matching functions (CIE 170-2 transformation)"}),
        },
        coords=coords,
        attrs={
            "model": MODEL,
            "ageing": ("CIE 170-1:2006 two-component formula (user table)" if lens_components is not None
                       else "van de Kraats & van Norren (2007) / CIE 203:2012 age terms"),
            "xyz_transform": "CIE 170-2:2015 matrix, 2° for f <= 2, 10° for f >= 10, linear in f between",
            "peak_shift_axis": peak_shift_axis,
            "absorbance_interpolation": absorbance_interpolation,
            "extrapolate": int(bool(extrapolate)),
            "metasim_version": __version__,
        },
    )


def cie2006_observer(
    age_years: float = 32,
    field_size_deg: float = 2,
    *,
    wavelengths=None,
    extrapolate: bool = False,
    lens_components: xr.Dataset | None = None,
    peak_shift_axis: str = DEFAULT_PEAK_SHIFT_AXIS,
    absorbance_interpolation: str = DEFAULT_ABSORBANCE_INTERPOLATION,
    lens_density_pct: float = 0,
    macular_density_pct: float = 0,
    l_density_pct: float = 0,
    m_density_pct: float = 0,
    s_density_pct: float = 0,
    l_shift_nm: float = 0,
    m_shift_nm: float = 0,
    s_shift_nm: float = 0,
) -> xr.Dataset:
    """One CIE 170-1:2006 observer of an age and field size, with optional individual deviations.

    Parameters
    ----------
    age_years : float
        20-80 years (outside only with ``extrapolate=True``).
    field_size_deg : float
        1-10 degrees (outside only with ``extrapolate=True``).
    lens_density_pct, macular_density_pct : float
        Change of ocular media and macular pigment optical density, % (>= −100).
    l_density_pct, m_density_pct, s_density_pct : float
        Change of the cone photopigment peak optical density, % (>= −100).
    l_shift_nm, m_shift_nm, s_shift_nm : float
        Shift of the photopigment absorbance peak, nm, along ``peak_shift_axis``.
    wavelengths, extrapolate, lens_components, peak_shift_axis, absorbance_interpolation
        As in :func:`physiological_observers`.

    Returns
    -------
    xarray.Dataset
        ``lms`` (``cone`` × ``wavelength``, energy-based, peak-normalised) and ``cmf`` (``xyz`` ×
        ``wavelength``); the parameters as attributes.

    References
    ----------
    CIE 170-1:2006; CIE 170-2:2015; CIE 203:2012; Asano, Fairchild & Blondé (2016).

    Examples
    --------
    >>> import metasim
    >>> observer = metasim.cie2006_observer(age_years=60, field_size_deg=10)
    >>> dict(observer["cmf"].sizes)
    {'xyz': 3, 'wavelength': 441}
    """
    deviations = {name: value for name, value in locals().items() if name in DEVIATIONS}
    for name, value in {"age_years": age_years, "field_size_deg": field_size_deg, **deviations}.items():
        if np.ndim(value) != 0:
            raise ObserverError(f"{name} must be one number for one observer; use physiological_observers for many")
        if name.endswith("_pct") and float(value) < -100:
            raise ObserverError(f"{name}={float(value):g} is not allowed; a density change must be >= -100 %")
    many = physiological_observers(age_years, field_size_deg, wavelengths=wavelengths, extrapolate=extrapolate,
                                   lens_components=lens_components, peak_shift_axis=peak_shift_axis,
                                   absorbance_interpolation=absorbance_interpolation, **deviations)
    one = many.isel(observer=0, drop=True)
    parameters = {"age_years": float(age_years), "field_size_deg": float(field_size_deg),
                  **{k: float(v) for k, v in deviations.items()}}
    one.attrs.update(parameters)
    one.attrs["observer"] = f"CIE 170-1 observer, age {age_years:g}, field {field_size_deg:g}°"
    return one


__all__ = [
    "AGE_RANGE_YEARS",
    "PEAK_SHIFT_AXES",
    "DEFAULT_PEAK_SHIFT_AXIS",
    "FIELD_RANGE_DEG",
    "PARAMETER_RANGES",
    "DEVIATIONS",
    "XYZ_MATRIX_2DEG",
    "XYZ_MATRIX_10DEG",
    "cie2006_observer",
    "physiological_observers",
    "check_parameter",
    "observer_parameters",
    "observers_dataset",
    "low_density_absorbance",
    "absorbance_table",
    "ocular_media_density",
    "ocular_density_values",
    "optical_density_table",
    "LENS_TABLE",
    "MACULAR_TABLE",
    "macular_peak_density",
    "photopigment_peak_density",
    "read_lens_components",
    "lens_components_dataset",
]
