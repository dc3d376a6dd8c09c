"""The shipped demo colour-matching data: it reads as the documented CSV form and fits."""

import numpy as np

from metasim._paths import data_dir
from metasim.fitting.files import read_matching_functions_csv

STILES_BURCH_PRIMARIES_NM = (645.16, 526.32, 444.44)  # CIE 1964 / Stiles & Burch (1959) primaries


def test_demo_matches_read_as_colour_matching_functions():
    data = read_matching_functions_csv(data_dir() / "demo" / "lab_matches.csv")
    assert data.sizes["observer"] == 8 and data.sizes["stimulus"] == 31
    np.testing.assert_allclose(data["primary_wavelength"].values, STILES_BURCH_PRIMARIES_NM)  # Stiles & Burch (1959)
    np.testing.assert_allclose(data["test_wavelength"].values, np.arange(400.0, 701.0, 10.0))
    np.testing.assert_allclose(data["age_years"].values, [22, 27, 34, 41, 47, 55, 61, 68])
    assert np.isfinite(data["amount"]).all()
    assert set(np.unique(data["field_size_deg"].values)) == {10.0}
