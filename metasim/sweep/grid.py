"""Candidate designs of a sweep: a Cartesian grid of emitter parameters, or an explicit list of spectra.

A sweep's designs are one DataArray ``design × primary × wavelength`` of spectral radiance at full
drive (W·sr⁻¹·m⁻²·nm⁻¹), the swept parameters as ``design`` coordinates named by the primary's
label and the parameter (``R_peak_nm``, ``R_fwhm_nm``, or ``fwhm_nm`` for one width shared by the
varied primaries; before: ``peak_nm_R``, ``width_nm_R``, ``width_nm``, still read from older files).
The display-level settings the designs share (transfer function, white, luminance, calibration
observer) travel with it in the attribute ``display_settings``;
:func:`metasim.sweep.run_sweep` builds and white-calibrates one display per design from them.

Layer: sweep (imports spectra, emitters, display).
"""

from __future__ import annotations

import json
import math
from typing import Mapping, Sequence

import numpy as np
import xarray as xr

from metasim import emitters
from metasim.checks import renamed_keywords
from metasim.display import Display
from metasim.errors import SweepError
from metasim.io import first_design_coordinate
from metasim.spectra import RADIANCE_UNITS, WAVELENGTH_ATTRS, default_grid

#: Emitter kinds of a design grid and the name of each kind's width parameter.
GRID_KINDS = {"laser": "linewidth_nm", "gaussian": "fwhm_nm", "quantum_dot": "fwhm_nm"}
#: Largest grid :func:`design_grid` builds at once (a guard against typing one zero too many).
MAX_DESIGNS = 1_000_000
#: Display settings used when neither the designs nor the caller give one.
DEFAULT_DISPLAY_SETTINGS = {"transfer": "bt1886", "gamma": 2.2, "peak_luminance": 100.0, "black_luminance": 0.0,
                            "white": "D65", "calibration_observer": "cie1931_2"}


def _values(where: str, value) -> list[float]:
    """A non-empty list of finite positive numbers from a number or a sequence of numbers."""
    items = list(value) if isinstance(value, (list, tuple, np.ndarray)) else [value]
    if not items:
        raise SweepError(f"{where}: empty list; give at least one value")
    out = []
    for item in items:
        if isinstance(item, bool) or not isinstance(item, (int, float, np.integer, np.floating)):
            raise SweepError(f"{where}: {item!r} is not a number")
        if not math.isfinite(float(item)) or float(item) <= 0:
            raise SweepError(f"{where}: {item!r} is not allowed; need finite numbers > 0")
        out.append(float(item))
    return out


def display_settings_of(display: Display) -> dict:
    """The display-level settings of a (white-calibrated) display, as a sweep uses them.

    Parameters
    ----------
    display : Display
        A display, white-calibrated or not (uncalibrated: white D65, calibration observer
        ``cie1931_2``).

    Returns
    -------
    dict
        ``transfer``, ``gamma``, ``peak_luminance`` (cd/m², the largest over designs),
        ``black_luminance`` (cd/m²), ``white`` (a name or CIE 1931 [x, y]) and
        ``calibration_observer``: what :func:`metasim.sweep.chunk_display` makes every design with.

    Examples
    --------
    >>> import metasim
    >>> from metasim.emitters import gaussian
    >>> from metasim.sweep import display_settings_of
    >>> monitor = metasim.calibrate_white(metasim.make_display(gaussian([455, 535, 615], [25, 30, 35],
    ...                                                                 name=["B", "G", "R"])), "cie1931_2")
    >>> settings = display_settings_of(monitor)
    >>> settings["transfer"], settings["white"], settings["calibration_observer"]
    ('srgb', [0.3127, 0.329], 'cie1931_2')
    """
    white = display.attrs.get("calibration_white_xy", "D65")
    return {
        "transfer": display.transfer,
        "gamma": display.gamma,
        "peak_luminance": float(display.peak_luminance.max()),
        "black_luminance": display.black_luminance,
        "white": list(white) if isinstance(white, (list, tuple, np.ndarray)) else str(white),
        "calibration_observer": str(display.attrs.get("calibration_observer", "cie1931_2")),
    }


def _base_spectra(base) -> tuple[xr.DataArray | None, dict]:
    """The base design's spectra before white calibration, and its display settings."""
    if base is None:
        return None, {}
    if isinstance(base, Display):
        if base.batch_dims:
            raise SweepError(f"the base display must be a single design, got dims {base.batch_dims}")
        gain = base.to_dataset()["primary_gain"]
        return (base.spectra / gain).transpose("primary", "wavelength"), display_settings_of(base)
    if isinstance(base, xr.DataArray) and set(base.dims) == {"primary", "wavelength"}:
        return base.transpose("primary", "wavelength"), {}
    raise SweepError(f"base must be a Display or spectra (primary x wavelength), got {type(base).__name__}")


