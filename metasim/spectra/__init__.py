"""Spectra: the top layer of metasim — wavelength grids, validation, resampling and CSV exchange.

:mod:`metasim.spectra.grid` holds the grid, validation and resampling policy (see its docstring);
:mod:`metasim.spectra.files` the CSV import and export of measured spectra;
:mod:`metasim.spectra.convert` the conversion of colour-science spectral objects (both ways).
"""

from metasim.spectra.grid import *  # noqa: F401,F403
from metasim.spectra.grid import __all__ as _grid_all
from metasim.spectra.files import read_spectra_csv, write_spectra_csv  # noqa: F401
from metasim.spectra.convert import as_spectra, from_colour, is_colour_spectrum, spectra_to_colour  # noqa: F401

__all__ = [*_grid_all, "read_spectra_csv", "write_spectra_csv", "from_colour", "as_spectra", "is_colour_spectrum",
           "spectra_to_colour"]
