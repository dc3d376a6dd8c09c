"""Fitting: colour-matching data → individual observers (the inverse of the observers layer).

* :mod:`metasim.fitting.forms` — the two input forms (colour-matching functions, matching sessions);
  :mod:`metasim.fitting.files` — their CSV imports;
* :mod:`metasim.fitting.model` — the matches an individual CIE 170-1 observer makes, with derivatives;
* :mod:`metasim.fitting.solve` — one batched maximum a posteriori solve for all subjects;
* :mod:`metasim.fitting.fit` — :func:`fit_observer` and the result layout;
  :mod:`metasim.fitting.diagnostics` — identification rules, match errors, nearest category;
* :mod:`metasim.fitting.advice` — expected standard errors of a planned session;
* :mod:`metasim.fitting.synthetic` — matches of known observers with setting noise.
"""

from metasim.fitting.advice import expected_uncertainty
from metasim.fitting.files import read_matching_csv, read_matching_functions_csv, read_session_csv
from metasim.fitting.fit import AGE_PRIOR, fit_observer, prior_model
from metasim.fitting.forms import (CMF_FORM, SESSION_FORM, check_matching_data, colour_matching_data,
                                   matching_session_data)
from metasim.fitting.synthetic import synthetic_matches

__all__ = ["AGE_PRIOR", "CMF_FORM", "SESSION_FORM", "check_matching_data", "colour_matching_data",
           "matching_session_data", "expected_uncertainty", "fit_observer", "prior_model", "synthetic_matches",
           "read_matching_csv", "read_matching_functions_csv", "read_session_csv"]