@renamed_keywords(radiance="relative_power", width_nm="fwhm_nm")
def design_grid(kind: str = "laser", peaks_nm: Mapping[str, Sequence[float]] | None = None, fwhm_nm=1.0, *,
                base=None, relative_power: float = 1.0, profile: str = "gaussian", wavelengths=None,
                allow_outside_grid: bool = False, lazy: bool = False) -> "xr.DataArray | DesignGrid":
    """Every combination of primary peaks and widths, as one ``design × primary × wavelength`` array.

    Parameters
    ----------
    kind : {"laser", "gaussian", "quantum_dot"}
        Emitter of the varied primaries (:func:`metasim.emitters.laser_line`, ``gaussian``,
        ``quantum_dot``); the width is the line width (FWHM) of a laser, the FWHM of the others.
    peaks_nm : mapping of primary label to peak wavelengths, nm
        e.g. ``{"R": [620, 630, 640], "G": [520, 532], "B": [450, 465]}``.
    fwhm_nm : number, sequence, or mapping of label to sequence
        Full width at half maximum, nm (a laser's line width): a number or a sequence shared by
        the varied primaries (one grid axis, coordinate ``fwhm_nm``), or one sequence per label
        (axes ``<label>_fwhm_nm``). Was ``width_nm``, still accepted for one release with a warning.
    base : Display or DataArray, optional
        A design whose other primaries stay fixed (spectra before white calibration); a varied label
        replaces the base primary of that label, new labels are appended. A Display also gives the
        designs its display settings (transfer, white, luminance, calibration observer).
    relative_power : float
        Integrated radiance of each varied primary before calibration, W·sr⁻¹·m⁻², relative to the
        fixed ones (matters for N > 3; was ``radiance``, still accepted for one release with a warning).
    profile : {"gaussian", "lorentzian"}
        Line shape of laser primaries.
    wavelengths : optional
        The grid (default: the base's grid, else 390–830 nm at 1 nm).
    allow_outside_grid : bool
        Accept, with a warning, varied primaries that lose more than 1 % of their energy outside
        the grid (an error otherwise, naming the peak; :func:`metasim.spectra.check_energy_on_grid`).
    lazy : bool
        Return the grid as its spec (:class:`DesignGrid`): each varied primary's distinct spectra
        once, and any block of designs made on demand (:meth:`DesignGrid.block`). Sweeps take it
        like the array and make one chunk of designs at a time, so a grid of a million designs
        never exists in memory at once.

    Returns
    -------
    DataArray or DesignGrid
        ``design`` (0 … n−1) × ``primary`` × ``wavelength``; coordinates ``<label>_peak_nm`` and the
        width axes on ``design``; attributes ``units``, ``long_name``, ``model``, ``parameters`` and,
        with a Display base, ``display_settings``. With ``lazy=True`` the same as a
        :class:`DesignGrid` (``grid.block(0, n)`` is that array).

    Examples
    --------
    >>> import metasim
    >>> from metasim.emitters import laser_line
    >>> base = laser_line([465, 532, 638], 1.0, name=["B", "G", "R"])
    >>> designs = metasim.design_grid("laser", {"R": [630, 640, 650]}, 1.0, base=base)
    >>> dict(designs.sizes), designs["R_peak_nm"].values.tolist()
    ({'design': 3, 'primary': 3, 'wavelength': 441}, [630.0, 640.0, 650.0])
    >>> lazy = metasim.design_grid("laser", {"R": [630, 640, 650]}, 1.0, base=base, lazy=True)
    >>> lazy.sizes["design"], lazy.block(1, 3)["R_peak_nm"].values.tolist()
    (3, [640.0, 650.0])
    """
    grid = DesignGrid(kind, peaks_nm, fwhm_nm, base=base, relative_power=relative_power, profile=profile,
                      wavelengths=wavelengths, allow_outside_grid=allow_outside_grid)
    return grid if lazy else grid.block(0, grid.count)


