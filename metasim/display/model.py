"""The N-primary display model.

Model assumption — channel additivity and independence: the spectral radiance a display emits is
its black-level spectrum plus, for every primary, the primary's full-drive spectrum times its
linear drive value d ∈ [0, 1]::

    L(λ) = L_black(λ) + Σ_p d_p · L_p(λ)

There is no crosstalk between channels and no change of spectral shape with drive level. The
transfer function only maps the encoded signal of each channel to its linear drive
(:mod:`metasim.display.transfer`).

A :class:`Display` is a thin, validated wrapper around an :class:`xarray.Dataset`, so that it can
be saved to netCDF and stacked along a ``design`` dim for sweeps::

    spectra         ([design,] primary, wavelength)  W sr-1 m-2 nm-1  radiance of each primary at full drive
    black           ([design,] wavelength)           W sr-1 m-2 nm-1  black-level radiance (all drives 0)
    peak_luminance  ([design])                       cd m-2           nominal white luminance L_W
    primary_gain    ([design,] primary)              1                gain applied by white calibration
    attrs: transfer_function, gamma, black_luminance, name, model, assumption, metasim_version,
           and after calibration calibration_observer, calibration_white_xy, calibration_luminance.

References
----------
Berns, R. S. (1996) Methods for characterizing CRT displays. Displays 16(4) 173-182 (the additive,
channel-independent display model); IEC 61966-2-1:1999 (transfer functions, see transfer.py).
"""

from __future__ import annotations

from typing import Sequence

import numpy as np
import xarray as xr

from metasim._version import __version__
from metasim.errors import DisplayError
from metasim.observers.standard import STANDARD_OBSERVERS, standard_cmf, standard_observer
from metasim.observers.convert import as_observer
from metasim.spectra import RADIANCE_UNITS, WAVELENGTH_ATTRS, check_spectra, grid_step, require_same_grid
from metasim.spectra.convert import as_spectra, is_colour_object
from metasim.colorimetry import tristimulus
from metasim.colorimetry.integration import apply_matrices, spectral_products
from metasim.display.optics import display_matrices
from metasim.colorimetry.tristimulus import grid_of, observer_responses
from metasim.labelling import labelled
from metasim.display.transfer import TRANSFER_FUNCTIONS, check_transfer, eotf, eotf_inverse

ASSUMPTION = ("channel additivity: emitted radiance = black + sum over primaries of drive x full-drive "
              "spectrum; no crosstalk, no spectral change with drive")
_CORE_DIMS = ("primary", "wavelength")


def _batch_dims(spectra: xr.DataArray) -> list[str]:
    return [d for d in spectra.dims if d not in _CORE_DIMS]


def _check_primaries(spectra: xr.DataArray) -> None:
    """Refuse fewer than 3, repeated labels, dark, duplicate or collinear primaries."""
    n = spectra.sizes["primary"]
    labels = [str(v) for v in spectra.coords["primary"].values] if "primary" in spectra.coords else []
    if n < 3:
        raise DisplayError(f"a display needs at least 3 primaries, got {n} ({labels}); allowed: N >= 3")
    if len(set(labels)) != n:
        raise DisplayError(f"primary labels {labels} repeat; each primary needs a unique label")
    batch = _batch_dims(spectra)
    values = spectra.variable.transpose(*batch, "primary", "wavelength").values.reshape(-1, n, spectra.sizes["wavelength"])
    norms = np.linalg.norm(values, axis=-1)
    if (norms <= 0).any():
        b, p = np.argwhere(norms <= 0)[0]
        raise DisplayError(f"primary {labels[p]!r} emits nothing (all zero); every primary must emit")
    unit = values / norms[..., None]
    cosine = np.einsum("bpw,bqw->bpq", unit, unit)
    upper = np.triu(np.ones((n, n), dtype=bool), 1)
    dup = (cosine > 1 - 1e-9) & upper
    if dup.any():
        b, p, q = np.argwhere(dup)[0]
        raise DisplayError(
            f"primaries {labels[p]!r} and {labels[q]!r} have the same spectral shape; primaries must differ"
        )
    wavelengths = spectra.coords.variables["wavelength"].values
    cmf = standard_cmf("cie1931_2", wavelengths)
    xyz = (spectral_products(values.reshape(-1, values.shape[-1]), cmf) * grid_step(wavelengths)).reshape(-1, n, 3)
    total = xyz.sum(-1)
    if (total <= 0).any():
        b, p = np.argwhere(total <= 0)[0]
        raise DisplayError(f"primary {labels[p]!r} has no visible emission (X+Y+Z = 0 for CIE 1931 2°)")
    xy = xyz[..., :2] / total[..., None]
    centred = xy - xy.mean(axis=1, keepdims=True)
    singular = np.linalg.svd(centred, compute_uv=False)  # (B, 2)
    spread = singular[:, 0]
    if (singular[:, 1] <= 1e-6 * np.maximum(spread, 1e-12)).any():
        b = int(np.argmax(singular[:, 1] <= 1e-6 * np.maximum(spread, 1e-12)))
        text = ", ".join(f"{lab} ({x:.4f}, {y:.4f})" for lab, (x, y) in zip(labels, xy[b]))
        raise DisplayError(f"primaries are collinear in chromaticity: {text}; they must span a gamut area")


