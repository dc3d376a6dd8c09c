"""Stimulus sets: the colours a mismatch study reproduces on both sides.

A stimulus set is an :class:`xarray.Dataset` with a ``stimulus`` dim and one of three kinds
(attribute ``kind``):

``rgb``
    variable ``signal`` (``stimulus`` × ``primary`` = R, G, B): encoded source RGB 0..1, with
    attributes ``source`` (``bt709``, ``srgb``, ``display_p3``, ``bt2020``) and ``encoding``
    (a transfer-function name, or empty for the source's default).
``xyz``
    variable ``xyz_relative`` (``stimulus`` × ``xyz``): XYZ for the calibration observer relative to
    the reference white, white Y = 100.
``reflectance``
    variable ``reflectance`` (``stimulus`` × ``wavelength``, 0..1) with attribute ``illuminant``
    (a CIE illuminant name known to colour-science, default D65): object colours. An illuminant
    given as a spectrum is kept as the variable ``illuminant`` (``wavelength``, on the set's grid)
    and named by the attribute.

Distinct colours: two stimuli of one set are *the same colour* when every value that defines them
(the three signals, the three XYZ values, or every reflectance factor) agrees within
:data:`SAME_COLOUR_TOLERANCE`. Every set metasim builds holds distinct colours: the built-in sets
do by construction and :func:`combine` merges repeats (keeping the first label; ``ramp`` and
``cube`` both hold black and white, ``primaries`` and ``cube`` the primaries and secondaries).
A set given by the user (:func:`rgb_set`, :func:`xyz_set`, :func:`reflectance_set`,
:func:`read_stimuli_csv`) is kept as given, with a :class:`~metasim.errors.DuplicateStimulusWarning`
naming the repeats; :func:`distinct` merges them.

colour-science objects go in where they fit: a ``MultiSpectralDistributions`` of reflectances, or a
colour-science dataset of reflectance ``SpectralDistribution`` objects (a colour checker), is a
reflectance set (labels become the ``stimulus`` labels); a ``SpectralDistribution`` is an
illuminant. They are converted by :mod:`metasim.spectra.convert` onto the set's grid.
"""

from __future__ import annotations

import itertools
import os
import warnings
from pathlib import Path

import numpy as np
import xarray as xr

from metasim.checks import is_number
from metasim.errors import DuplicateStimulusWarning, FileFormatError, StimulusError
from metasim.io import read_csv_rows
from metasim.spectra import WAVELENGTH_ATTRS, check_wavelengths, default_grid, read_spectra_csv, resample
from metasim.spectra.convert import (as_spectra, from_colour, is_colour_collection, is_colour_spectrum,
                                     unlabelled_message)

KINDS = ("rgb", "xyz", "reflectance")
RGB = ("R", "G", "B")
#: Two stimuli are the same colour when every defining value agrees within this (signal 0..1,
#: XYZ with white Y = 100, or reflectance factor).
SAME_COLOUR_TOLERANCE = 1e-9
_VARIABLE = {"rgb": "signal", "xyz": "xyz_relative", "reflectance": "reflectance"}


def rgb_set(values, labels, *, source: str = "bt709", encoding: str | None = None, description: str = "RGB signals") -> xr.Dataset:
    """Stimuli from encoded source RGB signals (``stimulus`` × R, G, B, each 0..1).

    Parameters
    ----------
    values : array_like (stimulus, 3)
        Encoded R, G, B signals, each 0..1 (unit 1).
    labels : sequence of str
        One name per stimulus (the ``stimulus`` coordinate).
    source : str
        The RGB space the signals are encoded in: ``bt709``, ``srgb``, ``display_p3`` or ``bt2020``.
    encoding : str or None
        A transfer-function name (:mod:`metasim.display.transfer`); None or empty: the source's own.
    description : str
        The set's ``description`` attribute (named in warnings and reports).

    Returns
    -------
    xarray.Dataset
        A stimulus set of kind ``rgb``: ``signal`` (stimulus, primary = R, G, B; unit 1) and the
        attributes ``kind``, ``source``, ``encoding``, ``description``. A repeated colour is kept,
        with a :class:`~metasim.errors.DuplicateStimulusWarning` naming it.

    Raises
    ------
    StimulusError
        Values not of shape (stimulus, 3), no stimulus, or a signal outside 0..1 (named).

    References
    ----------
    The source spaces: ITU-R BT.709-6; IEC 61966-2-1:1999 (sRGB); SMPTE EG 432-1:2010 (Display P3);
    ITU-R BT.2020-2.

    Examples
    --------
    >>> from metasim.metamerism import rgb_set
    >>> stimuli = rgb_set([[1.0, 0.0, 0.0], [0.5, 0.5, 0.5]], ["red", "mid grey"], source="srgb")
    >>> stimuli["signal"].dims, stimuli.attrs["kind"], stimuli.attrs["source"]
    (('stimulus', 'primary'), 'rgb', 'srgb')
    """
    values = np.asarray(values, dtype=float)
    if values.ndim != 2 or values.shape[1] != 3:
        raise StimulusError(f"RGB stimuli need 3 values (R, G, B) each, got shape {values.shape}")
    if values.shape[0] == 0:
        raise StimulusError("the stimulus set is empty; give at least one stimulus")
    if not np.isfinite(values).all() or (values < 0).any() or (values > 1).any():
        bad = values[~(np.isfinite(values) & (values >= 0) & (values <= 1))][0]
        raise StimulusError(f"RGB signal value {bad!r} is outside the allowed range 0..1")
    signal = xr.DataArray(values, dims=("stimulus", "primary"),
                          coords={"stimulus": list(labels), "primary": list(RGB)},
                          attrs={"units": "1", "long_name": f"encoded {source} RGB signal"})
    return _warn_duplicates(xr.Dataset({"signal": signal}, attrs={
        "kind": "rgb", "source": source, "encoding": encoding or "", "description": description}))


