"""metasim: spectral simulation of observer-dependent metamerism.

Public entry points are importable from the top level; each lives in the layer named in
DEVELOPERS.md and is imported on first use so that ``import metasim`` stays quick.
"""

from __future__ import annotations

import importlib

from metasim._version import __version__
from metasim.errors import MetasimError

# public name -> module that defines it (imported lazily on first attribute access)
_ENTRY_POINTS = {
    # spectra
    "wavelength_grid": "metasim.spectra",
    "default_grid": "metasim.spectra",
    "resample": "metasim.spectra",
    "read_spectra_csv": "metasim.spectra",
    "write_spectra_csv": "metasim.spectra",
    "make_spectra": "metasim.spectra",
    # observers
    "standard_observer": "metasim.observers.standard",
    "cone_fundamentals": "metasim.observers.standard",
    "cie2006_observer": "metasim.observers.physiological",
    "observer_population": "metasim.observers.population",
    "physiological_observers": "metasim.observers.physiological",
    # colorimetry
    "tristimulus": "metasim.colorimetry",
    "cone_excitations": "metasim.colorimetry",
    "xyz_to_xy": "metasim.colorimetry",
    "xyz_to_uv": "metasim.colorimetry",
    "xyz_to_lab": "metasim.colorimetry",
    "delta_e_2000": "metasim.colorimetry",
    "delta_e_itp": "metasim.colorimetry",
    "xyz_to_ictcp": "metasim.colorimetry",
    "xy_to_xyz": "metasim.colorimetry",
    # display
    "Display": "metasim.display",
    "make_display": "metasim.display",
    "calibrate_white": "metasim.display",
    "solve_drive": "metasim.display",
    "stack_designs": "metasim.display",
    # metamerism
    "mismatch": "metasim.metamerism",
    "observer_categories": "metasim.metamerism.categories",
    "rank_calibration_observers": "metasim.metamerism",
    "white_point_offsets": "metasim.metamerism",
    # statistics
    "population_statistics": "metasim.statistics",
    "paired_comparison": "metasim.statistics.comparison",
    "rank_designs": "metasim.statistics.comparison",
    # gamut
    "chromaticity_gamut": "metasim.gamut",
    "gamut_coverage": "metasim.gamut",
    "lab_gamut_volume": "metasim.gamut",
    "lab_coverage_volume": "metasim.gamut",
    "extra_primary_gain": "metasim.gamut",
    # fitting
    "fit_observer": "metasim.fitting",
    "colour_matching_data": "metasim.fitting",
    "matching_session_data": "metasim.fitting",
    "expected_uncertainty": "metasim.fitting",
    # studies and sweeps
    "run_study": "metasim.study",
    "design_grid": "metasim.sweep",
    "run_sweep": "metasim.sweep",
    "pareto_front": "metasim.sweep",
    "extra_primary_value": "metasim.sweep",
    "run_search": "metasim.sweep",
    "search_space": "metasim.sweep",
    "luminous_efficacy": "metasim.colorimetry.efficacy",
    # colour-science objects, both ways
    "to_colour": "metasim.interop",
    "from_colour": "metasim.interop",
    # spreadsheets
    "result_tables": "metasim.tables",
    "write_csv_tables": "metasim.tables",
    "write_workbook": "metasim.tables",
    # files
    "save_dataset": "metasim.io",
    "load_dataset": "metasim.io",
}

__all__ = ["__version__", "MetasimError", *_ENTRY_POINTS]


def __getattr__(name: str):
    module = _ENTRY_POINTS.get(name)
    if module is None:
        raise AttributeError(f"module 'metasim' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(__all__)
