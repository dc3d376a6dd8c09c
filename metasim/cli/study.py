"""Studies behind the ``metasim`` subcommands: call the library layers and pack their results in one Dataset.

Nothing here models anything: every number comes from a library function (observers, gamut,
mismatch engine); this module chooses the calls, passes the user's options and gathers the outputs
into one self-describing *study result* that :mod:`metasim.report` renders and
:func:`metasim.save_dataset` writes losslessly.

Study result layout (dims from the project vocabulary):

``display``   every display in the study (the reference display, if there is one, first);
              coordinate ``display_role`` ("reference" or "design").
``design``    the candidate displays judged against the reference (a subset of ``display``).

======================================  ==========================================================
variable                                holds
======================================  ==========================================================
``spectra`` (display, primary, wl)      primary radiance after white calibration; ``primary`` is an
                                        index, ``primary_label`` (display, primary) names it ("" and
                                        NaN pad displays with fewer primaries)
``primary_xy`` (display, primary, chr)  CIE 1931 xy of each primary
``gamut_area_xy``, ``gamut_area_uv``    chromaticity gamut area (display)
``gamut_polygon`` (display, vertex, …)  hull in CIE 1931 xy, NaN padded
``gamut_coverage`` (display, reference_gamut)      share of each reference area covered
``locus_share`` (display)               share of the CIE 1931 spectrum-locus area
``lab_volume`` (display)                CIELAB volume of the colour solid, own white
``lab_coverage_volume`` (display, reference_gamut) share of each reference solid's CIELAB volume
``delta_e_2000`` (design, observer, stimulus) and the engine's summaries over ``design``
``delta_e_2000_overall`` (design, statistic)       over all observer × stimulus pairs
``area_gain_share``, ``volume_gain_share`` (design, peak_wavelength)  extra-primary gain
======================================  ==========================================================

Attributes: ``result_kind`` = "metasim study", the engine's model attributes, the population's
model and parameters, the spec texts (``display_specs``) and ``metasim_version``.
"""

from __future__ import annotations

import json
import math
import time

import numpy as np
import xarray as xr

from metasim._version import __version__
from metasim.colorimetry import xyz_to_xy
from metasim.display import Display
from metasim.errors import MetasimError
from metasim.gamut import (
    REFERENCE_GAMUTS,
    chromaticity_gamut,
    extra_primary_gain,
    gamut_coverage,
    lab_coverage_volume,
    lab_gamut_volume,
    locus_share,
)
from metasim.metamerism import (
    cie_13_3_samples,
    combine,
    mismatch,
    neutral_ramp,
    primaries_and_secondaries,
    read_stimuli_csv,
    rgb_cube_grid,
)
from metasim.metamerism.summary import STATISTICS, summarise, weighted_quantile
from metasim.observers import observer_categories, observer_population, standard_observer
from metasim.spectra import default_grid

RESULT_KIND = "metasim study"
STIMULUS_SETS = ("ramp", "primaries", "cube", "cie13.3")
#: Candidate peaks of the extra-primary gain curve, nm.
EXTRA_PEAKS_NM = np.arange(450.0, 651.0, 1.0)
MISMATCH_VARIABLES = ("delta_e_2000", "delta_e_white", "delta_e_2000_by_stimulus", "delta_e_2000_by_age",
                      "observers_per_age_band", "share_beyond", "share_beyond_overall", "out_of_gamut_test",
                      "out_of_gamut_reference", "delta_e_2000_calibration")


