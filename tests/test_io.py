"""netCDF4 round trips must be exact for values, coordinates and attributes."""

import numpy as np
import pytest
import xarray as xr

import metasim
from metasim.errors import FileFormatError
from metasim.io import load_dataset, save_dataset


def test_observer_round_trip_is_exact(tmp_path):
    ds = metasim.standard_observer("cie2015_10")
    ds.attrs.update({"seed": 42, "extrapolate": False, "parameters": {"ages": [20, 80], "note": None},
                     "bounds": (0.0, 1.0), "weights": np.array([0.25, 0.75])})
    ds["cmf"].attrs["labels"] = ["a", "b"]
    back = load_dataset(save_dataset(ds, tmp_path / "observer.nc"))
    xr.testing.assert_identical(ds, back)
    assert back.attrs["extrapolate"] is False and back.attrs["bounds"] == (0.0, 1.0)
    assert back.attrs["parameters"] == {"ages": [20, 80], "note": None}


def test_dataarray_round_trip_keeps_nan_and_name(tmp_path):
    da = xr.DataArray(np.array([[1.0, np.nan], [3.0, 4.0]]), dims=("observer", "stimulus"),
                      coords={"observer": [0, 1], "stimulus": ["white", "red"],
                              "age_years": ("observer", [25.0, 70.0])},
                      name="delta_e_2000", attrs={"units": "1"})
    back = load_dataset(save_dataset(da, tmp_path / "d.nc"))
    xr.testing.assert_identical(da, back)


def test_load_errors(tmp_path):
    with pytest.raises(FileFormatError, match="no such file"):
        load_dataset(tmp_path / "none.nc")
    bad = tmp_path / "bad.nc"
    bad.write_text("not netcdf")
    with pytest.raises(FileFormatError, match="not a readable netCDF4 file"):
        load_dataset(bad)


def test_every_top_level_entry_point_resolves():
    for name in metasim.__all__:
        assert getattr(metasim, name) is not None, name
