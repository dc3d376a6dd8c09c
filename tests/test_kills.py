"""Killed runs: the ``metasim`` command is SIGKILLed while it writes, then run again.

The child process dies at a chosen file write: its ``os.fsync`` (which every output passes through
just before the rename, :func:`metasim.io.atomic_output`) cuts the temporary file to half its
length and sends SIGKILL to its own process, so a half-written file is on disk at the moment of
death. Checked: no file under a final name is cut off; the re-run removes the temporary files and
gives what an uninterrupted run gives (for sweeps: the same ``sweep.nc``, value for value).

Also here: a missing input file is reported before any numerical module is imported (checked with
``python -X importtime``, not by timing).
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest
import xarray as xr

import metasim

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "data" / "demo"

KILLER = textwrap.dedent("""
    import os, signal, sys

    kill_at, count, real_fsync = int(sys.argv[1]), [0], os.fsync

    def fsync(fd):
        count[0] += 1
        if count[0] == kill_at:  # half the file on disk, then die as a SIGKILL kills
            os.ftruncate(fd, os.fstat(fd).st_size // 2)
            os.kill(os.getpid(), signal.SIGKILL)
        real_fsync(fd)

    os.fsync = fsync
    from metasim.cli import main
    sys.exit(main(sys.argv[2:]))
""")

SWEEP = """name = "Red line"
stimuli = "cie13.3"

[display]
transfer = "gamma"
gamma = 2.2
peak_luminance = 100

[vary]
kind = "laser"
fwhm_nm = 1.0

[vary.peaks_nm]
R = [625, 635, 645]
G = [532]
B = [465]
"""


def killed(folder: Path, kill_at: int, *args) -> subprocess.CompletedProcess:
    """Run the command in a child that is SIGKILLed at its ``kill_at``-th file write."""
    script = folder / "killer.py"
    script.write_text(KILLER)
    env = {**os.environ, "PYTHONWARNINGS": "ignore"}
    return subprocess.run([sys.executable, str(script), str(kill_at), *map(str, args), "--quiet"], cwd=folder,
                          capture_output=True, text=True, env=env, timeout=300)


def run_here(folder: Path, monkeypatch, *args) -> int:
    from metasim.cli import main

    monkeypatch.chdir(folder)
    return main([*map(str, args), "--quiet"])


def complete(path: Path) -> bool:
    data = path.read_bytes()
    if path.suffix == ".png":
        return data.startswith(b"\x89PNG") and data.endswith(b"IEND\xaeB`\x82")
    if path.suffix == ".html":
        return data.rstrip().endswith(b"</html>")
    if path.suffix == ".nc":
        metasim.load_dataset(path)
        return True
    return True


def partials(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.rglob("*.partial"))


@pytest.fixture(scope="module")
def study_file(tmp_path_factory) -> Path:
    """A small study result (5 observers, 7 stimuli) to make reports from."""
    from metasim.cli import main

    folder = tmp_path_factory.mktemp("study")
    assert main(["evaluate", str(DEMO / "projector_four_laser.toml"), "--reference", str(DEMO / "grading_monitor.toml"),
                 "--size", "5", "--stimuli", "primaries", "--no-calibration-ranking", "--no-report", "--out", str(folder),
                 "--quiet"]) == 0
    return folder / "study.nc"


@pytest.mark.parametrize("kill_at, what", [(3, "the third figure"), (6, "the HTML page")])
def test_a_report_killed_while_writing_leaves_no_cut_off_file(kill_at, what, study_file, tmp_path, monkeypatch):
    args = ["report", study_file, "--out", "report.html", "--figures", "figures"]
    done = killed(tmp_path, kill_at, *args)
    assert done.returncode == -signal.SIGKILL, done.stderr
    assert len(partials(tmp_path)) == 1  # it died while writing one file ...
    finals = [p for p in tmp_path.rglob("*") if p.is_file() and p.suffix in (".png", ".html")]
    assert len(finals) == kill_at - 1 and all(complete(p) for p in finals)  # ... and every final name is whole
    assert run_here(tmp_path, monkeypatch, *args, "--replace") == 0
    assert partials(tmp_path) == []
    written = sorted(p.name for p in tmp_path.rglob("*") if p.suffix in (".png", ".html"))
    assert len(written) == 6 and all(complete(p) for p in tmp_path.rglob("*") if p.suffix in (".png", ".html"))


def test_a_killed_study_left_behind_is_cleaned_when_the_command_runs_again(study_file, tmp_path, monkeypatch,
                                                                           capsys):
    args = ["report", study_file, "--out", "report.html", "--figures", "figures"]
    assert killed(tmp_path, 2, *args).returncode == -signal.SIGKILL
    assert len(partials(tmp_path)) == 1
    assert run_here(tmp_path, monkeypatch, *args) == 1  # a complete figure exists: refused without --replace ...
    assert "--replace" in capsys.readouterr().err
    assert partials(tmp_path) == []  # ... but the dead run's temporary file is gone


SWEEP_ARGS = ["sweep", "sweep.toml", "--size", "4", "--scheduler", "serial", "--chunk-size", "1", "--no-report"]


@pytest.fixture(scope="module")
def whole_sweep(tmp_path_factory) -> Path:
    """The uninterrupted sweep's sweep.nc."""
    from metasim.cli import main

    folder = tmp_path_factory.mktemp("whole")
    (folder / "sweep.toml").write_text(SWEEP)
    assert main([*SWEEP_ARGS[:1], str(folder / "sweep.toml"), *SWEEP_ARGS[2:], "--out", str(folder / "store"),
                 "--quiet"]) == 0
    return folder / "store" / "sweep.nc"


@pytest.mark.parametrize("kill_at, what", [(5, "the second chunk file"), (6, "the manifest, recording the third chunk")])
def test_a_sweep_killed_while_writing_resumes_to_the_uninterrupted_result(kill_at, what, whole_sweep, tmp_path,
                                                                          monkeypatch):
    (tmp_path / "sweep.toml").write_text(SWEEP)
    args = SWEEP_ARGS
    done = killed(tmp_path, kill_at, *args, "--out", "store")
    assert done.returncode == -signal.SIGKILL, done.stderr
    store = tmp_path / "store"
    assert partials(store) and (store / "writer.lock").exists()  # died while writing, holding the lock
    assert all(complete(p) for p in store.glob("*.nc"))  # no cut-off chunk under its final name
    assert run_here(tmp_path, monkeypatch, *args, "--out", "store") == 0
    assert partials(store) == [] and not (store / "writer.lock").exists()
    xr.testing.assert_identical(metasim.load_dataset(store / "sweep.nc"), metasim.load_dataset(whole_sweep))


@pytest.mark.parametrize("args", [["evaluate", "missing.toml"], ["report", "missing.nc"],
                                  ["sweep", "missing.toml", "--out", "store"],
                                  ["evaluate", "spec.toml", "--observers", "missing.nc"],
                                  ["tables", "missing.nc"], ["estimate", "missing.csv"]])
def test_a_missing_input_is_reported_before_the_numerical_modules_load(args, tmp_path):
    (tmp_path / "spec.toml").write_text((DEMO / "projector_four_laser.toml").read_text())
    done = subprocess.run([sys.executable, "-X", "importtime", "-m", "metasim.cli", *args], cwd=tmp_path,
                          capture_output=True, text=True, timeout=120)
    lines = done.stderr.splitlines()
    errors = [line for line in lines if line.startswith("metasim: error:")]
    assert done.returncode == 1 and len(errors) == 1 and "missing" in errors[0] and "no such file" in errors[0]
    imported = {line.split("|")[-1].strip().split(".")[0] for line in lines if line.startswith("import time:")}
    assert "metasim" in imported
    assert not imported & {"numpy", "xarray", "numba", "matplotlib", "scipy", "pandas", "colour", "netCDF4"}
