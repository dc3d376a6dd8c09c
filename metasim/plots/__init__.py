"""Figures (PNG, matplotlib Agg, no pyplot state) from metasim result variables.

:mod:`metasim.plots.figures` draws studies, mismatch results and populations;
:mod:`metasim.plots.sweep` draws sweep results, :mod:`metasim.plots.pareto` their Pareto fronts; :mod:`metasim.plots.fitting` observer fits.
"""

from metasim.plots.figures import *  # noqa: F401,F403
from metasim.plots.figures import (  # noqa: F401
    DELTA_E_LABEL, DESIGN_COLOURS, OUTLINE_COLOUR, REFERENCE_COLOUR, STYLE, _figure,
)
from metasim.plots.figures import __all__ as _figures_all
from metasim.plots.fitting import *  # noqa: F401,F403
from metasim.plots.fitting import __all__ as _fitting_all
from metasim.plots.pareto import *  # noqa: F401,F403
from metasim.plots.pareto import __all__ as _pareto_all
from metasim.plots.extra import *  # noqa: F401,F403
from metasim.plots.extra import __all__ as _extra_all
from metasim.plots.search import *  # noqa: F401,F403
from metasim.plots.search import __all__ as _search_all
from metasim.plots.sweep import *  # noqa: F401,F403
from metasim.plots.sweep import __all__ as _sweep_all

__all__ = [*_figures_all, *_fitting_all, *_sweep_all, *_pareto_all, *_search_all, *_extra_all]