class DesignGrid:
    """A Cartesian design grid kept as its spec: the axes, and each varied primary's distinct spectra.

    Made by :func:`design_grid` with ``lazy=True``. Memory does not grow with the number of
    designs: :meth:`block` makes the ``design × primary × wavelength`` array of any range of
    designs (design ``i`` is the ``i``-th combination of :func:`itertools.product` over the axes,
    the last axis fastest), with the same values and coordinates as the matching slice of the full
    array. ``sizes``, ``dims``, ``attrs`` (mutable: ``display_settings`` may be set),
    ``coordinate_names`` describe the grid without making it.

    The spec hash (:meth:`hash_parts`) reads the coordinates under the names they had when stores
    were first written (:func:`metasim.io.first_design_coordinate`), so older stores resume.
    """

    dims = ("design", "primary", "wavelength")

    @renamed_keywords(radiance="relative_power", width_nm="fwhm_nm")
    def __init__(self, kind: str, peaks_nm, fwhm_nm=1.0, *, base=None, relative_power: float = 1.0,
                 profile: str = "gaussian", wavelengths=None, allow_outside_grid: bool = False):
        if kind not in GRID_KINDS:
            raise SweepError(f"kind={kind!r} is not known; allowed: {', '.join(GRID_KINDS)}")
        if not isinstance(peaks_nm, Mapping) or not peaks_nm:
            raise SweepError("peaks_nm must map at least one primary label to peak wavelengths, e.g. {'R': [620, 640]}")
        labels = [str(k) for k in peaks_nm]
        axes = [(f"{label}_peak_nm", _values(f"peaks_nm[{label!r}]", peaks_nm[label])) for label in labels]
        if isinstance(fwhm_nm, Mapping):
            missing = [label for label in labels if label not in fwhm_nm]
            extra = [str(k) for k in fwhm_nm if str(k) not in labels]
            if missing or extra:
                raise SweepError(f"fwhm_nm has labels {list(map(str, fwhm_nm))}; give exactly the varied primaries {labels}")
            axes += [(f"{label}_fwhm_nm", _values(f"fwhm_nm[{label!r}]", fwhm_nm[label])) for label in labels]
            width_of = {label: f"{label}_fwhm_nm" for label in labels}
        else:
            axes.append(("fwhm_nm", _values("fwhm_nm", fwhm_nm)))
            width_of = {label: "fwhm_nm" for label in labels}
        count = math.prod(len(values) for _, values in axes)
        if count > MAX_DESIGNS:
            raise SweepError(f"the grid has {count} designs; allowed: at most {MAX_DESIGNS} per sweep")
        fixed, settings = _base_spectra(base)
        if wavelengths is None:
            wavelengths = fixed.wavelength.values if fixed is not None else default_grid().values
        wl = np.asarray(wavelengths, dtype=float)
        if fixed is not None and (fixed.sizes["wavelength"] != wl.size or not np.allclose(fixed.wavelength.values, wl)):
            raise SweepError("wavelengths differ from the base design's grid; give the base's grid or none")
        width_key = GRID_KINDS[kind]
        self.count, self.axes = count, [(name, np.asarray(values, dtype=float)) for name, values in axes]
        self.labels, self.width_of, self.wavelengths = labels, width_of, wl
        # each varied primary's distinct (peak, width) pairs, sorted, made in one emitter call
        self._tables = {}
        arguments = {"relative_power": relative_power, "allow_outside_grid": allow_outside_grid,
                     **({"profile": profile} if kind == "laser" else {})}
        function = {"laser": emitters.laser_line, "gaussian": emitters.gaussian, "quantum_dot": emitters.quantum_dot}[kind]
        axis = dict(self.axes)
        for label in labels:
            peaks, widths = np.unique(axis[f"{label}_peak_nm"]), np.unique(axis[width_of[label]])
            unique = np.stack([np.repeat(peaks, widths.size), np.tile(widths, peaks.size)], axis=1)
            spectra = function(unique[:, 0], unique[:, 1], wl, name=[f"primary {label} #{i}" for i in range(len(unique))],
                               **arguments)
            self._tables[label] = (peaks, widths, np.ascontiguousarray(spectra.transpose("primary", "wavelength").values))
        order = [str(p) for p in fixed.primary.values] if fixed is not None else []
        order += [label for label in labels if label not in order]
        self.primaries = order
        self._fixed = {label: fixed.sel(primary=label).values for label in order if label not in labels}
        self._coord_attrs = {}
        width_word = width_key.replace("_nm", "").replace("fwhm", "FWHM")
        for label in labels:
            self._coord_attrs[f"{label}_peak_nm"] = {"units": "nm", "long_name": f"peak wavelength of primary {label}"}
            self._coord_attrs[width_of[label]] = {"units": "nm", "long_name": f"{width_word} of " + (
                "the varied primaries" if width_of[label] == "fwhm_nm" else f"primary {label}")}
        # the keys of stores written before the renames ("width_nm", "radiance"): this attribute is hashed
        parameters = {"kind": kind, "peaks_nm": {k: _values(k, v) for k, v in peaks_nm.items()},
                      "width_nm": ({str(k): _values(k, v) for k, v in fwhm_nm.items()} if isinstance(fwhm_nm, Mapping)
                                   else _values("fwhm_nm", fwhm_nm)),
                      "radiance": float(relative_power), "profile": profile,
                      "fixed_primaries": [p for p in order if p not in labels]}
        self.attrs = {"units": RADIANCE_UNITS, "long_name": "spectral radiance of each primary at full drive, per design",
                      "model": f"design grid: {kind} primaries {', '.join(labels)} varied (Cartesian product)",
                      "parameters": json.dumps(parameters)}
        if settings:
            self.attrs["display_settings"] = settings
        if isinstance(base, Display):
            self.attrs["base_design"] = base.name

    @property
    def sizes(self) -> dict:
        return {"design": self.count, "primary": len(self.primaries), "wavelength": self.wavelengths.size}

    @property
    def coordinate_names(self) -> list[str]:
        """The grid axes: the ``design`` coordinates of every block."""
        return [name for name, _ in self.axes]

    def parameters(self, start: int, stop: int) -> dict[str, np.ndarray]:
        """Each axis's value for designs ``start … stop − 1`` (mixed radix, the last axis fastest)."""
        index = np.arange(start, stop, dtype=np.int64)
        out = {}
        for name, values in reversed(self.axes):
            out[name] = values[index % values.size]
            index = index // values.size
        return {name: out[name] for name, _ in self.axes}

    def spectra(self, start: int, stop: int) -> np.ndarray:
        """The spectra of designs ``start … stop − 1``: (designs, primary, wavelength), W·sr⁻¹·m⁻²·nm⁻¹."""
        self._check_range(start, stop)
        columns = self.parameters(start, stop)
        values = np.empty((stop - start, len(self.primaries), self.wavelengths.size))
        for j, label in enumerate(self.primaries):
            if label in self._fixed:
                values[:, j] = self._fixed[label][None, :]
                continue
            peaks, widths, table = self._tables[label]
            row = np.searchsorted(peaks, columns[f"{label}_peak_nm"]) * widths.size + \
                np.searchsorted(widths, columns[self.width_of[label]])
            values[:, j] = table[row]
        return values

    def block(self, start: int, stop: int) -> xr.DataArray:
        """Designs ``start … stop − 1`` as the ``design × primary × wavelength`` DataArray of
        :func:`design_grid` (equal to the slice of the full array)."""
        values = self.spectra(start, stop)
        coords = {"design": ("design", np.arange(start, stop), {"units": "1", "long_name": "design index"}),
                  "primary": self.primaries, "wavelength": ("wavelength", self.wavelengths, dict(WAVELENGTH_ATTRS))}
        for name, column in self.parameters(start, stop).items():
            coords[name] = ("design", column, dict(self._coord_attrs[name]))
        return xr.DataArray(values, dims=self.dims, coords=coords, attrs=dict(self.attrs), name="spectra")

    def _check_range(self, start: int, stop: int) -> None:
        if not (0 <= start <= stop <= self.count):
            raise SweepError(f"designs {start}-{stop} are outside the grid; allowed: 0 <= start <= stop <= {self.count}")

    def hash_parts(self, block_size: int = 256):
        """What :func:`metasim.sweep.store.spec_hash` reads of the full array, without making it:
        (name, dims, shape, blocks of values, attributes) per variable, in name order, then the
        Dataset attributes (none). The spectra come ``block_size`` designs at a time. Coordinates
        go under their first names (:func:`metasim.io.first_design_coordinate`), as stores made
        before the rename hashed them."""
        n, n_p, n_wavelengths = self.count, len(self.primaries), self.wavelengths.size
        full = self.block(0, min(1, n))  # the coordinates' attributes and dims as the array has them
        ranges = [(a, min(a + block_size, n)) for a in range(0, n, block_size)]
        parts = {
            "design": (("design",), (n,), (np.arange(a, b) for a, b in ranges), full["design"].attrs),
            "primary": (("primary",), (n_p,), iter([np.asarray(self.primaries)]), full["primary"].attrs),
            "spectra": (self.dims, (n, n_p, n_wavelengths), (self.spectra(a, b) for a, b in ranges), dict(self.attrs)),
            "wavelength": (("wavelength",), (n_wavelengths,), iter([self.wavelengths]), full["wavelength"].attrs),
        }
        def column(name):
            return (self.parameters(a, b)[name] for a, b in ranges)

        for name in self.coordinate_names:
            parts[first_design_coordinate(name)] = (("design",), (n,), column(name), dict(self._coord_attrs[name]))
        variables = [(name, *parts[name]) for name in sorted(parts)]
        return variables, {}

    def __repr__(self) -> str:
        return (f"DesignGrid({self.count} designs, primaries={self.primaries}, "
                f"axes={[f'{name} ({values.size})' for name, values in self.axes]})")


