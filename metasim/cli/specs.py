"""Display design specs: a small TOML file that describes one display, turned into a calibrated Display.

Format (TOML, read with Python's ``tomllib``; every key but ``[[primary]]`` is optional)::

    name = "Screening-room projector, candidate A"   # label used in tables and figures
    description = "free text, kept in the result file"
    transfer = "bt1886"          # srgb | gamma | linear | bt1886 | pq | hlg      (default bt1886)
    gamma = 2.4                  # exponent, only for transfer = "gamma"          (default 2.2)
    peak_luminance = 100         # white luminance after calibration, cd/m2      (default per transfer)
    black_luminance = 0.0        # L_B of the BT.1886 / HLG curves, cd/m2         (default 0)
    white = "D65"                # D65 | D50 | DCI | E, or [x, y] in CIE 1931 xy (default D65)
    calibration_observer = "cie1931_2"   # observer the white is set for: cie1931_2 | cie1964_10 |
                                         # cie2015_2 | cie2015_10               (default cie1931_2)
    extra_primary_added_to = ["R", "G", "B"] # the primaries one extra primary is added to in the
                                             # extra-primary gain (default: all of them)

    [backlight]                  # only for primaries of kind "filter"
    kind = "phosphor_white_led"  # or "measured" with file = "...", column = "..."
    pump_peak_nm = 450           # pump_half_spectral_width_nm, phosphor_peak_nm, phosphor_fwhm_nm,
    phosphor_pump_ratio = 4.0    # phosphor power / pump power (metasim.emitters.phosphor_white_led)

    [[primary]]                  # one table per primary, at least 3, in any order
    label = "G"                  # unique label
    kind = "laser"               # see PRIMARY_TYPES below
    peak_nm = 532
    linewidth_nm = 1.0
    relative_power = 1.0         # relative power before calibration (optional; matters for N > 3)

Old key names (``type``, ``radiance``, a filter's ``width_nm``, ``phosphor_to_pump``,
``extra_primary_base``) still work for one release, with a warning naming the new one
(:data:`RENAMED_KEYS`).

Primary kinds and their keys (each maps to one :mod:`metasim.emitters` function):

==============  ===============================================================================
``laser``        ``peak_nm``, ``linewidth_nm`` (FWHM, default 0.1), ``profile`` (gaussian|lorentzian)
``gaussian``     ``peak_nm``, ``fwhm_nm``
``led``          ``peak_nm``, ``half_spectral_width_nm``, ``long_side_half_spectral_width_nm``
``quantum_dot``  ``peak_nm``, ``fwhm_nm``
``filter``       the ``[backlight]`` × a band-pass filter: ``centre_nm``, ``passband_nm`` (the full
                 width between the 50 % points), ``edge_nm``,
                 ``peak_transmittance``, ``floor_transmittance``
``measured``     ``file`` (CSV with a ``wavelength_nm`` column; a path relative to the spec file),
                 ``column`` (default: the label)
==============  ===============================================================================

Every primary also takes ``relative_power``. Spectra are built on the default grid (390-830 nm, 1 nm).
The display is then white-calibrated (:func:`metasim.display.calibrate_white`) to ``white`` and
``peak_luminance`` for ``calibration_observer``.
"""

from __future__ import annotations

import warnings
from pathlib import Path

from metasim import emitters
from metasim.checks import known_keys, number, warn_renamed
from metasim.cli.paths import read_toml
from metasim.display import WHITE_POINTS, Display, calibrate_white, make_display
from metasim.display.transfer import DEFAULT_PEAK_LUMINANCE, TRANSFER_FUNCTIONS
from metasim.errors import MetasimError, SpecError
from metasim.observers import STANDARD_OBSERVERS
from metasim.spectra import default_grid


TOP_KEYS = ("name", "description", "transfer", "gamma", "peak_luminance", "black_luminance", "white",
            "calibration_observer", "extra_primary_added_to", "backlight", "primary")