def neutral_ramp(steps: int = 11, *, source: str = "bt709", encoding: str | None = None) -> xr.Dataset:
    """Greys from black to white in equal signal steps (``steps`` ≥ 2), white last.

    Parameters
    ----------
    steps : int
        Number of greys, at least 2 (black and white).
    source : str
        The RGB space of the signals (as for :func:`rgb_set`).
    encoding : str or None
        A transfer-function name; None: the source's own.

    Returns
    -------
    xarray.Dataset
        A stimulus set of kind ``rgb`` (see :func:`rgb_set`): ``steps`` greys with R = G = B, labelled
        ``grey 0.000``, ... and ``white``.

    Raises
    ------
    StimulusError
        ``steps`` not an integer ≥ 2.

    References
    ----------
    The source spaces as for :func:`rgb_set` (ITU-R BT.709-6 by default).

    Examples
    --------
    >>> from metasim.metamerism import neutral_ramp
    >>> neutral_ramp(3)["stimulus"].values.tolist()
    ['grey 0.000', 'grey 0.500', 'white']
    """
    if not isinstance(steps, (int, np.integer)) or steps < 2:
        raise StimulusError(f"steps={steps!r} is not allowed; a neutral ramp needs an integer >= 2")
    levels = np.linspace(0.0, 1.0, int(steps))
    labels = [f"grey {v:.3f}" for v in levels]
    labels[-1] = "white"
    return rgb_set(np.repeat(levels[:, None], 3, axis=1), labels, source=source, encoding=encoding,
                    description=f"neutral ramp, {steps} steps")


def primaries_and_secondaries(*, source: str = "bt709", encoding: str | None = None, level: float = 1.0) -> xr.Dataset:
    """White, the three primaries and three secondaries of the source space at signal ``level``.

    Parameters
    ----------
    source : str
        The RGB space of the signals (as for :func:`rgb_set`).
    encoding : str or None
        A transfer-function name; None: the source's own.
    level : float
        The encoded signal of the channels that are on, 0 < level ≤ 1 (unit 1).

    Returns
    -------
    xarray.Dataset
        A stimulus set of kind ``rgb`` (see :func:`rgb_set`) of seven stimuli: white, red, green,
        blue, cyan, magenta, yellow.

    Raises
    ------
    StimulusError
        ``level`` outside (0, 1].

    References
    ----------
    The source spaces as for :func:`rgb_set` (ITU-R BT.709-6 by default).

    Examples
    --------
    >>> from metasim.metamerism import primaries_and_secondaries
    >>> stimuli = primaries_and_secondaries(level=0.5)
    >>> stimuli["stimulus"].values.tolist()
    ['white', 'red', 'green', 'blue', 'cyan', 'magenta', 'yellow']
    >>> stimuli["signal"].sel(stimulus="cyan").values.tolist()
    [0.0, 0.5, 0.5]
    """
    if not 0 < level <= 1:
        raise StimulusError(f"level={level!r} is not allowed; need 0 < level <= 1")
    table = {"white": (1, 1, 1), "red": (1, 0, 0), "green": (0, 1, 0), "blue": (0, 0, 1),
             "cyan": (0, 1, 1), "magenta": (1, 0, 1), "yellow": (1, 1, 0)}
    return rgb_set(level * np.array(list(table.values()), dtype=float), list(table), source=source,
                    encoding=encoding, description="white, primaries and secondaries")