def hashed_designs(designs):
    """The designs as the spec hash reads them: a design grid's or search's ``design`` coordinates
    under the names stores were first written with (:func:`metasim.io.first_design_coordinate`), so
    that a store begun before the rename resumes. A lazy grid does this itself
    (:meth:`DesignGrid.hash_parts`); a design list and a Display keep their own names.

    Parameters
    ----------
    designs : DataArray, DesignGrid or Display
        A sweep's designs.

    Returns
    -------
    DataArray, DesignGrid or Display
        ``designs``, a grid's or search's coordinates renamed (``R_peak_nm`` → ``peak_nm_R``).

    Examples
    --------
    >>> import metasim
    >>> designs = metasim.design_grid("laser", {"R": [630, 640], "G": [532], "B": [465]}, 1.0)
    >>> sorted(c for c in hashed_designs(designs).coords if c != "wavelength")
    ['design', 'peak_nm_B', 'peak_nm_G', 'peak_nm_R', 'primary', 'width_nm']
    """
    if isinstance(designs, xr.DataArray) and str(designs.attrs.get("model", "")).startswith(("design grid",
                                                                                              "design search")):
        first = {name: first_design_coordinate(str(name)) for name, coordinate in designs.coords.items()
                 if coordinate.dims == ("design",) and first_design_coordinate(str(name)) != name}
        return designs.rename(first) if first else designs
    return designs


