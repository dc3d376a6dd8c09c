"""Spreadsheet export: every summary table of a result file as tidy CSV (and a workbook), read back."""

import csv
import math
import sys

import numpy as np
import pytest

import metasim
from metasim import emitters
from metasim.errors import MetasimError, OutputExistsError
from metasim.metamerism import mismatch, primaries_and_secondaries
from metasim.tables import result_tables, write_csv_tables, write_workbook
from metasim.sweep import design_grid, run_sweep
from test_cli import run


@pytest.fixture(scope="module")
def monitor():
    spectra = emitters.gaussian([612, 548, 455], [38, 42, 28], name=["R", "G", "B"])
    return metasim.calibrate_white(metasim.make_display(spectra, name="monitor"), "cie1931_2", white="D65",
                                   luminance=100)


@pytest.fixture(scope="module")
def viewers():
    return metasim.observer_population(25, seed=8, age_years=(20, 70))


@pytest.fixture(scope="module")
def result(monitor, viewers):
    lasers = metasim.make_display(emitters.laser_line([638, 532, 465, 589], 1.0, name=["R", "G", "B", "Y"]),
                                  name="lasers")
    return mismatch(monitor, lasers, viewers, primaries_and_secondaries())


@pytest.fixture(scope="module")
def sweep_file(tmp_path_factory, monitor, viewers):
    designs = design_grid("laser", peaks_nm={"R": [625, 640], "G": [532], "B": [460]}, fwhm_nm=[1.0])
    store = tmp_path_factory.mktemp("tables") / "store"
    run_sweep(designs, monitor, viewers, primaries_and_secondaries(), store=store, scheduler="serial")
    return store / "sweep.nc"


def _read(path):
    with open(path, newline="", encoding="utf-8") as handle:
        records = list(csv.reader(handle))
    return records[0], records[1:]


def _same_cell(text, value):
    if isinstance(value, (float, np.floating)):
        return (text == "" and math.isnan(value)) or (text != "" and float(text) == value)
    if isinstance(value, (int, np.integer)):
        return int(text) == value
    return text == str(value)


def _check_round_trip(tables, paths):
    assert [p.name for p in paths] == ["contents.csv"] + [f"{t.key}.csv" for t in tables]
    for table, path in zip(tables, paths[1:]):
        header, rows = _read(path)
        assert header == table.headers
        assert len(rows) == table.rows
        for j, column in enumerate(table.columns):
            assert all(_same_cell(row[j], value) for row, value in zip(rows, column.values)), (table.key, column.key)


def test_mismatch_result_tables_round_trip_and_agree_with_numpy(tmp_path, result):
    tables = result_tables(result)
    keys = [t.key for t in tables]
    assert "delta_e_2000_by_observer" in keys and "attributes" in keys
    assert not any("xyz_test" in [c.key for c in t.columns] for t in tables)  # raw per-pair arrays left out
    _check_round_trip(tables, write_csv_tables(tables, tmp_path / "csv"))

    header, rows = _read(tmp_path / "csv" / "delta_e_2000_by_observer.csv")
    assert header[:2] == ["statistic", "observer"] and header[-1] == "delta_e_2000_by_observer [ΔE00]"
    assert len(rows) == 4 * 25  # tidy: one row per statistic x observer
    for row in rows:
        seen = result["delta_e_2000"].sel(observer=int(row[1])).values
        statistic, value = row[0], float(row[-1])
        if statistic == "p95":
            assert value == pytest.approx(np.quantile(seen, 0.95), rel=1e-12)  # numpy quantile (linear)
        elif statistic == "max":
            assert value == seen.max()  # numpy
    # tidy: one row per stimulus x statistic, stimulus labels as written by the result
    table = next(t for t in tables if "delta_e_2000_by_stimulus" in [c.key for c in t.columns])
    header, rows = _read(tmp_path / "csv" / f"{table.key}.csv")
    col = header.index("delta_e_2000_by_stimulus [ΔE00]")
    for row in rows:
        if row[header.index("statistic")] == "median":
            per_observer = result["delta_e_2000"].sel(stimulus=row[header.index("stimulus")]).values
            assert float(row[col]) == pytest.approx(np.median(per_observer), rel=1e-12)  # numpy median
    # the observers' parameters travel with the per-observer table, units in the header
    white = next(t for t in tables if "delta_e_white" in [c.key for c in t.columns])
    assert "age_years [year]" in white.headers
    np.testing.assert_array_equal(white.column("age_years").values, result["age_years"].values)
    # contents: one row per column, long names and units
    header, rows = _read(tmp_path / "csv" / "contents.csv")
    assert header[:5] == ["table", "column", "key", "long_name", "units"]
    assert ["delta_e_2000_by_observer", "delta_e_2000_by_observer [ΔE00]"] in [r[:2] for r in rows]
    assert len(rows) == sum(len(t.columns) for t in tables)