def _check_settings(dataset: xr.Dataset) -> None:
    """Refuse an unknown transfer function or settings it does not allow."""
    transfer = dataset.attrs.get("transfer_function")
    if transfer not in TRANSFER_FUNCTIONS:
        raise DisplayError(f"transfer function {transfer!r} is not known; allowed: {', '.join(TRANSFER_FUNCTIONS)}")
    check_transfer(transfer, gamma=float(dataset.attrs.get("gamma", 2.2)),
                   peak_luminance=dataset["peak_luminance"].values if "peak_luminance" in dataset else None,
                   black_luminance=float(dataset.attrs.get("black_luminance", 0.0)))


class Display:
    """An additive display of N ≥ 3 primaries (see the module docstring for the layout).

    Build one with :func:`make_display`; convert with :meth:`to_dataset` / :meth:`from_dataset`.

    Examples
    --------
    >>> import metasim
    >>> from metasim.emitters import laser_line
    >>> display = metasim.make_display(laser_line([465, 532, 638], 1.0, name=["B", "G", "R"]))
    >>> display.n_primaries, display.primaries
    (3, ['B', 'G', 'R'])
    """

    def __init__(self, dataset: xr.Dataset):
        if not isinstance(dataset, xr.Dataset) or "spectra" not in dataset:
            raise DisplayError("a Display needs a Dataset with a 'spectra' variable (primary x wavelength)")
        spectra = dataset["spectra"]
        for dim in _CORE_DIMS:
            if dim not in spectra.dims:
                raise DisplayError(f"display spectra have dims {tuple(spectra.dims)}; need 'primary' and 'wavelength'")
        check_spectra(spectra, where="display spectra")
        _check_primaries(spectra)
        if "black" in dataset:
            check_spectra(dataset["black"], where="display black")
            if "primary" in dataset["black"].dims:
                raise DisplayError("the black-level spectrum must not have a 'primary' dim")
        _check_settings(dataset)
        self._ds = dataset

    # -- conversion ----------------------------------------------------------------------------
    @classmethod
    def from_dataset(cls, dataset: xr.Dataset) -> "Display":
        """A Display from a Dataset of the documented layout (for example one read from netCDF)."""
        return cls(dataset.copy())

    def to_dataset(self) -> xr.Dataset:
        """The display as a Dataset (a copy), ready for :func:`metasim.io.save_dataset` or sweeps."""
        return self._ds.copy(deep=True)

    def __repr__(self) -> str:
        batch = {d: self._ds.sizes[d] for d in self.batch_dims}
        return (f"Display({self.name!r}, primaries={self.primaries}, transfer={self.transfer!r}"
                + (f", {batch}" if batch else "") + ")")

    # -- properties ----------------------------------------------------------------------------
    @property
    def spectra(self) -> xr.DataArray:
        return self._ds["spectra"]

    @property
    def black(self) -> xr.DataArray:
        return self._ds["black"]

    @property
    def peak_luminance(self) -> xr.DataArray:
        return self._ds["peak_luminance"]

    @property
    def primaries(self) -> list[str]:
        return [str(v) for v in self._ds.coords["primary"].values]

    @property
    def n_primaries(self) -> int:
        return self._ds.sizes["primary"]

    @property
    def batch_dims(self) -> list[str]:
        return _batch_dims(self.spectra)

    @property
    def wavelengths(self) -> xr.DataArray:
        return self._ds.coords["wavelength"]

    @property
    def transfer(self) -> str:
        return str(self._ds.attrs["transfer_function"])

    @property
    def gamma(self) -> float:
        return float(self._ds.attrs.get("gamma", 2.2))

    @property
    def black_luminance(self) -> float:
        return float(self._ds.attrs.get("black_luminance", 0.0))

    @property
    def name(self) -> str:
        return str(self._ds.attrs.get("name", "display"))

    @property
    def attrs(self) -> dict:
        return dict(self._ds.attrs)

    # -- optics --------------------------------------------------------------------------------
    def render(self, drive: xr.DataArray) -> xr.DataArray:
        """Emitted spectral radiance for linear drive values (dim ``primary``, each in 0..1)."""
        drive = check_drive(drive, self.primaries)
        out = self.black + xr.dot(drive, self.spectra, dim="primary")
        out = out.transpose(..., "wavelength")
        out.attrs = {"units": RADIANCE_UNITS, "long_name": "emitted spectral radiance"}
        out.name = "radiance"
        return out

    def observed_xyz(self, drive: xr.DataArray, observers) -> xr.DataArray:
        """XYZ (cd/m²) every observer sees for linear drive values: black + Σ_p d_p · XYZ(primary p).

        Parameters
        ----------
        drive : DataArray
            Linear drive values (dim ``primary``, each in 0..1); its other dims are stimulus dims
            and may include the display's ``design`` dim.
        observers : Dataset or DataArray or str
            Observer functions (``cmf`` with or without an ``observer`` dim) on the display's grid,
            or a standard observer name.

        Returns
        -------
        DataArray
            Dims (*display batch dims, *observer dims, *stimulus dims, ``xyz``). Each observer's
            primary and black XYZ are integrated once (rectangle rule, K_m = 683 lm/W, as
            :func:`metasim.tristimulus`) and applied to every drive, primaries summed in order.
        """
        drive = check_drive(drive, self.primaries)
        responses = observer_responses(resolve_observer(observers, self), "xyz")
        step = grid_of(self.spectra, responses)
        batch = self.batch_dims
        observer_dims = [d for d in responses.dims if d not in ("xyz", "wavelength")]
        shared = set(observer_dims) & (set(batch) | set(drive.dims))
        if shared:
            raise DisplayError(f"observer functions share dims {sorted(shared)} with the display or the drives; "
                               "rename one")
        spectra = self.spectra
        for d in set(batch) & set(drive.dims):
            if drive.sizes[d] != spectra.sizes[d] or (
                    d in drive.xindexes and d in spectra.xindexes and not drive.xindexes[d].equals(spectra.xindexes[d])):
                raise DisplayError(f"drive dim {d!r} does not match the display's {d!r} (sizes or labels differ)")
        cmf_var = responses.variable.transpose(*observer_dims, "xyz", "wavelength")
        cmf = np.ascontiguousarray(cmf_var.values, dtype=float).reshape(-1, 3, cmf_var.shape[-1])
        (matrices, black), = display_matrices([self], cmf, step)
        stimulus_dims = [d for d in drive.dims if d != "primary" and d not in batch]
        sizes = {**{d: spectra.sizes[d] for d in batch}, **{d: drive.sizes[d] for d in stimulus_dims}}
        values = drive.variable.set_dims({**sizes, "primary": self.n_primaries}).values
        xyz = apply_matrices(values.reshape(matrices.shape[0], -1, self.n_primaries), matrices, black)
        shape = [spectra.sizes[d] for d in batch] + [responses.sizes[d] for d in observer_dims] + \
            [drive.sizes[d] for d in stimulus_dims] + [3]
        return labelled(xyz.reshape(shape), (*batch, *observer_dims, *stimulus_dims, "xyz"), (spectra, responses, drive),
                        labels={"xyz": ("X", "Y", "Z")}, name="xyz",
                        attrs={"units": "cd m-2", "long_name": "tristimulus values seen by each observer"})

    def white_spectrum(self) -> xr.DataArray:
        """Spectral radiance with every drive at 1 (black included); a fresh copy on every call."""
        white = getattr(self, "_white", None)
        if white is None:  # computed once per display (a Display does not change)
            black, spectra = self._ds["black"], self._ds["spectra"]
            values = (black.variable + spectra.variable.sum("primary")).transpose(..., "wavelength")
            white = labelled(values.values, values.dims, (black, spectra), name="white",
                             attrs={"units": RADIANCE_UNITS, "long_name": "display white spectral radiance"})
            self._white = white
        return white.copy()

    def primary_tristimulus(self, observer) -> xr.DataArray:
        """XYZ (cd/m²) of each primary at full drive: dims ``[design,] primary, [observer,] xyz``."""
        return tristimulus(self.spectra, resolve_observer(observer, self), scale="absolute")

    def black_tristimulus(self, observer) -> xr.DataArray:
        return tristimulus(self.black, resolve_observer(observer, self), scale="absolute")

    def white_tristimulus(self, observer) -> xr.DataArray:
        return tristimulus(self.white_spectrum(), resolve_observer(observer, self), scale="absolute")

    def luminance_weights(self) -> xr.DataArray:
        """Each primary's share of the white luminance (CIE 1931 2°): the HLG OOTF weights."""
        y = self.primary_tristimulus("cie1931_2").sel(xyz="Y", drop=True)
        out = y / y.sum("primary")
        out.attrs = {"units": "1", "long_name": "share of white luminance"}
        return out

    # -- signal ↔ drive ------------------------------------------------------------------------
    def decode(self, signal: xr.DataArray) -> xr.DataArray:
        """Linear drive values (0..1) from encoded signals (dim ``primary``) by the display's EOTF.

        SDR curves are normalised to 1 at full signal; PQ and HLG give display light in cd/m²
        divided by the display's peak luminance (drives above 1 are clipped and flagged by the caller).
        """
        if self.transfer in ("pq", "hlg"):
            light = eotf(signal, self.transfer, peak_luminance=float(self.peak_luminance.max()),
                         black_luminance=self.black_luminance, gamma=self.gamma,
                         luminance_weights=self.luminance_weights() if self.transfer == "hlg" else None)
            drive = light / self.peak_luminance
        else:
            drive = eotf(signal, self.transfer, peak_luminance=1.0, black_luminance=self.black_luminance
                         / float(self.peak_luminance.max()), gamma=self.gamma)
        drive.attrs = {"units": "1", "long_name": "linear drive value"}
        return drive

    def encode(self, drive: xr.DataArray) -> xr.DataArray:
        """Encoded signals (code values, 0..1) for linear drive values by the inverse EOTF."""
        if self.transfer in ("pq", "hlg"):
            signal = eotf_inverse(drive * self.peak_luminance, self.transfer,
                                  peak_luminance=float(self.peak_luminance.max()),
                                  black_luminance=self.black_luminance, gamma=self.gamma,
                                  luminance_weights=self.luminance_weights() if self.transfer == "hlg" else None)
        else:
            signal = eotf_inverse(drive, self.transfer, peak_luminance=1.0, black_luminance=self.black_luminance
                                  / float(self.peak_luminance.max()), gamma=self.gamma)
        signal.attrs = {"units": "1", "long_name": f"encoded drive signal ({self.transfer})"}
        return signal

    def replace(self, **variables) -> "Display":
        """A new Display with some variables or attributes replaced (``attrs=`` updates attributes)."""
        ds = self._ds.copy()
        attrs = variables.pop("attrs", None)
        if variables:
            ds.update(variables)  # one merge for all of them
        if attrs:
            ds.attrs.update(attrs)
        return Display(ds)

    def _rescaled(self, values: dict, variable_attrs: dict, attrs: dict) -> "Display":
        """A new Display with the values of some variables swapped for arrays of the same shape and
        dim order, without a merge. Only for strictly positive gains on validated primaries (the
        checks of the primaries are scale-invariant, so they are not repeated); the settings are."""
        ds = self._ds.copy(data={name: values.get(name, variable.data) for name, variable in self._ds.data_vars.items()})
        for name, variable_attributes in variable_attrs.items():
            ds[name].attrs = dict(variable_attributes)
        ds.attrs.update(attrs)
        _check_settings(ds)
        out = Display.__new__(Display)
        out._ds = ds
        return out