def rgb_cube_grid(per_axis: int = 5, *, source: str = "bt709", encoding: str | None = None) -> xr.Dataset:
    """A regular grid of ``per_axis``³ signals filling the source RGB cube (corners included).

    Parameters
    ----------
    per_axis : int
        Levels per channel, equally spaced from 0 to 1, at least 2.
    source : str
        The RGB space of the signals (as for :func:`rgb_set`).
    encoding : str or None
        A transfer-function name; None: the source's own.

    Returns
    -------
    xarray.Dataset
        A stimulus set of kind ``rgb`` (see :func:`rgb_set`) of ``per_axis``³ stimuli labelled
        ``rgb R G B`` (two decimals), blue varying fastest.

    Raises
    ------
    StimulusError
        ``per_axis`` not an integer ≥ 2.

    References
    ----------
    The source spaces as for :func:`rgb_set` (ITU-R BT.709-6 by default).

    Examples
    --------
    >>> from metasim.metamerism import rgb_cube_grid
    >>> cube = rgb_cube_grid(2)
    >>> cube.sizes["stimulus"], cube["stimulus"].values[:3].tolist()
    (8, ['rgb 0.00 0.00 0.00', 'rgb 0.00 0.00 1.00', 'rgb 0.00 1.00 0.00'])
    """
    if not isinstance(per_axis, (int, np.integer)) or per_axis < 2:
        raise StimulusError(f"per_axis={per_axis!r} is not allowed; need an integer >= 2")
    levels = np.linspace(0.0, 1.0, int(per_axis))
    values = np.array(list(itertools.product(levels, repeat=3)))
    labels = [f"rgb {r:.2f} {g:.2f} {b:.2f}" for r, g, b in values]
    return rgb_set(values, labels, source=source, encoding=encoding,
                    description=f"RGB cube grid, {per_axis} levels per axis")


def cie_13_3_samples(*, wavelengths=None, illuminant="D65") -> xr.Dataset:
    """The 14 CIE 13.3-1995 test colour samples (reflectances from colour-science) under ``illuminant``
    (a name, or a spectrum as for :func:`reflectance_set`).

    Parameters
    ----------
    wavelengths : array_like or xarray.DataArray (wavelength), optional
        The grid in nm to resample the reflectances onto (default 390-830 nm at 1 nm).
    illuminant : str, xarray.DataArray (wavelength) or colour.SpectralDistribution
        A CIE illuminant name known to colour-science (default D65), or a spectrum on the grid.

    Returns
    -------
    xarray.Dataset
        A stimulus set of kind ``reflectance`` (see :func:`reflectance_set`): 14 stimuli ``TCS01`` ...
        ``TCS14``, ``reflectance`` (stimulus, wavelength; unit 1).

    Raises
    ------
    SpectrumError
        ``wavelengths`` not an ascending grid of positive values.
    StimulusError
        An unknown illuminant name or an unusable illuminant spectrum.

    References
    ----------
    CIE 13.3-1995 Method of measuring and specifying colour rendering properties of light sources.

    Examples
    --------
    >>> from metasim.metamerism import cie_13_3_samples
    >>> samples = cie_13_3_samples(wavelengths=range(400, 701, 10))
    >>> dict(samples.sizes), samples["stimulus"].values[:3].tolist(), samples.attrs["illuminant"]
    ({'stimulus': 14, 'wavelength': 31}, ['TCS01', 'TCS02', 'TCS03'], 'D65')
    """
    from colour.quality.datasets.tcs import SDS_TCS

    grid = check_wavelengths(default_grid() if wavelengths is None else wavelengths, where="stimulus grid")
    table = from_colour(SDS_TCS["CIE 1995"], dim="stimulus", units="1", long_name="spectral reflectance factor")
    return reflectance_set(resample(table, grid, warn_share=None).values, grid, list(table["stimulus"].values),
                           illuminant=illuminant, description="CIE 13.3-1995 test colour samples")


