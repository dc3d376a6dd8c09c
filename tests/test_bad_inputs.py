"""Bad input, as a new user gives it: every case ends in one ``metasim: error:`` line and loses nothing.

Each case writes its files into a fresh temporary folder, runs the ``metasim`` command in-process
(``metasim.cli.main``) and checks: the exit status is non-zero (2 for usage errors, 1 otherwise);
stderr holds exactly one line, ``metasim: error: ...``, without a traceback; the line names the file
or key at fault (the expected fragments of each case); every file that existed before is
byte-identical afterwards and no file was added. The cases are small (a few observers, three laser
lines, a handful of stimuli), so the table stays quick.
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass, field
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "data" / "demo"

SPEC = """name = "Three lasers"
transfer = "gamma"
gamma = 2.2
peak_luminance = 100
white = "D65"

[[primary]]
label = "B"
type = "laser"
peak_nm = 465
linewidth_nm = 1.0

[[primary]]
label = "G"
type = "laser"
peak_nm = 532
linewidth_nm = 1.0

[[primary]]
label = "R"
type = "laser"
peak_nm = 639
linewidth_nm = 1.0
"""

SWEEP = """name = "Red line"
reference = "monitor.toml"
stimuli = "primaries"

[display]
transfer = "gamma"
gamma = 2.2
peak_luminance = 100

[vary]
kind = "laser"
width_nm = 1.0