def check_drive(drive, primaries: Sequence[str]) -> xr.DataArray:
    """Validate explicit linear drive values: a DataArray with a ``primary`` dim, finite, in 0..1.

    Parameters
    ----------
    drive : xarray.DataArray (primary, ...)
        Linear drive of each primary, 0..1 (unit 1), with any other dims (e.g. ``stimulus``).
    primaries : sequence of str
        The display's primary names (the ``primary`` coordinate given to an unlabelled drive).

    Returns
    -------
    xarray.DataArray (primary, ...)
        ``drive``, with a ``primary`` coordinate.

    Raises
    ------
    DisplayError
        Not a DataArray with a ``primary`` dim, another number of primaries than the display's, or a
        value not finite or outside 0..1 (named).

    Examples
    --------
    >>> import xarray as xr
    >>> from metasim.display import check_drive
    >>> check_drive(xr.DataArray([0.2, 0.5, 1.0], dims="primary"), ["B", "G", "R"])["primary"].values.tolist()
    ['B', 'G', 'R']
    >>> check_drive(xr.DataArray([0.2, 1.5, 1.0], dims="primary"), ["B", "G", "R"])
    Traceback (most recent call last):
        ...
    metasim.errors.DisplayError: drive value 1.5 is outside the allowed range 0..1
    """
    if not isinstance(drive, xr.DataArray) or "primary" not in drive.dims:
        raise DisplayError("drive values must be a DataArray with a 'primary' dim (one value per primary)")
    if drive.sizes["primary"] != len(primaries):
        raise DisplayError(f"drive has {drive.sizes['primary']} primaries; the display has {len(primaries)}: {list(primaries)}")
    values = np.asarray(drive.values, dtype=float)
    if not np.isfinite(values).all():
        raise DisplayError("drive values must be finite numbers in 0..1")
    bad = (values < 0) | (values > 1)
    if bad.any():
        value = values[bad][0]
        raise DisplayError(f"drive value {value:g} is outside the allowed range 0..1")
    if "primary" not in drive.coords:
        drive = drive.assign_coords(primary=list(primaries))
    return drive