def reflectance_set(values, wavelengths=None, labels=None, *, illuminant="D65",
                    description: str | None = None) -> xr.Dataset:
    """Object colours from reflectance factors (``stimulus`` × ``wavelength``, 0..1).

    Parameters
    ----------
    values
        Reflectance factors: a plain (stimulus, wavelength) array with ``wavelengths`` and
        ``labels``; a DataArray with dims ``stimulus`` and ``wavelength``; or colour-science
        reflectances (a ``MultiSpectralDistributions``, or a mapping / list of
        ``SpectralDistribution`` objects such as ``colour.SDS_COLOURCHECKERS[...]``), whose labels
        become the stimulus labels.
    wavelengths
        The grid of a plain array; for colour-science objects the grid to put them on (default
        390-830 nm at 1 nm, as every stimulus set; :func:`metasim.spectra.resample` policy); for
        a DataArray, unused (it keeps its own).
    labels
        Stimulus names (plain arrays; for other inputs they replace the inputs' labels).
    illuminant
        A CIE illuminant name known to colour-science (default D65), or a spectrum (a ``wavelength``
        DataArray or a colour-science ``SpectralDistribution``), put on the set's grid.
    description : str, optional
        The set's ``description`` attribute (default "object colours", or the colour-science source).

    Returns
    -------
    xarray.Dataset
        A stimulus set of kind ``reflectance``: ``reflectance`` (stimulus, wavelength; unit 1), the
        attribute ``illuminant`` naming the illuminant and, for an illuminant given as a spectrum,
        the variable ``illuminant`` (wavelength). A repeated colour is kept, with a
        :class:`~metasim.errors.DuplicateStimulusWarning` naming it.

    Raises
    ------
    StimulusError
        Values of another shape or dims, no stimulus, negative or non-finite factors, a label count
        that differs from the stimulus count, an unknown illuminant name or an unusable illuminant
        spectrum.
    SpectrumError
        Wavelengths that are not an ascending grid of positive values.

    References
    ----------
    CIE 15:2018 Colorimetry, 4th edition (spectral reflectance factor; CIE standard illuminants).

    Examples
    --------
    >>> from metasim.metamerism import reflectance_set
    >>> stimuli = reflectance_set([[0.2, 0.4, 0.6], [0.5, 0.5, 0.5]], [500, 550, 600], ["rising", "flat"],
    ...                           illuminant="D50")
    >>> stimuli["reflectance"].dims, stimuli.attrs["illuminant"]
    (('stimulus', 'wavelength'), 'D50')
    """
    if is_colour_spectrum(values) or is_colour_collection(values):
        values = as_spectra(values, dim="stimulus", wavelengths=default_grid() if wavelengths is None else wavelengths,
                            where="reflectances", units="1", long_name="spectral reflectance factor")
        description = description or f"reflectances from colour-science ({values.attrs.get('source', '')})"
    if isinstance(values, xr.DataArray):
        if values.ndim == 1 and "wavelength" in values.dims:
            values = values.expand_dims(stimulus=[str(values.name or "sample")])
        other = [d for d in values.dims if d != "wavelength"]
        if "wavelength" not in values.dims or len(other) != 1:
            raise StimulusError(f"reflectances need dims ('stimulus', 'wavelength'), got {tuple(values.dims)}")
        label_dim = other[0]
        if labels is None:
            labels = ([str(v) for v in values.coords[label_dim].values] if label_dim in values.coords
                      else [f"sample {i + 1}" for i in range(values.sizes[label_dim])])
        wavelengths = values.coords["wavelength"].values
        values = values.transpose(label_dim, "wavelength").values
    if wavelengths is None or labels is None:
        raise StimulusError(unlabelled_message("reflectances", ("stimulus", "wavelength")) +
                            "; or pass wavelengths= and labels=")
    wl = check_wavelengths(wavelengths, where="reflectance grid")
    values = np.asarray(values, dtype=float)
    if values.ndim != 2 or values.shape[1] != wl.size:
        raise StimulusError(f"reflectances need shape (stimulus, {wl.size} wavelengths), got {values.shape}")
    if values.shape[0] == 0:
        raise StimulusError("the stimulus set is empty; give at least one reflectance")
    if not np.isfinite(values).all() or (values < 0).any():
        raise StimulusError("reflectance factors must be finite and >= 0")
    labels = list(labels)
    if len(labels) != values.shape[0]:
        raise StimulusError(f"{len(labels)} labels for {values.shape[0]} reflectances; give one label per stimulus")
    refl = xr.DataArray(values, dims=("stimulus", "wavelength"),
                        coords={"stimulus": labels, "wavelength": ("wavelength", wl, dict(WAVELENGTH_ATTRS))},
                        attrs={"units": "1", "long_name": "spectral reflectance factor"})
    data = {"reflectance": refl}
    if isinstance(illuminant, str):
        _check_illuminant(illuminant)
        name = illuminant
    else:
        spectrum = _illuminant_of_spectrum(illuminant, wl)
        name = str(spectrum.name)
        data["illuminant"] = spectrum
    return _warn_duplicates(xr.Dataset(data, attrs={"kind": "reflectance", "illuminant": name,
                                                    "description": description or "object colours"}))


def _illuminant_of_spectrum(illuminant, wavelengths) -> xr.DataArray:
    """An illuminant spectrum (DataArray or colour-science distribution) on a grid, as a stimulus-set variable."""
    spectrum = as_spectra(illuminant, wavelengths=wavelengths, where="illuminant", dims_example=("wavelength",))
    if set(spectrum.dims) != {"wavelength"}:
        raise StimulusError(f"an illuminant has only a 'wavelength' dim, got {tuple(spectrum.dims)}")
    if not np.array_equal(spectrum.coords["wavelength"].values, wavelengths):
        raise StimulusError("the illuminant is sampled on another grid than the reflectances; resample it "
                            "(metasim.spectra.resample) or give it as a colour-science SpectralDistribution")
    values = np.asarray(spectrum.values, dtype=float)
    if not np.isfinite(values).all() or (values < 0).any() or not (values > 0).any():
        raise StimulusError("an illuminant's spectral power must be finite, >= 0 and not all zero")
    name = str(spectrum.name) if spectrum.name is not None else "illuminant"
    return xr.DataArray(values, dims=("wavelength",),
                        coords={"wavelength": ("wavelength", np.asarray(wavelengths, float), dict(WAVELENGTH_ATTRS))},
                        attrs={"units": spectrum.attrs.get("units", "1"),
                               "long_name": f"illuminant {name} (relative spectral power)"}, name=name)


