"""Sweep specs: a small TOML file that describes a grid of candidate designs, for ``metasim sweep``.

Format (TOML; paths are relative to the spec file; only ``[vary]`` and ``[vary.peaks_nm]`` are
required; the old names ``width_nm`` and ``radiance`` of ``[vary]`` still work for one release)::

    name = "Red laser of candidate A"      # label kept in the result
    description = "free text, kept in the result"
    base = "projector_four_laser.toml"     # display spec: its other primaries and its settings stay
    reference = "grading_monitor.toml"     # display spec, or "surfaces"           (default surfaces)
    stimuli = "ramp:6,primaries,cube:3"    # the --stimuli list                    (default as --stimuli)
    calibration_observer = "cie1931_2"     # cie1931_2 | cie1964_10 | cie2015_2 | cie2015_10 | population_mean
    strategy = "min_norm"                  # min_norm | max_efficiency | least_mismatch
    chunk_size = 4                         # designs per chunk                     (default: automatic)
    lab_volume = false                     # also the CIELAB volume of every design (slower)
    per_stimulus = false                   # also every stimulus's statistics, per design

    [display]                              # only without base: the display-level keys of a display
    transfer = "gamma"                     # spec (transfer, gamma, peak_luminance, black_luminance,
    gamma = 2.6                            # white, calibration_observer)
    peak_luminance = 48

    [vary]
    kind = "laser"                         # laser | gaussian | quantum_dot
    fwhm_nm = [1.0, 2.0]                   # full width at half maximum (a laser's line width), shared by
                                           # the varied primaries; or one list per primary: {R = [1, 2]}
    relative_power = 1.0                   # relative power before calibration (matters for N > 3)
    profile = "gaussian"                   # laser line shape: gaussian | lorentzian

    [vary.peaks_nm]                        # one entry per varied primary label
    R = {start = 610, stop = 650, step = 5}    # stop included; or a list: R = [610, 625, 640]

The designs are every combination of the listed values (:func:`metasim.sweep.design_grid`); with a
``base`` a varied label replaces the base primary of that label and new labels are added. Options
given on the command line (``--reference``, ``--stimuli``, ``--chunk-size``,
``--calibration-observer``, ``--strategy``) win over the spec.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from metasim.checks import known_keys, whole_number
from metasim.cli.paths import read_toml, relative_to
from metasim.cli.specs import load_display, renamed_keys, spec_settings
from metasim.errors import MetasimError, SpecError
from metasim.sweep import GRID_KINDS, design_grid

TOP_KEYS = ("name", "description", "base", "reference", "stimuli", "calibration_observer", "strategy",
            "chunk_size", "lab_volume", "per_stimulus", "display", "vary")
VARY_KEYS = ("kind", "peaks_nm", "fwhm_nm", "relative_power", "profile")
#: old key names of [vary], still read for one release (with a RenamedWarning)
RENAMED_VARY_KEYS = {"width_nm": "fwhm_nm", "radiance": "relative_power"}
#: keys of sweep and search specs whose values are text
TEXT_KEYS = ("name", "description", "base", "reference", "stimuli", "calibration_observer", "strategy")
DISPLAY_KEYS = ("transfer", "gamma", "peak_luminance", "black_luminance", "white", "calibration_observer")
#: largest number of values one ``{start, stop, step}`` range may expand to
MAX_RANGE_VALUES = 10_000


def value_list(where: str, value) -> list[float]:
    """A list of numbers from a number, a list, or a ``{start, stop, step}`` table (stop included)."""
    if isinstance(value, dict):
        known_keys(value, ("start", "stop", "step"), where, error=SpecError)
        try:
            start, stop, step = (float(value[k]) for k in ("start", "stop", "step"))
        except KeyError as exc:
            raise SpecError(f"{where}: a range needs start, stop and step; {exc.args[0]!r} is missing") from None
        except (TypeError, ValueError):
            raise SpecError(f"{where}: start, stop and step must be numbers, got {value!r}") from None
        if step <= 0 or stop < start or (stop - start) / step > MAX_RANGE_VALUES:
            raise SpecError(f"{where}: range {value!r} is not allowed; need step > 0, stop >= start and at most "
                            f"{MAX_RANGE_VALUES} values")
        return [float(v) for v in np.round(np.arange(start, stop + step / 2, step), 9)]
    values = value if isinstance(value, list) else [value]
    if not values or any(isinstance(v, bool) or not isinstance(v, (int, float)) for v in values):
        raise SpecError(f"{where}: {value!r} is not allowed; give a number, a list of numbers or "
                        "{start = ..., stop = ..., step = ...}")
    return [float(v) for v in values]


def read_sweep_spec(path) -> dict:
    """The parsed sweep spec (``_path``, ``_text`` added), its keys and value types checked."""
    spec, where, vary = read_spec_table(path, "sweep spec", TOP_KEYS, "vary", VARY_KEYS,
                                        "a sweep spec needs a [vary] table with [vary.peaks_nm]", RENAMED_VARY_KEYS)
    peaks = vary.get("peaks_nm")
    if not isinstance(peaks, dict) or not peaks:
        raise SpecError(f"{where}: [vary.peaks_nm] must give at least one primary label, e.g. R = [620, 640]")
    check_shared_keys(spec, where)
    if "chunk_size" in spec:
        whole_number(spec["chunk_size"], f"{where}: chunk_size", error=SpecError, minimum=1, sep=" = ")
    for key in ("lab_volume", "per_stimulus"):
        if key in spec and not isinstance(spec[key], bool):
            raise SpecError(f"{where}: {key} = {spec[key]!r} must be true or false")
    return spec


def read_spec_table(path, what: str, top_keys, table: str, table_keys, missing: str,
                    renames: dict | None = None) -> tuple[dict, str, dict]:
    """A sweep or search spec read (:func:`~metasim.cli.paths.read_toml`) with its top-level keys
    checked, and its main table (``[vary]`` or ``[search]``): present (else ``missing`` is the
    message), old key names replaced (``renames``: old → new, with a warning), known keys, a known
    design ``kind``. Returns the spec, its path as text and the table."""
    spec = read_toml(path, what)
    where = str(spec["_path"])
    known_keys(spec, top_keys, where, error=SpecError)
    body = spec.get(table)
    if not isinstance(body, dict):
        raise SpecError(f"{where}: {missing}")
    renamed_keys(body, renames or {}, f"{where} [{table}]")
    known_keys(body, table_keys, f"{where} [{table}]", error=SpecError)
    kind = body.get("kind", "laser")
    if kind not in GRID_KINDS:
        raise SpecError(f"{where} [{table}]: kind {kind!r} is not known; allowed: {', '.join(GRID_KINDS)}")
    return spec, where, body


def check_shared_keys(spec: dict, where: str) -> None:
    """The keys sweep and search specs share: text values are strings, and a ``[display]`` table
    (only without ``base``) holds known display settings."""
    for key in TEXT_KEYS:
        if key in spec and not isinstance(spec[key], str):
            raise SpecError(f"{where}: {key} = {spec[key]!r} must be a string")
    if "display" in spec:
        if "base" in spec:
            raise SpecError(f"{where}: give either base (a display spec) or a [display] table, not both")
        if not isinstance(spec["display"], dict):
            raise SpecError(f"{where}: display must be a table of display settings")
        known_keys(spec["display"], DISPLAY_KEYS, f"{where} [display]", error=SpecError)


def display_settings(spec: dict) -> dict | None:
    """The checked settings of a spec's ``[display]`` table (:data:`DISPLAY_KEYS`), or None without one."""
    if "display" not in spec:
        return None
    settings = spec_settings({**spec["display"], "_path": spec["_path"]})
    return {k: settings[k] for k in DISPLAY_KEYS}