[vary.peaks_nm]
R = [630, 640]
G = [532]
B = [465]
"""


def manifest_text(edit) -> str:
    """A manifest of a two-design store in chunks of one, changed by ``edit(manifest)``."""
    chunks = [{"index": i, "start": i, "stop": i + 1, "file": f"chunk-{i:05d}.nc", "sha256": None} for i in range(2)]
    manifest = {"format": "metasim sweep store", "format_version": 2, "spec_hash": "0" * 64, "chunk_size": 1,
                "design_count": 2, "chunks": chunks, "spec": {}}
    edit(manifest)
    return json.dumps(manifest)


@pytest.fixture(scope="module")
def observers_nc(tmp_path_factory) -> bytes:
    """The bytes of a valid observer file (6 observers)."""
    from metasim.io import save_dataset
    from metasim.observers import observer_population

    path = tmp_path_factory.mktemp("observers") / "audience.nc"
    save_dataset(observer_population(6, seed=3), path)
    return path.read_bytes()


@dataclass
class Case:
    """One bad command line: files to make, the arguments, the fragments the error line must hold."""

    id: str
    argv: list
    expect: list
    files: dict = field(default_factory=dict)  # relative path -> str, bytes, or "observers"
    code: int = 1


CASES = [
    # -- outputs: never over an input, never over an existing file without --replace ------------------------
    Case("report over its own input", ["report", "audience.nc", "--out", "audience.nc"],
         ["audience.nc", "also an input"], {"audience.nc": "observers"}),
    Case("report over its input through a link", ["report", "audience.nc", "--out", "link.nc"],
         ["link.nc", "also an input"], {"audience.nc": "observers", "link.nc": "->audience.nc"}),
    Case("observers file and report one file", ["observers", "--out", "a.nc", "--report", "a.nc"],
         ["a.nc", "two outputs"]),
    Case("observers over a user's file", ["observers", "--out", "mine.nc", "--size", "5"],
         ["mine.nc", "exists already", "--replace"], {"mine.nc": "my own notes, not a netCDF file\n"}),
    Case("report over an existing page", ["report", "audience.nc", "--out", "page.html"],
         ["page.html", "exists already", "--replace"], {"audience.nc": "observers", "page.html": "<p>mine</p>"}),
    Case("report over an existing figure", ["report", "audience.nc", "--out", "new.html", "--figures", "figs"],
         ["observers.png", "exists already"], {"audience.nc": "observers", "figs/observers.png": b"\x89PNG mine"}),
    Case("evaluate over an existing result", ["evaluate", "spec.toml", "--out", "study", "--size", "5"],
         ["study.nc", "exists already", "--replace"], {"spec.toml": SPEC, "study/study.nc": b"mine"}),
    Case("evaluate over an existing figure", ["evaluate", "spec.toml", "--out", "study", "--size", "5"],
         ["spectra.png", "exists already"], {"spec.toml": SPEC, "study/figures/spectra.png": b"mine"}),
    Case("evaluate writing its result over its observers",
         ["evaluate", "spec.toml", "--observers", "study/study.nc", "--out", "study", "--replace"],
         ["study.nc", "also an input"], {"spec.toml": SPEC, "study/study.nc": "observers"}),
    Case("evaluate --out is a file", ["evaluate", "spec.toml", "--out", "spec.toml"],
         ["spec.toml", "is a file", "folder"], {"spec.toml": SPEC}),
    Case("compare over an existing report", ["compare", "spec.toml", "spec.toml", "--out", "cmp", "--size", "5"],
         ["report.html", "exists already"], {"spec.toml": SPEC, "cmp/report.html": "<p>mine</p>"}),
    Case("demo over an existing report", ["demo", "--out", "demo", "--size", "5"],
         ["report.html", "exists already"], {"demo/report.html": "<p>mine</p>"}),
    Case("sweep store is a file", ["sweep", "sweep.toml", "--out", "store.txt"],
         ["store.txt", "is a file"], {"sweep.toml": SWEEP, "monitor.toml": SPEC, "store.txt": "mine"}),
    Case("sweep over an unknown sweep.nc", ["sweep", "sweep.toml", "--out", "store", "--size", "4"],
         ["sweep.nc", "--replace"], {"sweep.toml": SWEEP, "monitor.toml": SPEC, "store/sweep.nc": b"mine"}),
    # -- sweep stores: edited manifests --------------------------------------------------------------------
    Case("sweep: manifest is not JSON", ["sweep", "sweep.toml", "--out", "store", "--size", "4"],
         ["store/manifest.json", "not a readable sweep manifest", "--replace"],
         {"sweep.toml": SWEEP, "monitor.toml": SPEC, "store/manifest.json": '{"format": "metasim sweep'}),
    Case("sweep: manifest lists too few chunks", ["sweep", "sweep.toml", "--out", "store", "--size", "4"],
         ["store/manifest.json", "0 chunks listed", "edited or damaged"],
         {"sweep.toml": SWEEP, "monitor.toml": SPEC, "store/manifest.json": manifest_text(lambda m: m.update(chunks=[]))}),
    Case("sweep: manifest chunk size is text", ["sweep", "sweep.toml", "--out", "store", "--size", "4"],
         ["store/manifest.json", "chunk_size = '1'"],
         {"sweep.toml": SWEEP, "monitor.toml": SPEC, "store/manifest.json": manifest_text(lambda m: m.update(chunk_size="1"))}),
    Case("sweep: manifest chunk entry edited", ["sweep", "sweep.toml", "--out", "store", "--size", "4"],
         ["store/manifest.json", "chunk entry 1", "designs 1-1"],
         {"sweep.toml": SWEEP, "monitor.toml": SPEC, "store/manifest.json": manifest_text(lambda m: m["chunks"][1].update(start=0))}),
    # -- inputs: missing, folders, named inside specs ---------------------------------------------------
    Case("evaluate: missing spec", ["evaluate", "missing.toml"], ["missing.toml", "no such file"]),
    Case("evaluate: spec is a folder", ["evaluate", "specs"], ["specs", "folder"], {"specs/x.txt": "x"}),
    Case("evaluate: missing reference", ["evaluate", "spec.toml", "--reference", "none.toml"],
         ["none.toml", "no such file"], {"spec.toml": SPEC}),
    Case("evaluate: missing observers file", ["evaluate", "spec.toml", "--observers", "none.nc"],
         ["none.nc", "no such file"], {"spec.toml": SPEC}),
    Case("evaluate: missing stimulus CSV", ["evaluate", "spec.toml", "--stimuli", "ramp,none.csv"],
         ["none.csv", "no such file"], {"spec.toml": SPEC}),
    Case("evaluate: spec names a missing measured file", ["evaluate", "measured.toml"],
         ["measured.toml", "gone.csv", "no such file"],
         {"measured.toml": SPEC.replace('type = "laser"\npeak_nm = 465\nlinewidth_nm = 1.0',
                                        'type = "measured"\nfile = "gone.csv"')}),
    Case("compare: missing second spec", ["compare", "spec.toml", "other.toml"], ["other.toml", "no such file"],
         {"spec.toml": SPEC}),
    Case("report: missing result", ["report", "none.nc"], ["none.nc", "no such file"]),
    Case("sweep: missing spec", ["sweep", "none.toml", "--out", "store"], ["none.toml", "no such"]),
    Case("sweep: spec names a missing reference", ["sweep", "sweep.toml", "--out", "store"],
         ["monitor.toml", "no such file"], {"sweep.toml": SWEEP}),
]


def _make(folder: Path, files: dict, observers: bytes) -> None:
    for name, content in files.items():
        path = folder / name
        path.parent.mkdir(parents=True, exist_ok=True)
        if isinstance(content, str) and content.startswith("->"):
            path.symlink_to(content[2:])
        elif content == "observers":
            path.write_bytes(observers)
        else:
            path.write_bytes(content.encode() if isinstance(content, str) else content)


def snapshot(folder: Path) -> dict:
    """Every file below ``folder`` (links as their target text) and its bytes."""
    return {str(p.relative_to(folder)): (os.readlink(p) if p.is_symlink() else p.read_bytes())
            for p in sorted(folder.rglob("*")) if p.is_file() or p.is_symlink()}


def run_main(argv) -> int:
    """``metasim.cli.main`` as the console script runs it: the exit status, also for usage errors."""
    from metasim.cli import main

    try:
        return main([str(a) for a in argv])
    except SystemExit as exc:
        return exc.code


def assert_one_error_line(err: str, expect) -> str:
    assert "Traceback" not in err, err
    lines = err.splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith("metasim: error: "), err
    for fragment in expect:
        assert fragment in lines[0], f"{fragment!r} not in {lines[0]!r}"
    return lines[0]


@pytest.mark.parametrize("case", CASES, ids=[c.id for c in CASES])
def test_bad_input_ends_in_one_line_and_loses_nothing(case, tmp_path, monkeypatch, capsys, observers_nc):
    _make(tmp_path, case.files, observers_nc)
    monkeypatch.chdir(tmp_path)
    before = snapshot(tmp_path)
    code = run_main([*case.argv, "--quiet"])
    err = capsys.readouterr().err
    assert code == case.code, err
    assert_one_error_line(err, case.expect)
    assert snapshot(tmp_path) == before  # every file as it was, none added


def test_a_store_another_run_writes_is_refused_in_one_line(tmp_path, monkeypatch, capsys, observers_nc):
    import socket

    from metasim.sweep.store import store_lock

    _make(tmp_path, {"sweep.toml": SWEEP, "monitor.toml": SPEC}, observers_nc)
    monkeypatch.chdir(tmp_path)
    with store_lock(tmp_path / "store"):  # another writer, as far as the command can tell
        before = snapshot(tmp_path)
        code = run_main(["sweep", "sweep.toml", "--out", "store", "--size", "4", "--quiet"])
        assert snapshot(tmp_path) == before
    assert code == 1
    assert_one_error_line(capsys.readouterr().err, ["store", f"process {os.getpid()} on {socket.gethostname()}",
                                                    "--wait"])