PRIMARY_TYPES = {
    "laser": ("peak_nm", "linewidth_nm", "profile"),
    "gaussian": ("peak_nm", "fwhm_nm"),
    "led": ("peak_nm", "half_spectral_width_nm", "long_side_half_spectral_width_nm"),
    "quantum_dot": ("peak_nm", "fwhm_nm"),
    "filter": ("centre_nm", "passband_nm", "edge_nm", "peak_transmittance", "floor_transmittance"),
    "measured": ("file", "column"),
}
REQUIRED = {"laser": ("peak_nm",), "gaussian": ("peak_nm", "fwhm_nm"),
            "led": ("peak_nm", "half_spectral_width_nm"), "quantum_dot": ("peak_nm", "fwhm_nm"),
            "filter": ("centre_nm", "passband_nm"), "measured": ("file",)}
BACKLIGHT_KEYS = ("pump_peak_nm", "pump_half_spectral_width_nm", "phosphor_peak_nm", "phosphor_fwhm_nm",
                  "phosphor_pump_ratio")
COMMON_KEYS = ("label", "kind", "relative_power")
#: old key names, still read for one release (with a RenamedWarning): table → {old: new}
RENAMED_KEYS = {
    "top": {"extra_primary_base": "extra_primary_added_to"},
    "primary": {"type": "kind", "radiance": "relative_power"},
    "filter": {"width_nm": "passband_nm"},
    "backlight": {"type": "kind", "phosphor_to_pump": "phosphor_pump_ratio"},
}


def renamed_keys(table: dict, renames: dict, where: str) -> dict:
    """``table`` with its old key names (``renames``: old → new) replaced by the new ones, each with a
    :class:`~metasim.errors.RenamedWarning`; both spellings of one key at once are a SpecError."""
    for old, new in renames.items():
        if old not in table:
            continue
        if new in table:
            raise SpecError(f"{where}: both {old!r} and {new!r} given; {old!r} is the old name of {new!r}, keep one")
        table[new] = table.pop(old)
        warn_renamed(f"{where}: key {old!r}", repr(new), stacklevel=3)
    return table


def modernised(spec: dict) -> dict:
    """A parsed design spec with every old key name replaced (:data:`RENAMED_KEYS`)."""
    where = str(spec.get("_path", "spec"))
    renamed_keys(spec, RENAMED_KEYS["top"], where)
    if isinstance(spec.get("backlight"), dict):
        renamed_keys(spec["backlight"], RENAMED_KEYS["backlight"], f"{where} [backlight]")
    for i, table in enumerate(spec.get("primary") if isinstance(spec.get("primary"), list) else []):
        if isinstance(table, dict):
            inside = f"{where} [[primary]] {table.get('label', i + 1)!r}"
            renamed_keys(table, RENAMED_KEYS["primary"], inside)
            if table.get("kind") == "filter":
                renamed_keys(table, RENAMED_KEYS["filter"], inside)
    return spec


def read_spec(path) -> dict:
    """The parsed TOML of a spec file, with ``_path`` (the file) and ``_text`` (its text) added, old key
    names replaced by the new ones (:func:`modernised`)."""
    return modernised(read_toml(path, "design spec"))


def _allowed(spec: dict) -> bool:
    """Whether spectra may lose more than 1 % of their energy outside the grid (load_display's option)."""
    return bool(spec.get("_allow_outside_grid", False))


def _number(where: str, key: str, value, *, positive: bool = True) -> float:
    return number(value, f"{where}: {key}", error=SpecError, above=0.0 if positive else None, sep=" = ")


def _backlight(spec: dict, where: str, grid):
    table = spec.get("backlight")
    if not isinstance(table, dict):
        raise SpecError(f"{where}: primaries of kind 'filter' need a [backlight] table")
    kind = table.get("kind", "phosphor_white_led")
    if kind == "phosphor_white_led":
        known_keys(table, ("kind", *BACKLIGHT_KEYS), f"{where} [backlight]", error=SpecError)
        params = {k: _number(f"{where} [backlight]", k, v) for k, v in table.items()
                  if k != "kind"}
        return emitters.phosphor_white_led(grid, **params, allow_outside_grid=_allowed(spec))
    if kind == "measured":
        known_keys(table, ("kind", "file", "column"), f"{where} [backlight]", error=SpecError)
        spectra = _measured(spec, f"{where} [backlight]", table, grid)
        column = table.get("column", str(spectra.primary.values[0]))
        return _column(spectra, column, f"{where} [backlight]")
    raise SpecError(f"{where} [backlight]: kind {kind!r} is not known; allowed: phosphor_white_led, measured")


