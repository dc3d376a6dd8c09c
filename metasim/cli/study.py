"""The command line's study inputs: LO-HI ranges, populations and stimulus lists.

The study itself is the library function :func:`metasim.study.run_study` (its result layout is
described in :mod:`metasim.study`); this module only turns command-line text into its inputs.
"""

from __future__ import annotations

import warnings

import xarray as xr

from metasim.cli.paths import parse_range, range_text
from metasim.errors import MetasimError, StimulusError
from metasim.metamerism import (
    cie_13_3_samples,
    combine,
    neutral_ramp,
    primaries_and_secondaries,
    read_stimuli_csv,
    rgb_cube_grid,
)
from metasim.metamerism.categories import observer_categories
from metasim.observers.population import observer_population
from metasim.progress import Progress  # noqa: F401  (the reporter lived here before metasim.progress)

#: build_population's keywords before it took the library's names (deprecated) → today's names
OLD_KEYWORDS = {"ages": "age_years", "field_size": "field_size_deg"}
#: Stimulus set names of ``--stimuli`` (each followed by ``:N`` where it takes a size).
STIMULUS_SETS = ("ramp", "primaries", "cube", "cie13.3")


# -- inputs ----------------------------------------------------------------------------------------

def build_population(size: int, seed: int, age_years=32, field_size_deg=2, categories: int | None = None, *,
                     extrapolate: bool = False, progress=None, **old_keywords) -> xr.Dataset:
    """A seeded observer population (or its ``categories`` representative observers); ``progress``
    (a :class:`metasim.progress.Progress`, a numbered step, or any callable taking a line) is told
    when it is drawn.

    ``age_years`` and ``field_size_deg`` are what ``--ages`` and ``--field-size`` parsed (a number or
    a ``(lo, hi)`` pair, :func:`~metasim.cli.paths.parse_range`) and go to
    :func:`metasim.observers.observer_population` under the same names. The old spellings (``ages=``,
    ``field_size=``, and ``"LO-HI"`` text) still work with a DeprecationWarning.
    """
    if old_keywords or isinstance(age_years, str) or isinstance(field_size_deg, str):
        age_years, field_size_deg = _renamed(old_keywords, age_years, field_size_deg)
    population = observer_population(size, seed=seed, age_years=age_years, field_size_deg=field_size_deg,
                                     extrapolate=extrapolate)
    if progress is not None:
        progress(f"{size} observers drawn, ages {range_text(age_years)}, field size {range_text(field_size_deg)} deg, "
                 f"seed {seed}")
    if categories is not None:
        population = observer_categories(population, categories, seed=seed)
    return population


def _renamed(old_keywords: dict, age_years, field_size_deg):
    """``ages=`` / ``field_size=`` keywords and ``"LO-HI"`` text, the spellings of build_population
    before it took the library's names and parsed values (deprecated: one warning per call)."""
    unknown = set(old_keywords) - set(OLD_KEYWORDS)
    if unknown:
        raise TypeError(f"build_population() got unexpected keyword argument(s) {', '.join(sorted(unknown))}")
    values = {"age_years": old_keywords.get("ages", age_years),
              "field_size_deg": old_keywords.get("field_size", field_size_deg)}
    notes = [f"{old}=... is now {OLD_KEYWORDS[old]}=..." for old in old_keywords]
    for name, what in (("age_years", "age range"), ("field_size_deg", "field size")):
        if isinstance(values[name], str):
            notes.append(f"{name}={values[name]!r} as text is now a number or a (lo, hi) pair "
                         "(metasim.cli.paths.parse_range)")
            values[name] = parse_range(values[name], what)
    warnings.warn(f"build_population: {'; '.join(notes)} (the old spelling is deprecated)", DeprecationWarning,
                  stacklevel=3)
    return values["age_years"], values["field_size_deg"]


def build_stimuli(tokens: str, *, source: str = "bt709", csv_kind: str = "rgb") -> xr.Dataset:
    """A stimulus set from a comma list: ramp[:N], primaries, cube[:N], cie13.3, or CSV paths."""
    sets = []
    for token in [t.strip() for t in str(tokens).split(",") if t.strip()]:
        name, _, count = token.partition(":")
        if name in STIMULUS_SETS:
            try:
                n = int(count) if count else None
            except ValueError:
                raise StimulusError(f"stimulus set {token!r}: {count!r} is not a whole number") from None
            try:
                if name == "ramp":
                    sets.append(neutral_ramp(n or 6, source=source))
                elif name == "primaries":
                    sets.append(primaries_and_secondaries(source=source))
                elif name == "cube":
                    sets.append(rgb_cube_grid(n or 3, source=source))
                else:
                    sets.append(cie_13_3_samples())
            except MetasimError as exc:
                raise StimulusError(f"stimulus set {token!r}: {exc}") from None
        elif token.lower().endswith(".csv"):
            sets.append(read_stimuli_csv(token, csv_kind, source=source))
        else:
            raise StimulusError(f"stimulus set {token!r} is not known; allowed: {', '.join(STIMULUS_SETS)} "
                                "or a .csv file")
    if not sets:
        raise StimulusError("no stimulus set given; allowed: " + ", ".join(STIMULUS_SETS) + " or a .csv file")
    return combine(*sets)  # distinct colours: white in the ramp, the primaries and the cube is kept once


def spec_texts(specs: dict) -> dict:
    """Display name → text of its spec file (:func:`metasim.cli.specs.load_display`'s ``_text``), for
    the study's ``display_specs`` attribute."""
    return {name: spec.get("_text", "") for name, spec in specs.items()}


__all__ = ["STIMULUS_SETS", "Progress", "parse_range", "build_population", "build_stimuli", "spec_texts"]