def design_list(spectra: Sequence[xr.DataArray], **parameters) -> xr.DataArray:
    """An explicit list of designs (each ``primary × wavelength``, same primaries and grid) as a sweep's designs.

    ``parameters`` become ``design`` coordinates: ``name=sequence`` (one value per design).

    Parameters
    ----------
    spectra : sequence of xarray.DataArray (primary, wavelength)
        Each design's primary spectra at full drive (W sr⁻¹ m⁻² nm⁻¹), same primaries and grid.
    **parameters : sequence
        Coordinates over ``design`` (one value per design), e.g. ``R_peak_nm=[638, 650]``.

    Returns
    -------
    xarray.DataArray (design, primary, wavelength)
        The designs, named ``spectra``, ``design`` numbered from 0.

    Raises
    ------
    SweepError
        No spectra, an item that is not (primary, wavelength), or a parameter with another count
        of values than designs.
    ValueError
        Designs with different primaries or grids (xarray's exact join).

    Examples
    --------
    >>> from metasim.emitters import laser_line
    >>> from metasim.sweep import design_list
    >>> designs = design_list([laser_line([465, 532, 638], 1.0, name=["B", "G", "R"]),
    ...                        laser_line([465, 532, 650], 1.0, name=["B", "G", "R"])], R_peak_nm=[638, 650])
    >>> designs.dims, designs["R_peak_nm"].values.tolist()
    (('design', 'primary', 'wavelength'), [638, 650])
    """
    spectra = list(spectra)
    if not spectra:
        raise SweepError("design_list: no spectra given; pass at least one primary x wavelength array")
    for i, item in enumerate(spectra):
        if not isinstance(item, xr.DataArray) or set(item.dims) != {"primary", "wavelength"}:
            raise SweepError(f"design #{i}: need a DataArray with dims primary, wavelength")
    parts = [s.transpose("primary", "wavelength").drop_vars([c for c in s.coords if c not in s.dims]) for s in spectra]
    out = xr.concat(parts, dim="design", join="exact", combine_attrs="drop")
    out = out.assign_coords(design=("design", np.arange(len(parts)), {"units": "1", "long_name": "design index"}))
    for name, values in parameters.items():
        values = list(values)
        if len(values) != len(parts):
            raise SweepError(f"parameter {name!r} has {len(values)} values for {len(parts)} designs; give one per design")
        out = out.assign_coords({name: ("design", values)})
    out.attrs = {"units": RADIANCE_UNITS, "long_name": "spectral radiance of each primary at full drive, per design",
                 "model": "explicit design list"}
    return out.rename("spectra")


__all__ = ["GRID_KINDS", "MAX_DESIGNS", "DEFAULT_DISPLAY_SETTINGS", "DesignGrid", "design_grid", "design_list",
           "display_settings_of", "hashed_designs"]