def stimulus_illuminant(stimuli: xr.Dataset, wavelengths) -> xr.DataArray:
    """The illuminant of a reflectance set on ``wavelengths``: its own spectrum (the variable
    ``illuminant``, which shares the set's grid) or the CIE illuminant its attribute names."""
    if "illuminant" in stimuli.data_vars:
        return stimuli["illuminant"]
    return illuminant_spectrum(stimuli.attrs.get("illuminant", "D65"), wavelengths)


def as_stimuli(stimuli, wavelengths=None) -> xr.Dataset:
    """A stimulus set at a public entry: a stimulus-set Dataset passes unchanged; colour-science
    reflectances become a reflectance set on ``wavelengths`` (:func:`reflectance_set`); a plain
    array is refused with how to make a set of it."""
    if is_colour_spectrum(stimuli) or is_colour_collection(stimuli):
        if type(stimuli).__name__ == "SpectralDistribution":
            raise StimulusError("one colour-science SpectralDistribution is not a stimulus set; give "
                                "reflectances (a MultiSpectralDistributions) or use it as the illuminant")
        return reflectance_set(stimuli, wavelengths)
    if isinstance(stimuli, (np.ndarray, list, tuple)):
        raise StimulusError(
            "stimuli: a plain array does not say what it holds; make a stimulus set of it, e.g. "
            "rgb_set(values, labels) for encoded R, G, B signals, xyz_set(values, labels) for XYZ "
            "relative to the white, or reflectance_set(values, wavelengths_nm, labels)")
    return stimuli


def xyz_set(values, labels, *, description: str = "XYZ targets") -> xr.Dataset:
    """Targets as XYZ for the calibration observer, relative to the reference white (white Y = 100).

    Parameters
    ----------
    values : array_like (stimulus, 3)
        X, Y, Z of each stimulus for the calibration observer, relative (the reference white has
        Y = 100), each finite and ≥ 0.
    labels : sequence of str
        One name per stimulus.
    description : str
        The set's ``description`` attribute.

    Returns
    -------
    xarray.Dataset
        A stimulus set of kind ``xyz``: ``xyz_relative`` (stimulus, xyz). A repeated colour is kept,
        with a :class:`~metasim.errors.DuplicateStimulusWarning` naming it.

    Raises
    ------
    StimulusError
        Values not of shape (stimulus, 3), no stimulus, or negative or non-finite values.

    References
    ----------
    CIE 15:2018 Colorimetry, 4th edition (tristimulus values; relative values with Y = 100 for the
    white).

    Examples
    --------
    >>> from metasim.metamerism import xyz_set
    >>> stimuli = xyz_set([[95.047, 100.0, 108.883], [20.0, 21.0, 22.0]], ["white", "grey"])
    >>> stimuli["xyz_relative"].sel(stimulus="grey").values.tolist()
    [20.0, 21.0, 22.0]
    """
    values = np.asarray(values, dtype=float)
    if values.ndim != 2 or values.shape[1] != 3:
        raise StimulusError(f"XYZ stimuli need 3 values each, got shape {values.shape}")
    if values.shape[0] == 0:
        raise StimulusError("the stimulus set is empty; give at least one stimulus")
    if not np.isfinite(values).all() or (values < 0).any():
        raise StimulusError("XYZ stimuli must be finite and >= 0 (white Y = 100)")
    xyz = xr.DataArray(values, dims=("stimulus", "xyz"), coords={"stimulus": list(labels), "xyz": ["X", "Y", "Z"]},
                       attrs={"units": "1 (reference white Y = 100)", "long_name": "target tristimulus values"})
    return _warn_duplicates(xr.Dataset({"xyz_relative": xyz}, attrs={"kind": "xyz", "description": description}))


def _colour_values(stimuli: xr.Dataset, kind: str) -> np.ndarray:
    """The values that define each stimulus's colour: (stimulus, k) float."""
    variable = stimuli[_VARIABLE[kind]]
    other = [d for d in variable.dims if d != "stimulus"]
    return np.asarray(variable.transpose("stimulus", *other).values, dtype=float).reshape(variable.sizes["stimulus"], -1)


