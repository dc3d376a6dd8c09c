"""Search specs: a TOML file that describes a design search, for ``metasim search``.

The top-level keys are those of a sweep spec (:mod:`metasim.cli.sweep`: name, description, base,
reference, stimuli, calibration_observer, strategy, chunk_size, lab_volume, [display]); instead of
``[vary]`` a ``[search]`` table says what to search::

    [search]
    kind = "laser"                         # laser | gaussian | quantum_dot
    profile = "gaussian"                   # laser line shape: gaussian | lorentzian
    seed = 7                               # the search's seed                  (default 0)
    generations = 20                       # after the initial population       (default 20)
    population = 20                        # designs per generation             (default 10 per parameter)
    tolerance = 0.01                       # stop early when the values agree this closely (0: never)
    objective = "p95_mismatch"             # a name, or a table of weights:
                                           # objective = {p95_mismatch = 1.0, bt2020_coverage = 5.0}

    [search.primaries.R]                   # one table per searched primary (3 to 6 primaries in all,
    peak_nm = [615, 660]                   # base primaries included); a number is fixed,
    fwhm_nm = 1.0                          # [lowest, highest] is searched
    relative_power = [0.5, 2.0]            # relative power before white calibration (N > 3)

    [search.constraints]                   # optional: bounds on named objectives or design variables
    bt2020_coverage = {min = 0.9}
    white_efficacy = {min = 250}

A primary's ``fwhm_nm`` and ``relative_power`` are the keys of ``[vary]`` (and ``relative_power`` of a
design spec); their old names ``width_nm`` and ``power`` still work for one release, with a warning.

Objective and constraint names: p95_mismatch, median_mismatch, white_p95, bt2020_coverage,
p3_coverage, bt709_coverage, gamut_area, lab_volume (with lab_volume = true), white_efficacy.
"""

from __future__ import annotations

from metasim.cli.specs import load_display, renamed_keys
from metasim.cli.sweep import TOP_KEYS, check_shared_keys, display_settings, read_spec_table, relative
from metasim.errors import MetasimError, SpecError
from metasim.sweep import search_space
from metasim.sweep.search import PARAMETERS, RENAMED_PARAMETERS

SEARCH_TOP_KEYS = tuple(k for k in TOP_KEYS if k not in ("vary", "per_stimulus")) + ("search",)
#: a searched primary's spec keys: old name → new name (the old still read for one release, with a warning);
#: the keys are the parameter names of metasim.sweep.search_space
RENAMED_PRIMARY_KEYS = RENAMED_PARAMETERS
SEARCH_KEYS = ("kind", "profile", "seed", "generations", "population", "tolerance", "objective", "primaries",
               "constraints")


def read_search_spec(path) -> dict:
    """The parsed search spec (``_path``, ``_text`` added), its keys and value types checked."""
    spec, where, search = read_spec_table(path, "search spec", SEARCH_TOP_KEYS, "search", SEARCH_KEYS,
                                          "a search spec needs a [search] table with [search.primaries.<label>] tables")
    if not isinstance(search.get("primaries"), dict) or not search["primaries"]:
        raise SpecError(f"{where}: [search.primaries.<label>] must name at least one primary, e.g. "
                        "[search.primaries.R] peak_nm = [615, 660]")
    for label, table in search["primaries"].items():
        if isinstance(table, dict):
            renamed_keys(table, RENAMED_PRIMARY_KEYS, f"{where} [search.primaries.{label}]")
            unknown = [key for key in table if key not in PARAMETERS]
            if unknown:
                raise SpecError(f"{where} [search.primaries.{label}]: unknown key {unknown[0]!r}; allowed: "
                                f"{', '.join(PARAMETERS)}")
    for key in ("seed", "generations", "population"):
        if key in search and (isinstance(search[key], bool) or not isinstance(search[key], int) or search[key] < 0):
            raise SpecError(f"{where} [search]: {key} = {search[key]!r} is not allowed; need a whole number >= 0")
    if "tolerance" in search and (isinstance(search["tolerance"], bool)
                                  or not isinstance(search["tolerance"], (int, float)) or search["tolerance"] < 0):
        raise SpecError(f"{where} [search]: tolerance = {search['tolerance']!r} is not allowed; need a number >= 0")
    if "objective" in search and not isinstance(search["objective"], (str, dict)):
        raise SpecError(f"{where} [search]: objective = {search['objective']!r}; give a name or a table of weights")
    if "constraints" in search and not isinstance(search["constraints"], dict):
        raise SpecError(f"{where} [search]: constraints must be a table, e.g. bt2020_coverage = {{min = 0.9}}")
    check_shared_keys(spec, where)
    return spec


def spec_search_space(spec: dict):
    """The :class:`metasim.sweep.SearchSpace` of a search spec, and its display settings (or None)."""
    where = str(spec["_path"])
    search = spec["search"]
    base = load_display(relative(spec, spec["base"]))[0] if "base" in spec else None
    try:
        space = search_space(search.get("kind", "laser"), search["primaries"], base=base,
                             profile=search.get("profile", "gaussian"))
    except MetasimError as exc:
        raise SpecError(f"{where}: {exc}") from None
    return space, display_settings(spec)


__all__ = ["SEARCH_TOP_KEYS", "SEARCH_KEYS", "RENAMED_PRIMARY_KEYS", "read_search_spec", "spec_search_space"]
