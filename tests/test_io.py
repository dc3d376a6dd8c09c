"""netCDF4 round trips must be exact for values, coordinates and attributes."""

import os

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


def test_atomic_output_writes_whole_files_or_nothing(tmp_path):
    from metasim.errors import OutputExistsError
    from metasim.io import atomic_output, write_bytes, write_text

    path = tmp_path / "page.html"
    path.write_text("old")
    with pytest.raises(RuntimeError):
        with atomic_output(path) as tmp:
            tmp.write_text("half a pa")
            raise RuntimeError("killed while writing")
    assert path.read_text() == "old" and sorted(p.name for p in tmp_path.iterdir()) == ["page.html"]
    with pytest.raises(OutputExistsError, match="page.html"):
        write_text(path, "new", replace=False)
    assert path.read_text() == "old"
    assert write_text(path, "new").read_text() == "new"
    assert write_bytes(tmp_path / "fresh.png", b"\x89PNG", replace=False).read_bytes() == b"\x89PNG"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["fresh.png", "page.html"]  # no temporary file left


def test_check_outputs_refuses_inputs_and_existing_files_and_clears_stale_partials(tmp_path):
    from metasim.errors import OutputError, OutputExistsError, OutputIsInputError
    from metasim.io import check_outputs

    data = tmp_path / "data.nc"
    data.write_bytes(b"input")
    (tmp_path / "link.nc").symlink_to(data)
    with pytest.raises(OutputIsInputError, match="link.nc"):
        check_outputs([tmp_path / "link.nc"], inputs=[data])
    with pytest.raises(OutputIsInputError, match="two outputs"):
        check_outputs([tmp_path / "a.nc", tmp_path / "sub" / ".." / "a.nc"])
    with pytest.raises(OutputExistsError, match="data.nc"):
        check_outputs([data])
    with pytest.raises(OutputError, match="folder"):
        check_outputs([tmp_path])
    dead = tmp_path / "out.nc.999999999.partial"  # no process has this id
    old_style = tmp_path / "out.nc.partial"
    running = tmp_path / f"out.nc.{os.getppid()}.partial"  # a live process: its file stays
    for stale in (dead, old_style, running):
        stale.write_bytes(b"half")
    assert check_outputs([tmp_path / "out.nc", data], replace=True) == [tmp_path / "out.nc", data]
    assert not dead.exists() and not old_style.exists() and running.exists()
    assert data.read_bytes() == b"input"


def test_replace_option_of_the_command(tmp_path, monkeypatch, capsys):
    from metasim.cli import main

    monkeypatch.chdir(tmp_path)
    assert main(["observers", "--out", "a.nc", "--size", "4", "--quiet"]) == 0
    first = (tmp_path / "a.nc").read_bytes()
    (tmp_path / "a.nc.999999999.partial").write_bytes(b"left by a killed run")
    assert main(["observers", "--out", "a.nc", "--size", "5", "--quiet"]) == 1
    assert "--replace" in capsys.readouterr().err and (tmp_path / "a.nc").read_bytes() == first
    assert main(["observers", "--out", "a.nc", "--size", "5", "--quiet", "--replace"]) == 0
    assert load_dataset(tmp_path / "a.nc").sizes["observer"] == 5
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.nc"]  # the stale temporary file is gone
