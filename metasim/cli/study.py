"""The command line's study inputs: LO-HI ranges, populations and stimulus lists.

The study itself is the library function :func:`metasim.study.run_study` (its result layout is
described in :mod:`metasim.study`); this module only turns command-line text into its inputs.
"""

from __future__ import annotations

import xarray as xr

from metasim.cli.paths import parse_range
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
from metasim.observers import observer_population
from metasim.progress import Progress  # noqa: F401  (the reporter lived here before metasim.progress)

#: Stimulus set names of ``--stimuli`` (each followed by ``:N`` where it takes a size).
STIMULUS_SETS = ("ramp", "primaries", "cube", "cie13.3")


# -- inputs ----------------------------------------------------------------------------------------

def build_population(size: int, seed: int, ages: str, field_size: str, categories: int | None = None, *,
                     extrapolate: bool = False, progress=None) -> xr.Dataset:
    """A seeded observer population (or its ``categories`` representative observers); ``progress``
    (a :class:`metasim.progress.Progress`, a numbered step, or any callable taking a line) is told
    when it is drawn."""
    population = observer_population(size, seed=seed, age_years=parse_range(ages, "age range"),
                                     field_size_deg=parse_range(field_size, "field size"), extrapolate=extrapolate)
    if progress is not None:
        progress(f"{size} observers drawn, ages {ages}, field size {field_size} deg, seed {seed}")
    if categories is not None:
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