def _measured(spec: dict, where: str, table: dict, grid):
    file = table.get("file")
    if not isinstance(file, str) or not file:
        raise SpecError(f"{where}: 'file' must name a CSV file")
    path = Path(file)
    if not path.is_absolute():
        path = Path(spec["_path"]).parent / path
    return emitters.measured_spectra(path, grid, allow_outside_grid=_allowed(spec))


def _column(spectra, column, where: str):
    labels = [str(v) for v in spectra.primary.values]
    if column not in labels:
        raise SpecError(f"{where}: column {column!r} is not in the file; it holds {', '.join(labels)}")
    return spectra.sel(primary=column)


def primary_spectrum(spec: dict, table: dict, index: int, grid):
    """The spectrum (``wavelength``, named by the label) of one ``[[primary]]`` table."""
    where = f"{spec['_path']}: primary #{index + 1}"
    if not isinstance(table, dict):
        raise SpecError(f"{where}: each [[primary]] must be a table")
    label = table.get("label")
    if not isinstance(label, str) or not label:
        raise SpecError(f"{where}: 'label' must be a non-empty string")
    where = f"{spec['_path']}: primary {label!r}"
    kind = table.get("kind")
    if kind not in PRIMARY_TYPES:
        raise SpecError(f"{where}: kind {kind!r} is not known; allowed: {', '.join(PRIMARY_TYPES)}")
    known_keys(table, (*COMMON_KEYS, *PRIMARY_TYPES[kind]), f"{where} ({kind})", error=SpecError)
    missing = [k for k in REQUIRED[kind] if k not in table]
    if missing:
        raise SpecError(f"{where} ({kind}): missing key {missing[0]!r}")
    power = _number(where, "relative_power", table.get("relative_power", 1.0))
    params = {k: v for k, v in table.items() if k not in COMMON_KEYS}
    if kind == "measured":
        spectra = _measured(spec, where, table, grid)
        out = _column(spectra, table.get("column", label), where) * power
        out.attrs = dict(spectra.attrs)
    elif kind == "filter":
        numbers = {k: _number(where, k, v, positive=k not in ("floor_transmittance",)) for k, v in params.items()}
        filters = emitters.band_pass_filter(numbers.pop("centre_nm"), numbers.pop("passband_nm"), grid, name=label,
                                            **numbers)
        out = emitters.filtered_primaries(_backlight(spec, where, grid), filters).isel(primary=0) * power
    else:
        function = {"laser": emitters.laser_line, "gaussian": emitters.gaussian, "led": emitters.ohno_led,
                    "quantum_dot": emitters.quantum_dot}[kind]
        numbers = {k: (v if k == "profile" else _number(where, k, v)) for k, v in params.items()}
        peak = numbers.pop("peak_nm")
        allow = {"allow_outside_grid": _allowed(spec)}
        if kind == "laser":
            out = function(peak, numbers.pop("linewidth_nm", 0.1), grid, relative_power=power, name=label, **numbers,
                           **allow)
        elif kind == "led":
            out = function(peak, numbers.pop("half_spectral_width_nm"), grid, relative_power=power, name=label, **numbers,
                           **allow)
        else:
            out = function(peak, numbers.pop("fwhm_nm"), grid, relative_power=power, name=label, **allow)
        out = out.isel(primary=0)
    return out.drop_vars([c for c in out.coords if c != "wavelength"]).rename(label)