VARIABLE_ATTRS = {
    "spectra": ("W sr-1 m-2 nm-1", "spectral radiance of each primary at full drive, after white calibration"),
    "primary_label": ("1", "label of each primary (empty: padding)"),
    "primary_xy": ("1", "CIE 1931 xy chromaticity of each primary"),
    "white_xy": ("1", "CIE 1931 xy chromaticity of the display white"),
    "gamut_area_xy": ("1", "chromaticity gamut area in CIE 1931 xy"),
    "gamut_area_uv": ("1", "chromaticity gamut area in CIE 1976 u'v'"),
    "gamut_polygon": ("1", "chromaticity gamut polygon in CIE 1931 xy (NaN padded)"),
    "gamut_coverage": ("1", "share of each reference gamut's xy area covered"),
    "locus_share": ("1", "share of the CIE 1931 spectrum-locus area covered"),
    "lab_volume": ("1", "CIELAB volume of the colour solid (own white), CIELAB units cubed"),
    "lab_coverage_volume": ("1", "share of each reference colour solid's CIELAB volume covered"),
    "area_gain_share": ("1", "chromaticity area gained by one extra laser primary, share of the base area"),
    "volume_gain_share": ("1", "CIELAB volume gained by one extra laser primary, share of the base volume"),
    "extra_base": ("1", "primaries the extra-primary gain starts from"),
}


class Progress:
    """Progress lines on stderr: ``metasim: [2/5] step ... (1.2 s)``."""

    def __init__(self, steps: int, stream=None, quiet: bool = False):
        import sys

        self.steps, self.done, self.stream, self.quiet = steps, 0, stream or sys.stderr, quiet
        self.start = time.perf_counter()

    def step(self, text: str) -> None:
        self.done += 1
        if not self.quiet:
            elapsed = time.perf_counter() - self.start
            print(f"metasim: [{self.done}/{self.steps}] {text} ({elapsed:.1f} s)", file=self.stream, flush=True)


# -- inputs ----------------------------------------------------------------------------------------

def parse_range(text: str, what: str):
    """``"20-70"`` → (20.0, 70.0); ``"32"`` → 32.0."""
    parts = str(text).split("-")
    try:
        values = [float(p) for p in parts]
    except ValueError:
        raise MetasimError(f"{what} {text!r} is not a number or a LO-HI range") from None
    if len(values) == 1:
        return values[0]
    if len(values) == 2:
        return tuple(values)
    raise MetasimError(f"{what} {text!r} is not a number or a LO-HI range")


def build_population(size: int, seed: int, ages: str, field_size: str, categories: int | None = None) -> xr.Dataset:
    """A seeded observer population (or its ``categories`` representative observers)."""
    population = observer_population(size, seed=seed, age_years=parse_range(ages, "age range"),
                                     field_size_deg=parse_range(field_size, "field size"))
    if categories:
        population = observer_categories(population, categories, seed=seed)
    return population


def build_stimuli(tokens: str, *, source: str = "bt709", csv_kind: str = "rgb") -> xr.Dataset:
    """A stimulus set from a comma list: ramp[:N], primaries, cube[:N], cie13.3, or CSV paths."""
    sets = []
    for token in [t.strip() for t in str(tokens).split(",") if t.strip()]:
        name, _, count = token.partition(":")
        if name in STIMULUS_SETS:
            try:
                n = int(count) if count else None
            except ValueError:
                raise MetasimError(f"stimulus set {token!r}: {count!r} is not a whole number") from None
            if name == "ramp":
                sets.append(neutral_ramp(n or 6, source=source))
            elif name == "primaries":
                sets.append(primaries_and_secondaries(source=source))
            elif name == "cube":
                sets.append(rgb_cube_grid(n or 3, source=source))
            else:
                sets.append(cie_13_3_samples())
        elif token.lower().endswith(".csv"):
            sets.append(read_stimuli_csv(token, csv_kind, source=source))
        else:
            raise MetasimError(f"stimulus set {token!r} is not known; allowed: {', '.join(STIMULUS_SETS)} "
                               "or a .csv file")
    if not sets:
        raise MetasimError("no stimulus set given; allowed: " + ", ".join(STIMULUS_SETS) + " or a .csv file")
    return combine(*sets)  # distinct colours: white in the ramp, the primaries and the cube is kept once


def default_age_bands(observers: xr.Dataset):
    """Decade bands that cover the observers' ages (so no band is empty by construction)."""
    if "age_years" not in observers.coords:
        return None
    ages = np.asarray(observers.coords["age_years"].values, dtype=float)
    lo, hi = math.floor(ages.min() / 10) * 10, math.ceil(ages.max() / 10) * 10
    edges = list(range(int(lo), int(hi) + 1, 10))
    return edges if len(edges) >= 2 else [lo, lo + 10]