def test_population_file_tables(tmp_path, viewers):
    path = metasim.save_dataset(viewers, tmp_path / "viewers.nc")
    tables = result_tables(metasim.load_dataset(path))
    observers = tables[0]
    assert observers.key == "observer" and observers.rows == 25
    assert "age_years [year]" in observers.headers and "l_shift_nm [nm]" in observers.headers
    _check_round_trip(tables, write_csv_tables(tables, tmp_path / "csv"))
    attributes = dict(zip(*(c.values for c in tables[-1].columns)))
    assert attributes["seed"] == "8"


def test_sweep_file_tables_carry_the_design_parameters(tmp_path, sweep_file):
    sweep = metasim.load_dataset(sweep_file)
    tables = result_tables(sweep)
    per_design = next(t for t in tables if t.key == "per_design")
    assert per_design.rows == sweep.sizes["design"] == 2
    assert "R_peak_nm [nm]" in per_design.headers
    np.testing.assert_array_equal(per_design.column("R_peak_nm").values, [625.0, 640.0])
    _check_round_trip(tables, write_csv_tables(tables, tmp_path / "csv"))


def test_csv_refuses_existing_files_unless_replace(tmp_path, result):
    tables = result_tables(result)
    write_csv_tables(tables, tmp_path)
    before = (tmp_path / "contents.csv").stat().st_mtime_ns
    with pytest.raises(OutputExistsError, match="exists already"):
        write_csv_tables(tables, tmp_path)
    assert (tmp_path / "contents.csv").stat().st_mtime_ns == before
    write_csv_tables(tables, tmp_path, replace=True)


def test_workbook_written_and_read_back(tmp_path, result):
    openpyxl = pytest.importorskip("openpyxl")
    tables = result_tables(result)
    path = write_workbook(tables, tmp_path / "result.xlsx")
    book = openpyxl.load_workbook(path, read_only=True)
    sheets = [t.key[:31] for t in tables]  # a sheet name holds at most 31 characters (Office Open XML)
    assert book.sheetnames == ["contents"] + sheets
    for table, sheet in zip(tables, sheets):
        rows = list(book[sheet].iter_rows(values_only=True))
        assert list(rows[0]) == table.headers
        assert len(rows) - 1 == table.rows
        for j, column in enumerate(table.columns):
            for row, value in zip(rows[1:], column.values):
                cell = row[j] if j < len(row) else None  # trailing empty cells are not stored
                if isinstance(value, float) and math.isnan(value):
                    assert cell is None
                elif isinstance(value, float):  # openpyxl writes 16 significant digits
                    assert cell == pytest.approx(value, rel=1e-15, abs=1e-300), (table.key, column.key)
                else:
                    assert cell == value, (table.key, column.key)


def test_workbook_without_openpyxl_is_a_clear_error(monkeypatch, tmp_path, result):
    monkeypatch.setitem(sys.modules, "openpyxl", None)
    with pytest.raises(MetasimError, match=r"pip install \"metasim\[spreadsheet\]\""):
        write_workbook(result_tables(result), tmp_path / "result.xlsx")
    assert not list(tmp_path.iterdir())


def _run(*args):
    """The tables command through metasim.cli.main in this process (test_cli.run)."""
    return run(*args, check=False)


def test_cli_tables_of_a_sweep_store(tmp_path, sweep_file):
    store = sweep_file.parent
    done = _run("tables", store, "--out", tmp_path / "csv")
    assert done.returncode == 0, done.stderr
    assert (tmp_path / "csv" / "per_design.csv").is_file() and "per_design.csv" in done.stdout
    again = _run("tables", store, "--out", tmp_path / "csv")
    assert again.returncode == 1 and "Traceback" not in again.stderr
    errors = [line for line in again.stderr.splitlines() if line.startswith("metasim: error:")]
    assert len(errors) == 1 and "--replace" in errors[0] and again.stderr.splitlines()[-1] == errors[0]
    assert _run("tables", store, "--out", tmp_path / "csv", "--replace").returncode == 0
    bad = _run("tables", tmp_path / "missing.nc")
    assert bad.returncode == 1 and "no such file" in bad.stderr
    wrong = _run("tables", sweep_file, "--out", tmp_path / "other", "--xlsx", tmp_path / "book.csv")
    assert wrong.returncode == 1 and ".xlsx" in wrong.stderr and not (tmp_path / "other").exists()


def test_read_csv_table_names_a_missing_file(tmp_path):
    # common practice, no source: a missing input is an error naming the file, not an OSError
    from metasim.errors import FileFormatError
    from metasim.tables import read_csv_table

    with pytest.raises(FileFormatError, match="absent.csv"):
        read_csv_table(tmp_path / "absent.csv")


def test_report_outputs_refuses_an_unknown_kind(tmp_path):
    # common practice, no source: the error names the value and the kinds allowed
    from metasim.errors import ReportError
    from metasim.report import report_outputs

    with pytest.raises(ReportError, match=r"'pie'.*allowed: extra, fit, population, study, sweep"):
        report_outputs("pie", tmp_path / "page.html", tmp_path / "figures")