def resolve_observer(observer, display: "Display | None" = None) -> xr.Dataset:
    """An observer Dataset (with ``cmf``) from a Dataset, a ``cmf`` DataArray, a standard name or
    colour-science colour-matching functions (put on the display's grid)."""
    if is_colour_object(observer) or isinstance(observer, np.ndarray):
        observer = as_observer(observer, display.wavelengths.values if display is not None else None)
    if isinstance(observer, str):
        if observer not in STANDARD_OBSERVERS:
            raise DisplayError(f"observer {observer!r} is not a standard observer; allowed: {', '.join(STANDARD_OBSERVERS)}")
        grid = display.wavelengths.values if display is not None else None
        return standard_observer(observer, grid)
    if isinstance(observer, xr.DataArray):
        if "xyz" not in observer.dims:
            raise DisplayError(f"observer functions need an 'xyz' dim, got {tuple(observer.dims)}")
        return observer.to_dataset(name="cmf")
    if isinstance(observer, xr.Dataset) and "cmf" in observer:
        return observer
    raise DisplayError("observer must be a standard observer name, an observer Dataset with a 'cmf' variable or "
                       f"colour-science XYZ_ColourMatchingFunctions, got {type(observer).__name__}")


def single_observer(observer, display: "Display | None", need: str, hint: str) -> xr.Dataset:
    """:func:`resolve_observer` where one observer is needed: an ``observer`` dim of size 1 is
    dropped; a larger one is refused with ``need`` (e.g. "calibration needs one observer"), its size
    and ``hint`` (what to do instead)."""
    single = resolve_observer(observer, display)
    if "observer" in single.dims:
        if single.sizes["observer"] != 1:
            raise DisplayError(f"{need}, got an 'observer' dim of size {single.sizes['observer']}; {hint}")
        single = single.isel(observer=0)
    return single