# -- gamut of every display --------------------------------------------------------------------------

def _gamut_block(display: Display, cie1931: xr.Dataset) -> dict:
    gamut = chromaticity_gamut(display, observer=cie1931)
    refs = list(REFERENCE_GAMUTS)
    coverage = xr.concat([gamut_coverage(gamut, r) for r in refs], dim="reference_gamut")
    volume_cover = xr.concat([lab_coverage_volume(display, r, observer=cie1931)["coverage"] for r in refs],
                             dim="reference_gamut")
    return {
        "gamut_area_xy": gamut["area"],
        "gamut_area_uv": chromaticity_gamut(display, space="uv", observer=cie1931)["area"],
        "gamut_polygon": gamut["polygon"],
        "primary_xy": gamut["chromaticity_of_primary"],
        "gamut_coverage": coverage.assign_coords(reference_gamut=refs),
        "locus_share": locus_share(display, cie1931),
        "lab_volume": lab_gamut_volume(display, cie1931),
        "lab_coverage_volume": volume_cover.assign_coords(reference_gamut=refs),
    }


def _pad_primary(array: xr.DataArray, n: int) -> xr.DataArray:
    array = array.drop_vars([c for c in array.coords if "primary" in array[c].dims])
    array = array.assign_coords(primary=np.arange(array.sizes["primary"]))
    return array.reindex(primary=np.arange(n))


def _clean(array: xr.DataArray, keep=()) -> xr.DataArray:
    drop = [c for c in array.coords if c not in array.dims and c not in keep]
    return array.drop_vars(drop)


def display_blocks(displays: list[Display], roles: list[str], cie1931, progress: Progress) -> xr.Dataset:
    """Spectra and gamut variables of every display, stacked along ``display``."""
    n = max(d.n_primaries for d in displays)
    parts = []
    for display, role in zip(displays, roles):
        block = {k: _clean(v) for k, v in _gamut_block(display, cie1931).items()}
        block["spectra"] = _pad_primary(display.spectra, n)
        block["primary_xy"] = _pad_primary(block["primary_xy"], n)
        labels = display.primaries + [""] * (n - display.n_primaries)
        block["primary_label"] = xr.DataArray(np.array(labels, dtype=str), dims="primary",
                                              coords={"primary": np.arange(n)})
        block["white_xy"] = _clean(xyz_to_xy(display.white_tristimulus(cie1931)))
        parts.append(xr.Dataset(block))
        progress.step(f"gamut of {display.name!r}: {float(block['gamut_area_xy']):.4f} xy area, "
                      f"{float(block['lab_volume']):.3g} CIELAB volume")
    max_vertex = max(p.sizes["vertex"] for p in parts)
    parts = [p.reindex(vertex=np.arange(max_vertex)) for p in parts]
    names = unique_names([d.name for d in displays])
    out = xr.concat(parts, dim=xr.DataArray(names, dims="display", name="display"))
    out = out.assign_coords(display_role=("display", list(roles)))
    out["primary_label"] = out["primary_label"].astype(str)
    return out


def unique_names(names: list[str]) -> list[str]:
    out = []
    for name in names:
        label, i = name, 2
        while label in out:
            label, i = f"{name} ({i})", i + 1
        out.append(label)
    return out


# -- the study ---------------------------------------------------------------------------------------