def duplicate_colours(stimuli: xr.Dataset, *, tolerance: float = SAME_COLOUR_TOLERANCE) -> list[list[int]]:
    """Groups of stimuli that are the same colour (every defining value within ``tolerance``).

    Parameters
    ----------
    stimuli : Dataset
        A stimulus set.
    tolerance : float
        Largest absolute difference of any defining value (signal, XYZ or reflectance factor) for
        two stimuli to count as one colour.

    Returns
    -------
    list of list of int
        One list of stimulus positions per repeated colour (two or more each, ascending, the first
        one the stimulus a merge keeps); empty when every colour is distinct. Sameness is taken as
        transitive (a chain of near-equal stimuli is one group).

    Raises
    ------
    StimulusError
        ``stimuli`` is not a stimulus set.

    Examples
    --------
    >>> import warnings
    >>> from metasim.metamerism import duplicate_colours, rgb_set
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")  # rgb_set warns of the repeat
    ...     stimuli = rgb_set([[1, 1, 1], [0, 0, 0], [1, 1, 1]], ["white", "black", "white again"])
    >>> duplicate_colours(stimuli)
    [[0, 2]]
    """
    values = _colour_values(stimuli, check_stimuli(stimuli))
    n = values.shape[0]
    # candidates by one weighted sum: |Σ r·(a − b)| <= tolerance·Σ r whenever max|a − b| <= tolerance,
    # so sorting the sums and comparing neighbours within that reach finds every pair, no more
    # than a few spurious ones, without comparing all n² pairs
    weights = 1.0 + np.arange(values.shape[1]) / max(values.shape[1], 1)
    key = values @ weights
    reach = tolerance * weights.sum() * (1 + 1e-9) + 1e-12 * np.abs(key).max(initial=0.0)
    order = np.argsort(key, kind="stable")
    parent = np.arange(n)

    def root(i):
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    for a in range(n):  # Python over candidate neighbours only: they are rare
        i = order[a]
        for b in range(a + 1, n):
            j = order[b]
            if key[j] - key[i] > reach:
                break
            if np.abs(values[i] - values[j]).max() <= tolerance:
                ri, rj = root(i), root(j)
                if ri != rj:
                    parent[max(ri, rj)] = min(ri, rj)
    roots = np.array([root(i) for i in range(n)])
    groups = {}
    for i, r in enumerate(roots):
        groups.setdefault(int(r), []).append(i)
    return sorted((g for g in groups.values() if len(g) > 1), key=lambda g: g[0])


def _describe(stimuli: xr.Dataset, groups) -> str:
    labels = [str(v) for v in stimuli["stimulus"].values]
    return "; ".join(" = ".join(repr(labels[i]) for i in group) for group in groups)


def _warn_duplicates(stimuli: xr.Dataset) -> xr.Dataset:
    """Warn (naming them) when a user-given set repeats a colour; the set is returned unchanged."""
    groups = duplicate_colours(stimuli)
    if groups:
        extra = sum(len(g) - 1 for g in groups)
        warnings.warn(
            f"the stimulus set '{stimuli.attrs.get('description', '')}' holds {extra} repeated "
            f"colour{'s' if extra > 1 else ''} ({_describe(stimuli, groups)}); pooled statistics count each "
            "repeat again; merge them with metasim.metamerism.distinct()",
            DuplicateStimulusWarning, stacklevel=3)
    return stimuli


def distinct(stimuli: xr.Dataset, *, tolerance: float = SAME_COLOUR_TOLERANCE) -> xr.Dataset:
    """The stimulus set with every repeated colour merged into its first occurrence.

    Parameters
    ----------
    stimuli : Dataset
        A stimulus set.
    tolerance : float
        As for :func:`duplicate_colours`.

    Returns
    -------
    Dataset
        The set without repeats, in the original order; the attribute ``merged_stimuli`` lists what
        was merged ("kept = dropped = ..."; empty when nothing was).

    Raises
    ------
    StimulusError
        ``stimuli`` is not a stimulus set.

    Examples
    --------
    >>> import warnings
    >>> from metasim.metamerism import distinct, rgb_set
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")  # rgb_set warns of the repeat
    ...     stimuli = rgb_set([[1, 1, 1], [0, 0, 0], [1, 1, 1]], ["white", "black", "white again"])
    >>> merged = distinct(stimuli)
    >>> merged["stimulus"].values.tolist(), merged.attrs["merged_stimuli"]
    (['white', 'black'], "'white' = 'white again'")
    """
    groups = duplicate_colours(stimuli, tolerance=tolerance)
    out = stimuli
    if groups:
        drop = sorted(i for group in groups for i in group[1:])
        keep = np.setdiff1d(np.arange(stimuli.sizes["stimulus"]), drop)
        out = stimuli.isel(stimulus=keep)
    out = out.copy()
    previous = str(stimuli.attrs.get("merged_stimuli", ""))
    now = _describe(stimuli, groups)
    out.attrs["merged_stimuli"] = "; ".join(t for t in (previous, now) if t)
    return out


def _check_illuminant(name: str) -> None:
    import colour

    if name not in colour.SDS_ILLUMINANTS:
        raise StimulusError(f"illuminant {name!r} is not known; use a CIE illuminant name such as D65, D50, A, F2")