def observer_name(observer) -> str:
    if isinstance(observer, str):
        return observer
    if is_colour_object(observer):
        return str(getattr(observer, "name", "custom"))
    return str(getattr(observer, "attrs", {}).get("observer", "custom"))


def make_display(
    spectra: xr.DataArray,
    *,
    black: xr.DataArray | None = None,
    transfer: str = "srgb",
    gamma: float = 2.2,
    peak_luminance=None,
    black_luminance: float = 0.0,
    name: str | None = None,
) -> Display:
    """Build a :class:`Display` from primary spectra.

    Parameters
    ----------
    spectra : DataArray
        ``[design,] primary × wavelength`` spectral radiance at full drive (W·sr⁻¹·m⁻²·nm⁻¹),
        N ≥ 3 distinct, non-collinear primaries (for example from :mod:`metasim.emitters`); or a
        colour-science ``MultiSpectralDistributions`` such as ``RGB_DisplayPrimaries`` (its labels
        become the ``primary`` labels, its wavelengths the display's grid; taken as radiance).
    black : DataArray, optional
        Black-level spectral radiance (``[design,] wavelength``), default zero; a colour-science
        ``SpectralDistribution`` is put on the primaries' grid.
    transfer : str
        Transfer function of the display's own drive signals: one of
        :data:`metasim.display.transfer.TRANSFER_FUNCTIONS`.
    gamma : float
        Exponent for ``transfer="gamma"``.
    peak_luminance : float or DataArray, optional
        Nominal white luminance L_W in cd/m² (used by PQ/HLG and as the default calibration
        luminance). Default: the white's luminance for the CIE 1931 2° observer. The spectra are
        not rescaled here; :func:`metasim.display.calibrate_white` does that.
    black_luminance : float
        L_B in cd/m² for the BT.1886 and HLG curves (keep 0 when a black spectrum is given, so
        black is not counted twice).
    name : str, optional
        A label kept in the attributes (default: a colour-science object's name, else "display").

    Returns
    -------
    Display
        The display model (spectra not rescaled; see :func:`metasim.display.calibrate_white`).

    Raises
    ------
    DisplayError
        Spectra without ``primary`` and ``wavelength`` dims, unusable primaries, an unknown
        transfer function (each named in the message).

    References
    ----------
    Berns (1996) Displays 16(4) 173-182 (additive display model).

    Examples
    --------
    >>> import metasim
    >>> from metasim.emitters import gaussian
    >>> display = metasim.make_display(gaussian([455, 535, 615], [25, 30, 35], name=["B", "G", "R"]), transfer="gamma",
    ...                                gamma=2.4, name="monitor")
    >>> display.name, display.n_primaries
    ('monitor', 3)
    """
    if name is None:
        name = str(spectra.name) if is_colour_object(spectra) else "display"
    spectra = as_spectra(spectra, dim="primary", where="display spectra", units=RADIANCE_UNITS)
    black_given = black is not None
    if black is not None:
        black = as_spectra(black, wavelengths=spectra.coords["wavelength"].values, where="display black",
                           dims_example=("wavelength",), units=RADIANCE_UNITS)
    if not isinstance(transfer, str) or transfer not in TRANSFER_FUNCTIONS:
        raise DisplayError(f"transfer function {transfer!r} is not known; allowed: {', '.join(TRANSFER_FUNCTIONS)}")
    check_spectra(spectra, where="display spectra")
    spectra = spectra.astype(float).copy()
    spectra.attrs = {"units": RADIANCE_UNITS, "long_name": "spectral radiance of each primary at full drive"}
    spectra.coords["wavelength"].attrs.update(WAVELENGTH_ATTRS)
    if "primary" in spectra.dims and "primary" not in spectra.coords:
        spectra = spectra.assign_coords(primary=[f"primary{i}" for i in range(spectra.sizes["primary"])])
    if black is None:
        black = xr.zeros_like(spectra.isel(primary=0, drop=True)) if "primary" in spectra.dims else None
    else:
        check_spectra(black, where="display black")
        require_same_grid(spectra, black, names=("display spectra", "black"))
        black = black.astype(float)
    data = {"spectra": spectra}
    if black is not None:
        black = black.copy()
        black.attrs = {"units": RADIANCE_UNITS, "long_name": "black-level spectral radiance (all drives 0)"}
        data["black"] = black.drop_vars([c for c in black.coords if c not in black.dims])
    ds = xr.Dataset(data)
    if "primary" not in spectra.dims or "wavelength" not in spectra.dims:
        raise DisplayError(f"display spectra have dims {tuple(spectra.dims)}; need 'primary' and 'wavelength'")
    _check_primaries(spectra)
    if peak_luminance is None:
        white = ds["black"] + spectra.sum("primary")
        peak = tristimulus(white, standard_observer("cie1931_2", spectra.coords["wavelength"].values)).sel(xyz="Y", drop=True)
    else:
        peak = peak_luminance if isinstance(peak_luminance, xr.DataArray) else xr.DataArray(float(peak_luminance))
    peak = peak.astype(float)
    peak.attrs = {"units": "cd m-2", "long_name": "nominal white luminance (all drives 1)"}
    ds["peak_luminance"] = peak.drop_vars([c for c in peak.coords if c not in peak.dims])
    ds["primary_gain"] = xr.ones_like(spectra.isel(wavelength=0, drop=True))
    ds["primary_gain"].attrs = {"units": "1", "long_name": "gain applied to each primary by white calibration"}
    ds.attrs = {
        "name": str(name),
        "model": "additive N-primary display",
        "assumption": ASSUMPTION,
        "transfer_function": transfer,
        "gamma": float(gamma),
        "black_luminance": float(black_luminance),
        "metasim_version": __version__,
    }
    if black_given:
        return Display(ds)
    _check_settings(ds)
    display = Display.__new__(Display)  # the spectra and primaries are checked above, the black is zero
    display._ds = ds
    return display