def run_study(reference, designs: list[Display], observers: xr.Dataset, stimuli: xr.Dataset, *,
              calibration_observer: str = "cie1931_2", strategy: str = "min_norm", age_bands=None,
              extra_bases: list | None = None, specs: dict | None = None, progress: Progress | None = None,
              extra_peaks_nm=EXTRA_PEAKS_NM, rank_calibration: bool = True, white_categories: int = 6,
              seed: int = 0) -> xr.Dataset:
    """Gamut of every display and the population mismatch of each design against ``reference``.

    ``reference`` is a :class:`Display` or ``"objects"`` (reflectance stimuli under their own
    illuminant). ``extra_bases`` gives, per design, the primary labels the extra-primary gain
    starts from (None: all of the design's primaries).
    """
    progress = progress or Progress(0, quiet=True)
    cie1931 = standard_observer("cie1931_2", default_grid().values)
    displays = ([reference] if isinstance(reference, Display) else []) + list(designs)
    roles = (["reference"] if isinstance(reference, Display) else []) + ["design"] * len(designs)
    blocks = display_blocks(displays, roles, cie1931, progress)
    design_names = list(blocks.display.values[len(displays) - len(designs):])
    bands = age_bands if age_bands is not None else default_age_bands(observers)
    results, gains, choices = [], [], []
    for i, design in enumerate(designs):
        result = mismatch(reference, design, observers, stimuli, calibration_observer=calibration_observer,
                          strategy=strategy, **({"age_bands": bands} if bands else {}))
        overall = weighted_quantile_table(result["delta_e_2000"])
        keep = [v for v in MISMATCH_VARIABLES if v in result]
        part = result[keep]
        part = part.drop_vars([c for c in part.coords if c not in part.dims and "observer" not in part[c].dims])
        part["delta_e_2000_overall"] = overall
        part["metamerism_index_by_stimulus"] = summarise(result["metamerism_index"], age_bands=(),
                                                         name="metamerism_index")["metamerism_index_by_stimulus"]
        results.append(part)
        p95 = float(overall.sel(statistic="p95"))
        progress.step(f"mismatch of {design.name!r}: {observers.sizes['observer']} observers x "
                      f"{stimuli.sizes['stimulus']} stimuli, 95th percentile {p95:.2f} CIE 2000 units")
        base = design.spectra
        labels = (extra_bases or [None] * len(designs))[i]
        if labels:
            base = base.sel(primary=list(labels))
        gain = extra_primary_gain(base, cie1931, peak_nm=extra_peaks_nm, kind="laser", volume=True)
        gains.append(gain[["area_gain_share", "volume_gain_share", "area_gain", "volume_gain"]]
                     .assign(extra_base=xr.DataArray(", ".join(str(p) for p in base.primary.values))))
        progress.step(f"extra-primary gain of {design.name!r}: {len(extra_peaks_nm)} candidate lines")
        if rank_calibration or white_categories:
            choice = decision_block(reference, design, observers, stimuli, strategy=strategy,
                                    calibration_observer=calibration_observer, rank=rank_calibration,
                                    categories=white_categories, seed=seed)
            if choice is not None:
                choices.append(choice)
                progress.step(f"calibration choices for {design.name!r}: best "
                              f"{choice.attrs.get('best', 'n/a')}")
    engine = dict(results[0].attrs) if results else {}
    design_dim = xr.DataArray(design_names, dims="design", name="design")
    mism = xr.concat(results, dim=design_dim, combine_attrs="drop_conflicts")
    gain = xr.concat(gains, dim=design_dim)
    parts = [blocks, mism, gain]
    if choices and len(choices) == len(designs):
        parts.append(xr.concat(choices, dim=design_dim, combine_attrs="drop"))
    out = xr.merge(parts, combine_attrs="override")
    out.attrs = study_attrs(engine, observers, stimuli, specs, reference, design_names, strategy,
                            calibration_observer)
    for name, (units, long_name) in VARIABLE_ATTRS.items():
        if name in out:
            out[name].attrs.update({"units": units, "long_name": long_name})
    for name in out.data_vars:
        out[name].attrs.setdefault("long_name", name.replace("_", " "))
        out[name].attrs.setdefault("units", "1")
    return out