def illuminant_spectrum(name, wavelengths) -> xr.DataArray:
    """A CIE illuminant's relative spectral power distribution on a grid (colour-science tables);
    ``name`` may also be the spectrum itself (a colour-science ``SpectralDistribution`` or a
    ``wavelength`` DataArray), put on the grid."""
    import colour

    if not isinstance(name, str):
        return _illuminant_of_spectrum(name, check_wavelengths(wavelengths, where="illuminant grid"))
    _check_illuminant(name)
    grid = check_wavelengths(wavelengths, where="illuminant grid")
    values = resample(from_colour(colour.SDS_ILLUMINANTS[name]), grid, warn_share=None).values
    return xr.DataArray(values, dims=("wavelength",), coords={"wavelength": ("wavelength", grid, dict(WAVELENGTH_ATTRS))},
                        attrs={"units": "1", "long_name": f"CIE illuminant {name} (relative)"}, name=name)


def check_stimuli(stimuli: xr.Dataset) -> str:
    """Validate a stimulus set and return its kind."""
    if not isinstance(stimuli, xr.Dataset) or stimuli.attrs.get("kind") not in KINDS:
        raise StimulusError(
            "stimuli must be a stimulus-set Dataset (kind rgb, xyz or reflectance); build one with "
            "metasim.metamerism.stimuli (neutral_ramp, primaries_and_secondaries, rgb_cube_grid, "
            "cie_13_3_samples, read_stimuli_csv)"
        )
    kind = stimuli.attrs["kind"]
    variable = _VARIABLE[kind]
    if variable not in stimuli or "stimulus" not in stimuli[variable].dims:
        raise StimulusError(f"a '{kind}' stimulus set needs a '{variable}' variable with a 'stimulus' dim")
    if stimuli.sizes.get("stimulus", 0) == 0:
        raise StimulusError("the stimulus set is empty; give at least one stimulus")
    return kind


def combine(*sets: xr.Dataset) -> xr.Dataset:
    """Concatenate stimulus sets of the same kind (and source/illuminant) along ``stimulus``.

    The result holds distinct colours: a colour given more than once (say white in a ramp, the
    primaries and an RGB grid) is kept once, under its first label (:func:`distinct`; attribute
    ``merged_stimuli``). Different colours that share a label get `` (2)``, `` (3)``, ... appended
    to the later labels (attribute ``renamed_stimuli``).

    Parameters
    ----------
    *sets : xarray.Dataset
        Stimulus sets of one kind with the same ``source``, ``encoding`` and ``illuminant``
        attributes (and the same illuminant spectrum, if any).

    Returns
    -------
    xarray.Dataset
        One stimulus set, the sets' stimuli in order, repeats merged; ``description`` joins theirs
        with " + ".

    Raises
    ------
    StimulusError
        No set, sets of different kinds or settings, or a set that is not a stimulus set.

    Examples
    --------
    >>> from metasim.metamerism import combine, neutral_ramp, primaries_and_secondaries
    >>> both = combine(neutral_ramp(3), primaries_and_secondaries())
    >>> both["stimulus"].values.tolist()
    ['grey 0.000', 'grey 0.500', 'white', 'red', 'green', 'blue', 'cyan', 'magenta', 'yellow']
    >>> both.attrs["merged_stimuli"]
    "'white' = 'white'"
    """
    if not sets:
        raise StimulusError("combine needs at least one stimulus set")
    kinds = {check_stimuli(s) for s in sets}
    if len(kinds) != 1:
        raise StimulusError(f"cannot combine stimulus sets of kinds {sorted(kinds)}; combine sets of one kind")
    keys = ("source", "encoding", "illuminant")
    first = {k: sets[0].attrs.get(k) for k in keys}
    for s in sets[1:]:
        other = {k: s.attrs.get(k) for k in keys}
        if other != first:
            raise StimulusError(f"stimulus sets differ in {first} vs {other}; combine sets with the same settings")
    spectra = [s["illuminant"] for s in sets if "illuminant" in s.data_vars]
    if spectra and (len(spectra) != len(sets) or any(not spectra[0].identical(o) for o in spectra[1:])):
        raise StimulusError("stimulus sets carry different illuminant spectra; combine sets under one illuminant")
    out = xr.concat(sets, dim="stimulus", data_vars="minimal", coords="minimal", compat="override",
                    combine_attrs="override")
    out.attrs["description"] = " + ".join(s.attrs.get("description", "") for s in sets)
    out.attrs.pop("merged_stimuli", None)
    out = distinct(out)
    labels = [str(v) for v in out["stimulus"].values]
    if len(set(labels)) != len(labels):
        unique, renamed = [], []
        for label in labels:
            new, i = label, 2
            while new in unique or (new != label and new in labels):
                new, i = f"{label} ({i})", i + 1
            if new != label:
                renamed.append(f"{label!r} -> {new!r}")
            unique.append(new)
        out = out.assign_coords(stimulus=unique)
        out.attrs["renamed_stimuli"] = "; ".join(renamed)
    return out


