"""Words a reader reads instead of the keys stored in result files, and parameter tables instead of
JSON text.

The files keep their keys (``cie1931_2``, ``min_norm``, ``sd_lens_density_pct``, true/false); a report
shows :func:`label` of each: "CIE 1931 2°", "minimum-norm drive", "standard deviation of lens
density (%)", "yes"/"no". :func:`parameter_rows` turns a nested dict of settings (an observer
model's parameters, a sweep spec) into rows of a two-column table.

Units in reports and figures (one vocabulary, the files' ``units`` attributes in brackets): CIE
2000 colour differences "CIE 2000 units" (files: "1", long names say "CIE 2000"); CIELAB volumes
"CIELAB units³" (files: "(CIELAB unit)3"); chromaticity areas "xy area" or "u'v' area", unitless
(files: "1"); shares as "%" (files: "1", fractions); wavelengths "nm"; radiance
"W sr⁻¹ m⁻² nm⁻¹"; ages "years"; field sizes "°".
"""

from __future__ import annotations

import json

import numpy as np

#: readable names of the keys metasim stores as values (observers, strategies, colour spaces, kinds)
NAMES = {
    "cie1931_2": "CIE 1931 2°",
    "cie1964_10": "CIE 1964 10°",
    "cie2015_2": "CIE 2015 2° (CIE 170-2)",
    "cie2015_10": "CIE 2015 10° (CIE 170-2)",
    "population_mean": "population mean observer",
    "min_norm": "minimum-norm drive",
    "max_efficiency": "most efficient drive",
    "population": "least mismatch over the population",
    "least_mismatch": "least mismatch over the population",
    "bt709": "ITU-R BT.709",
    "srgb": "sRGB (IEC 61966-2-1)",
    "display_p3": "Display P3",
    "dci_p3": "DCI-P3",
    "bt2020": "ITU-R BT.2020",
    "bt1886": "ITU-R BT.1886",
    "rgb": "RGB signals",
    "xyz": "XYZ values",
    "reflectance": "reflectances (real surfaces)",
    "objects": "real surfaces under their illuminant",
    "surfaces": "real surfaces under their illuminant",
    "log_wavelength": "log wavelength",
    "monotone_cubic": "monotone cubic (Fritsch & Carlson 1980)",
    "linear": "linear",
    "display": "a display",
    "design": "design",
    "reference": "reference",
    "uniform": "uniform",
    "fixed": "fixed",
    "threads": "threads",
    "serial": "one at a time",
    "best1bin": "DE/best/1/bin (Storn & Price 1997)",
    "latinhypercube": "Latin hypercube",
    "deferred": "once per generation",
}
#: readable names of attribute and parameter keys (others: underscores to spaces, unit suffixes)
KEYS = {
    "n": "observers",
    "observer_count": "observers",
    "observer_seed": "seed of the observers",
    "observer_model": "observer model",
    "observer_parameters": "observer parameters",
    "observer_categories": "observers are categories",
    "observer_peak_shift_axis": "axis of the peak shifts",
    "peak_shift_axis": "axis of the peak shifts",
    "calibration_observer": "calibration observer (both sides matched for)",
    "drive_strategy": "drive strategy (more than three primaries)",
    "strategy": "drive strategy (more than three primaries)",
    "white_matched": "whites matched",
    "adapted_white": "adapted white",
    "reference_kind": "kind of reference",
    "stimulus_kind": "kind of stimuli",
    "stimulus_source": "colour space of the stimuli",
    "thresholds_source": "thresholds",
    "gamut_observer": "observer of the gamut numbers",
    "gamut_references": "reference gamuts",
    "extra_primary_candidates": "extra-primary candidates",
    "metasim_version": "metasim version",
    "result_kind": "kind of result",
    "lens_components": "lens components",
    "deviation_distribution": "distribution of the deviations",
    "absorbance_interpolation": "interpolation of the absorbances",
    "distribution": "distribution",
    "low": "from",
    "high": "to",
    "lab_volume": "CIELAB volume computed",
    "per_stimulus": "statistics per stimulus kept",
    "stimulus_count": "number of stimuli",
    "peaks_nm": "peak wavelengths (nm)",
    "width_nm": "FWHM (nm)",  # a design grid's or search's width, under the key its stores hash
    "radiance": "relative power",  # likewise
    "power": "relative power",
    "fixed_primaries": "primaries kept fixed",
    "best_design": "best design",
    "best_set": "designs that cannot be told apart from the best",
    "best_feasible": "best design meets every constraint",
    "evolution_strategy": "differential evolution strategy",
    "initial_population": "initial population",
    "population_updating": "population updated",
    "design_count": "designs",
    "chunk_size": "designs per chunk",
    "spec_hash": "fingerprint of the sweep",
}
#: unit suffixes of keys, as the reader's unit in brackets
SUFFIXES = (("_pct", "%"), ("_nm", "nm"), ("_deg", "°"), ("_years", "years"), ("_cd_m2", "cd/m²"))
#: attributes a reader does not need (bookkeeping of the file format)
HIDDEN = {"metasim_json_attrs", "display_specs", "title", "scenario", "sweep_spec_text", "spec"}


def label(value) -> str:
    """The words a reader reads for a stored value: a known key's name, yes/no for booleans,
    numbers as they are, other text with underscores as spaces only when it is one key-like word."""
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, (float, np.floating)):
        return f"{float(value):g}"
    if value is None:
        return "none"
    text = str(value)
    if text.lower() in ("true", "false"):
        return "yes" if text.lower() == "true" else "no"
    if text in NAMES:
        return NAMES[text]
    return text


def key_label(key: str) -> str:
    """``"sd_lens_density_pct"`` → ``"standard deviation of lens density (%)"``."""
    key = str(key)
    if key in KEYS:
        return KEYS[key]
    unit = ""
    for suffix, name in SUFFIXES:
        if key.endswith(suffix):
            key, unit = key[: -len(suffix)], f" ({name})"
            break
    words = key.replace("_", " ")
    if words.startswith("sd "):
        words = "standard deviation of " + words[3:]
    words = f" {words} ".replace(" l ", " L-cone ").replace(" m ", " M-cone ").replace(" s ", " S-cone ").strip()
    return words + unit


def parsed(value):
    """A value stored as JSON text (metasim writes nested attributes so), parsed; others as they are."""
    if isinstance(value, str) and value[:1] in "{[":
        try:
            return json.loads(value)
        except ValueError:
            return value
    return value


def _flat(value) -> str:
    value = parsed(value)
    if isinstance(value, dict):
        if set(value) >= {"distribution"}:  # a distribution: "uniform from 20 to 70", "fixed 2"
            rest = [f"{key_label(k)} {label(v)}" for k, v in value.items() if k != "distribution"]
            if value.get("distribution") == "fixed" and "value" in value:
                return label(value["value"])
            return f"{label(value['distribution'])} " + " ".join(rest)
        return "; ".join(f"{key_label(k)}: {_flat(v)}" for k, v in value.items())
    if isinstance(value, list):
        return ", ".join(_flat(v) for v in value)
    return label(value)


def parameter_rows(values: dict, *, hidden=HIDDEN) -> list[list[str]]:
    """Rows ``[name, value]`` of a dict of settings, nested dicts flattened into readable text."""
    rows = []
    for key, value in values.items():
        if key in hidden or str(key).startswith("_"):
            continue
        rows.append([key_label(key), _flat(value)])
    return rows


__all__ = ["NAMES", "KEYS", "HIDDEN", "label", "key_label", "parsed", "parameter_rows"]