def decision_block(reference, design: Display, observers, stimuli, *, strategy, calibration_observer, rank: bool,
                   categories: int, seed: int) -> xr.Dataset | None:
    """Calibration-observer ranking and per-category white-point offsets, when the engine offers them."""
    try:
        from metasim.metamerism import choices
    except ImportError:  # older engine without the decision helpers
        return None
    out, best = xr.Dataset(), "n/a"
    if rank and hasattr(choices, "rank_calibration_observers"):
        ranking = choices.rank_calibration_observers(reference, design, observers, stimuli, strategy=strategy)
        best = str(ranking.attrs.get("best_calibration_observer", "n/a"))
        out["calibration_mean_delta_e"] = ranking["mean_delta_e"]
        out["calibration_p95_delta_e"] = ranking["p95_delta_e"]
        out["calibration_mean_delta_e_white"] = ranking["mean_delta_e_white"]
        out["best_calibration_observer"] = xr.DataArray(best)
    if categories and hasattr(choices, "white_point_offsets"):
        group = observers if "weight" in observers.coords else observer_categories(
            observers, min(int(categories), observers.sizes["observer"]), seed=seed)
        offsets = choices.white_point_offsets(reference, design, group, calibration_observer=calibration_observer,
                                              stimuli=stimuli if stimuli.attrs.get("kind") == "reflectance" else None)
        keep = [c for c in ("weight", "age_years") if c in offsets.coords]
        for name in ("offset_xy", "offset_uv_length"):
            if name in offsets:
                value = offsets[name].drop_vars([c for c in offsets[name].coords
                                                 if c not in offsets[name].dims and c not in keep])
                value = value.rename(observer="category").assign_coords(category=np.arange(value.sizes["observer"]))
                out[f"white_{name}"] = value.rename({c: f"category_{c}" for c in keep})
    if not out.data_vars:
        return None
    out.attrs["best"] = best
    return out


def weighted_quantile_table(delta_e: xr.DataArray) -> xr.DataArray:
    """mean, median, p95, max over all observer × stimulus pairs (observer weights if present)."""
    values = delta_e.transpose("observer", "stimulus").values
    weights = None
    if "weight" in delta_e.coords:
        weights = np.repeat(np.asarray(delta_e.coords["weight"].values, dtype=float), values.shape[1])
    flat = values.reshape(-1)
    mean = float(np.average(flat, weights=weights))
    stats = [mean, float(weighted_quantile(flat, weights, 0.5, 0)), float(weighted_quantile(flat, weights, 0.95, 0)),
             float(np.max(flat))]
    return xr.DataArray(stats, dims="statistic", coords={"statistic": list(STATISTICS)},
                        attrs={"units": "1", "long_name": "CIE 2000 difference over all observer x stimulus pairs"})


def study_attrs(engine: dict, observers, stimuli, specs, reference, design_names, strategy, calibration) -> dict:
    population = dict(observers.attrs)
    parameters = population.get("parameters", "{}")
    if isinstance(parameters, str):
        try:
            parameters = json.loads(parameters)
        except ValueError:
            parameters = {"text": parameters}
    attrs = {
        "result_kind": RESULT_KIND,
        "title": f"{', '.join(design_names)} against "
                 f"{reference.name if isinstance(reference, Display) else 'real objects'}",
        "model": engine.get("model", ""),
        "observer_model": str(population.get("model", engine.get("observer_model", ""))),
        "observer_parameters": parameters,
        "observer_seed": population.get("seed", "none"),
        "observer_count": int(observers.sizes["observer"]),
        "observer_categories": bool("weight" in observers.coords),
        "calibration_observer": calibration,
        "drive_strategy": strategy,
        "white_matched": engine.get("white_matched", True),
        "adapted_white": engine.get("adapted_white", ""),
        "reference": engine.get("reference", ""),
        "reference_kind": engine.get("reference_kind", ""),
        "stimuli": stimuli.attrs.get("description", ""),
        "stimulus_kind": stimuli.attrs.get("kind", ""),
        "stimulus_source": stimuli.attrs.get("source", ""),
        "thresholds_source": engine.get("thresholds_source", "common practice, no source"),
        "gamut_observer": "cie1931_2",
        "gamut_references": "primaries from colour-science: ITU-R BT.709, SMPTE EG 432-1, SMPTE RP 431-2, ITU-R BT.2020",
        "extra_primary_candidates": "laser lines 450-650 nm, power of the mean base primary, CIELAB white fixed",
        "display_specs": {name: spec.get("_text", "") for name, spec in (specs or {}).items()},
        "metasim_version": __version__,
    }
    return attrs


__all__ = ["RESULT_KIND", "STIMULUS_SETS", "Progress", "parse_range", "build_population", "build_stimuli",
           "default_age_bands", "run_study"]