def read_stimuli_csv(path: str | os.PathLike, kind: str, *, source: str = "bt709", encoding: str | None = None,
                     illuminant: str = "D65", wavelengths=None) -> xr.Dataset:
    """Read a user stimulus set from CSV.

    * ``kind="rgb"``: header ``name,R,G,B``, one stimulus per row, signals 0..1.
    * ``kind="xyz"``: header ``name,X,Y,Z``, relative to the reference white (white Y = 100).
    * ``kind="reflectance"``: the spectral layout of :func:`metasim.spectra.read_spectra_csv`
      (``wavelength_nm,<sample>,...``), one column per stimulus, resampled onto ``wavelengths``
      (a part of a reflectance outside the grid gives a warning, not an error: it is not energy).

    Lines starting with ``#`` are notes (:func:`metasim.io.read_csv_rows`).

    Parameters
    ----------
    path : str or os.PathLike
        The CSV file (UTF-8).
    kind : {"rgb", "xyz", "reflectance"}
        What the file holds.
    source : str
        For ``rgb``: the RGB space of the signals (as for :func:`rgb_set`).
    encoding : str or None
        For ``rgb``: a transfer-function name; None: the source's own.
    illuminant : str
        For ``reflectance``: a CIE illuminant name known to colour-science.
    wavelengths : array_like, optional
        For ``reflectance``: the grid in nm (default 390-830 nm at 1 nm).

    Returns
    -------
    xarray.Dataset
        A stimulus set of the given kind (:func:`rgb_set`, :func:`xyz_set`, :func:`reflectance_set`),
        described as read "from" the file's name.

    Raises
    ------
    StimulusError
        An unknown ``kind``, a file with a header but no stimuli, or a value out of range (naming
        the file).
    FileFormatError
        A wrong header, a row with another number of cells, a cell that is not a number, or
        repeated stimulus names (naming the file and line).

    Examples
    --------
    >>> import tempfile
    >>> from pathlib import Path
    >>> from metasim.metamerism import read_stimuli_csv
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = Path(folder) / "greys.csv"
    ...     _ = path.write_text("name,R,G,B\\ndark grey,0.2,0.2,0.2\\nlight grey,0.8,0.8,0.8\\n")
    ...     stimuli = read_stimuli_csv(path, "rgb")
    >>> stimuli["stimulus"].values.tolist(), stimuli.attrs["description"]
    (['dark grey', 'light grey'], 'RGB from greys.csv')
    """
    if kind not in KINDS:
        raise StimulusError(f"kind={kind!r} is not known; allowed: {', '.join(KINDS)}")
    path = Path(path)
    if kind == "reflectance":
        spectra = read_spectra_csv(path, units="1", long_name="spectral reflectance factor")
        # a reflectance is not emitted energy: a part beyond the grid only warns (nothing on it is an error)
        spectra = resample(spectra, default_grid() if wavelengths is None else wavelengths)
        return reflectance_set(spectra.values, spectra.wavelength.values, list(spectra.channel.values),
                               illuminant=illuminant, description=f"reflectances from {path.name}")
    expected = ["R", "G", "B"] if kind == "rgb" else ["X", "Y", "Z"]
    _, records = read_csv_rows(path)
    labels, rows = [], []
    header = None
    for line_no, record in records:
        if header is None:
            header = [c.strip() for c in record]
            if [h.upper() for h in header[1:]] != expected or len(header) != 4:
                raise FileFormatError(f"{path}:{line_no}: header {header} must be name,{','.join(expected)}")
            continue
        if len(record) != 4:
            raise FileFormatError(f"{path}:{line_no}: {len(record)} cells; expected 4 (name,{','.join(expected)})")
        try:
            rows.append([float(c) for c in record[1:]])
        except ValueError:
            bad = next(c for c in record[1:] if not is_number(c))
            raise FileFormatError(f"{path}:{line_no}: cell {bad.strip()!r} is not a number") from None
        labels.append(record[0].strip())
    if header is None:
        raise FileFormatError(f"{path}: file is empty; expected a header name,{','.join(expected)} and rows")
    if not rows:
        raise StimulusError(f"{path}: header but no stimuli; the stimulus set is empty")
    if len(set(labels)) != len(labels):
        raise FileFormatError(f"{path}: stimulus names repeat; each row needs a unique name")
    try:
        if kind == "rgb":
            return rgb_set(np.array(rows), labels, source=source, encoding=encoding,
                           description=f"RGB from {path.name}")
        return xyz_set(np.array(rows), labels, description=f"XYZ from {path.name}")
    except StimulusError as exc:  # a value out of range: name the file
        raise StimulusError(f"{path}: {exc}") from None


__all__ = [
    "KINDS",
    "rgb_set",
    "neutral_ramp",
    "primaries_and_secondaries",
    "rgb_cube_grid",
    "cie_13_3_samples",
    "reflectance_set",
    "xyz_set",
    "illuminant_spectrum",
    "stimulus_illuminant",
    "as_stimuli",
    "check_stimuli",
    "combine",
    "SAME_COLOUR_TOLERANCE",
    "duplicate_colours",
    "distinct",
    "read_stimuli_csv",
]