def spec_settings(spec: dict) -> dict:
    """The display-level settings of a spec, checked, with defaults filled in."""
    where = str(spec["_path"])
    known_keys(spec, TOP_KEYS, where, error=SpecError)
    transfer = spec.get("transfer", "bt1886")
    if transfer not in TRANSFER_FUNCTIONS:
        raise SpecError(f"{where}: transfer {transfer!r} is not known; allowed: {', '.join(TRANSFER_FUNCTIONS)}")
    white = spec.get("white", "D65")
    if isinstance(white, str):
        if white not in WHITE_POINTS:
            raise SpecError(f"{where}: white {white!r} is not known; allowed: {', '.join(WHITE_POINTS)} or [x, y]")
    elif not (isinstance(white, list) and len(white) == 2):
        raise SpecError(f"{where}: white = {white!r} is not allowed; give a name or [x, y]")
    else:
        white = [_number(where, "white", v) for v in white]
    observer = spec.get("calibration_observer", "cie1931_2")
    if observer not in STANDARD_OBSERVERS:
        raise SpecError(f"{where}: calibration_observer {observer!r} is not known; allowed: {', '.join(STANDARD_OBSERVERS)}")
    name = spec.get("name", Path(where).stem)
    if not isinstance(name, str) or not name:
        raise SpecError(f"{where}: name must be a non-empty string")
    base = spec.get("extra_primary_added_to")
    if base is not None and (not isinstance(base, list) or not all(isinstance(b, str) for b in base)):
        raise SpecError(f"{where}: extra_primary_added_to must be a list of primary labels")
    return {
        "name": name,
        "description": str(spec.get("description", "")),
        "transfer": transfer,
        "gamma": _number(where, "gamma", spec.get("gamma", 2.2)),
        "peak_luminance": _number(where, "peak_luminance", spec.get("peak_luminance", DEFAULT_PEAK_LUMINANCE[transfer])),
        "black_luminance": _number(where, "black_luminance", spec.get("black_luminance", 0.0), positive=False),
        "white": white,
        "calibration_observer": observer,
        "extra_primary_base": base,
    }


def display_from_spec(spec: dict) -> Display:
    """A white-calibrated :class:`~metasim.display.Display` from a parsed spec (:func:`read_spec`)."""
    settings = spec_settings(spec)
    tables = spec.get("primary")
    where = str(spec["_path"])
    tables = tables if isinstance(tables, list) else []
    grid = default_grid()
    parts = [primary_spectrum(spec, table, i, grid) for i, table in enumerate(tables)]
    if len(parts) < 3:
        raise SpecError(f"{where}: {len(parts)} [[primary]] tables; a display needs at least 3")
    labels = [p.name for p in parts]
    if len(set(labels)) != len(labels):
        raise SpecError(f"{where}: primary labels {labels} repeat; each needs a unique label")
    base = settings["extra_primary_base"]
    if base is not None:
        unknown = [b for b in base if b not in labels]
        if unknown or len(base) < 3:
            raise SpecError(f"{where}: extra_primary_added_to {base} must name at least 3 of the primaries {labels}")
    spectra = emitters.stack_primaries(*parts)
    display = make_display(spectra, transfer=settings["transfer"], gamma=settings["gamma"],
                           peak_luminance=settings["peak_luminance"], black_luminance=settings["black_luminance"],
                           name=settings["name"])
    display = calibrate_white(display, settings["calibration_observer"], white=settings["white"],
                              luminance=settings["peak_luminance"])
    return display.replace(attrs={"spec_file": Path(where).name, "description": settings["description"]})


def load_display(path, *, allow_outside_grid: bool = False) -> tuple[Display, dict]:
    """Read a spec file and build its display; returns the display and the spec (with ``_text``).

    Any error from building a display out of user-written values is reported as a
    :class:`SpecError` naming the file. ``allow_outside_grid`` accepts, with a warning, primaries
    that lose more than 1 % of their energy outside the wavelength grid (an error otherwise).
    """
    spec = read_spec(path)
    spec["_allow_outside_grid"] = bool(allow_outside_grid)
    try:
        with warnings.catch_warnings(record=True) as seen:
            warnings.simplefilter("always")
            display = display_from_spec(spec)
        for warning in seen:  # each warning once more, naming the spec file
            warnings.warn(f"{path}: {warning.message}", warning.category, stacklevel=2)
        return display, spec
    except MetasimError as exc:
        if isinstance(exc, SpecError):
            raise
        raise SpecError(f"{path}: {exc}") from None
    except (ValueError, TypeError, KeyError) as exc:
        raise SpecError(f"{path}: cannot build the display ({type(exc).__name__}: {exc})") from None


__all__ = ["SpecError", "PRIMARY_TYPES", "RENAMED_KEYS", "renamed_keys", "modernised", "read_spec", "spec_settings",
           "display_from_spec", "load_display"]