def relative(spec: dict, value: str) -> Path:
    """A path written in the sweep spec (absolute, or relative to the spec's folder)."""
    return relative_to(spec["_path"], value)


def sweep_designs(spec: dict, *, allow_outside_grid: bool = False):
    """The designs of a sweep spec (:func:`metasim.sweep.design_grid`) and the base design spec, if any."""
    where = str(spec["_path"])
    vary = spec["vary"]
    peaks = {str(label): value_list(f"{where} [vary.peaks_nm] {label}", v) for label, v in vary["peaks_nm"].items()}
    width = vary.get("fwhm_nm", 1.0)
    if isinstance(width, dict):
        width = {str(label): value_list(f"{where} [vary] fwhm_nm.{label}", v) for label, v in width.items()}
    else:
        width = value_list(f"{where} [vary] fwhm_nm", width)
    base, base_spec = None, None
    if "base" in spec:
        base, base_spec = load_display(relative(spec, spec["base"]), allow_outside_grid=allow_outside_grid)
    power = vary.get("relative_power", 1.0)
    if isinstance(power, bool) or not isinstance(power, (int, float)) or power <= 0:
        raise SpecError(f"{where} [vary]: relative_power = {power!r} is not allowed; need a number > 0")
    try:
        designs = design_grid(vary.get("kind", "laser"), peaks, width, base=base, relative_power=float(power),
                              profile=vary.get("profile", "gaussian"), allow_outside_grid=allow_outside_grid)
    except MetasimError as exc:
        raise SpecError(f"{where}: {exc}") from None
    if "display" in spec:
        designs.attrs["display_settings"] = display_settings(spec)
    return designs, base_spec


__all__ = ["TOP_KEYS", "TEXT_KEYS", "VARY_KEYS", "DISPLAY_KEYS", "read_sweep_spec", "read_spec_table", "check_shared_keys", "display_settings",
           "sweep_designs", "value_list", "relative"]