def stack_designs(displays: Sequence[Display], design: Sequence | None = None) -> Display:
    """Stack displays with the same primaries count, grid and transfer function along ``design``.

    Parameters
    ----------
    displays : sequence of Display
        Displays with the same primary count, grid and transfer function.
    design : sequence, optional
        Labels of the ``design`` dim (default 0, 1, ...).

    Returns
    -------
    Display
        One display with a ``design`` dim.

    Raises
    ------
    DisplayError
        Displays that cannot be stacked (named in the message).

    Examples
    --------
    >>> import metasim
    >>> from metasim.emitters import laser_line
    >>> a = metasim.make_display(laser_line([465, 532, 638], 1.0, name=["B", "G", "R"]))
    >>> b = metasim.make_display(laser_line([465, 532, 645], 1.0, name=["B", "G", "R"]))
    >>> metasim.stack_designs([a, b], design=["638 nm", "645 nm"]).spectra.sizes["design"]
    2
    """
    displays = list(displays)
    if not displays:
        raise DisplayError("stack_designs: no displays given; pass at least one Display")
    first = displays[0]
    for i, item in enumerate(displays[1:], start=1):
        if item.n_primaries != first.n_primaries:
            raise DisplayError(f"display #{i} has {item.n_primaries} primaries, display #0 {first.n_primaries}; all designs need the same N")
        if item.transfer != first.transfer:
            raise DisplayError(f"display #{i} uses transfer {item.transfer!r}, display #0 {first.transfer!r}; all designs need one transfer function")
        require_same_grid(first.spectra, item.spectra, names=("display #0", f"display #{i}"))
    labels = list(design) if design is not None else [d.name for d in displays]
    if len(set(map(str, labels))) != len(labels):
        labels = list(range(len(displays)))
    parts = []
    for d in displays:
        ds = d.to_dataset().assign_coords(primary=first.primaries)
        keep = {k: v for k, v in ds.attrs.items() if k in first.attrs and first.attrs[k] == v}
        ds.attrs = keep
        parts.append(ds)
    stacked = xr.concat(parts, dim=xr.DataArray(labels, dims="design", name="design"), combine_attrs="drop_conflicts")
    stacked.attrs = {**parts[0].attrs, **{k: v for k, v in stacked.attrs.items()}}
    stacked.attrs["name"] = "designs"
    return Display(stacked)


__all__ = ["ASSUMPTION", "Display", "make_display", "stack_designs", "check_drive", "resolve_observer", "observer_name"]
