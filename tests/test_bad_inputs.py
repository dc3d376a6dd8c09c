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
kind = "laser"
peak_nm = 465
linewidth_nm = 1.0

[[primary]]
label = "G"
kind = "laser"
peak_nm = 532
linewidth_nm = 1.0

[[primary]]
label = "R"
kind = "laser"
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
fwhm_nm = 1.0

[vary.peaks_nm]
R = [630, 640]
G = [532]
B = [465]
"""

SEARCH = """name = "Red line searched"
reference = "monitor.toml"
stimuli = "primaries"

[search]
kind = "laser"
generations = 1
population = 5

[search.primaries.R]
peak_nm = [630, 640]

[search.primaries.G]
peak_nm = 532

[search.primaries.B]
peak_nm = 465
"""


def manifest_text(edit) -> str:
    """A manifest of a two-design store in chunks of one, changed by ``edit(manifest)``."""
    chunks = [{"index": i, "start": i, "stop": i + 1, "file": f"chunk-{i:05d}.nc", "sha256": None} for i in range(2)]
    manifest = {"format": "metasim sweep store", "format_version": 2, "spec_hash": "0" * 64, "chunk_size": 1,
                "design_count": 2, "chunks": chunks, "spec": {}}
    edit(manifest)
    return json.dumps(manifest)


def _observer_variants(folder: Path) -> dict:
    """Bytes of a valid observer file (6 observers) and of one broken variant per defect."""
    import netCDF4
    import numpy as np

    from metasim.io import save_dataset
    from metasim.observers import observer_population

    population = observer_population(6, seed=3)
    variants = {"@observers": population}

    def changed(edit):
        copy = population.copy(deep=True)
        edit(copy)
        return copy

    variants["@observers-nan"] = changed(lambda p: p["cmf"].values.__setitem__((2, 1, 100), np.nan))
    variants["@observers-negated"] = changed(lambda p: p["cmf"].values.__setitem__((1, 1), -p["cmf"].values[1, 1]))
    variants["@observers-zero"] = changed(lambda p: p["cmf"].values.__setitem__((3, 2), 0.0))
    variants["@observers-x-dip"] = changed(lambda p: p["cmf"].values.__setitem__((4, 0, 210), -0.6))
    variants["@observers-negative-cone"] = changed(lambda p: p["lms"].values.__setitem__((0, 2, 50), -0.2))
    variants["@observers-no-coordinate"] = population.drop_vars("observer")
    variants["@observers-no-xyz"] = population.rename(xyz="tristimulus_component")
    variants["@observers-grid"] = population.isel(wavelength=slice(0, 300))
    variants["@observers-one-array"] = population["cmf"]
    variants["@observers-no-cmf"] = population[["lms"]]
    variants["@observers-age"] = population.assign_coords(
        age_years=("observer", [30.0, np.nan, 40.0, 50.0, 60.0, 70.0]))
    categories = population.assign_coords(weight=("observer", [0.5, 0.5, -0.25, 0.25, 0.0, 0.0]))
    variants["@observers-weight"] = categories
    out = {}
    for name, data in variants.items():
        path = folder / f"{name[1:]}.nc"
        save_dataset(data, path)
        out[name] = path.read_bytes()
    path = folder / "bad-json.nc"
    path.write_bytes(out["@observers"])
    with netCDF4.Dataset(path, "a") as handle:  # an attribute metasim reads as JSON, edited by hand
        handle.setncattr("metasim_json_attrs", '["parameters"]')
        handle.setncattr("parameters", "{n: 6, seed 3")
    out["@observers-bad-json"] = path.read_bytes()
    out["@truncated"] = out["@observers"][: len(out["@observers"]) // 3]
    unrelated = folder / "unrelated.nc"
    save_dataset(population[["lms"]].rename(lms="absorbance").isel(observer=0), unrelated)
    out["@unrelated"] = unrelated.read_bytes()
    return out


@pytest.fixture(scope="module")
def generated(tmp_path_factory) -> dict:
    return _observer_variants(tmp_path_factory.mktemp("generated"))


def spec(old: str = "", new: str = "", text: str = SPEC) -> str:
    """The three-laser spec with one change."""
    assert old in text
    return text.replace(old, new, 1)


BLUE = 'label = "B"\nkind = "laser"\npeak_nm = 465\nlinewidth_nm = 1.0'
MEASURED = "\n".join(f'[[primary]]\nlabel = "{c}"\nkind = "measured"\nfile = "m.csv"\n' for c in "RGB")
CSV_HEAD = "# channel spectra\nwavelength_nm,R,G,B\n"
CSV = CSV_HEAD + "".join(f"{w},{max(0, 1 - abs(w - 610) / 60):.3f},{max(0, 1 - abs(w - 540) / 60):.3f},"
                         f"{max(0, 1 - abs(w - 460) / 50):.3f}\n" for w in range(380, 785, 5))
STIMULI = "name,R,G,B\nred,1,0,0\ngrey,0.5,0.5,0.5\n"


def ev(*extra, files=None, spec_text=SPEC, code=1):
    """An evaluate command line on spec.toml (5 observers, 7 stimuli), its files and exit status."""
    return (["evaluate", "spec.toml", "--size", "5", "--stimuli", "primaries", "--reference", "spec.toml",
             "--no-calibration-ranking", "--out", "o", *extra], {"spec.toml": spec_text, **(files or {})}, code)


def sw(*extra, files=None, sweep_text=SWEEP, code=1):
    """A sweep command line on sweep.toml (4 observers), its files and exit status."""
    return (["sweep", "sweep.toml", "--size", "4", "--out", "store", *extra],
            {"sweep.toml": sweep_text, "monitor.toml": SPEC, **(files or {})}, code)


@dataclass
class Case:
    """One bad command line: files to make, the arguments, the fragments the error line must hold."""

    id: str
    argv: list
    expect: list
    files: dict = field(default_factory=dict)  # relative path -> str, bytes, "@generated" or "->link target"
    code: int = 1
    memory: float | None = None  # bytes the machine is to report available (memory estimates)


def case(id, command, expect, memory=None):
    argv, files, code = command
    return Case(id, argv, expect, files, code, memory)


CASES = [
    # -- outputs: never over an input, never over an existing file without --replace ------------------------
    Case("report over its own input", ["report", "audience.nc", "--out", "audience.nc"],
         ["audience.nc", "also an input"], {"audience.nc": "@observers"}),
    Case("report over its input through a link", ["report", "audience.nc", "--out", "link.nc"],
         ["link.nc", "also an input"], {"audience.nc": "@observers", "link.nc": "->audience.nc"}),
    Case("observers file and report one file", ["observers", "--out", "a.nc", "--report", "a.nc"],
         ["a.nc", "two outputs"]),
    Case("observers over a user's file", ["observers", "--out", "mine.nc", "--size", "5"],
         ["mine.nc", "exists already", "--replace"], {"mine.nc": "my own notes, not a netCDF file\n"}),
    Case("report over an existing page", ["report", "audience.nc", "--out", "page.html"],
         ["page.html", "exists already", "--replace"], {"audience.nc": "@observers", "page.html": "<p>mine</p>"}),
    Case("report over an existing figure", ["report", "audience.nc", "--out", "new.html", "--figures", "figs"],
         ["observers.png", "exists already"], {"audience.nc": "@observers", "figs/observers.png": b"\x89PNG mine"}),
    Case("evaluate over an existing result", ["evaluate", "spec.toml", "--out", "study", "--size", "5"],
         ["study.nc", "exists already", "--replace"], {"spec.toml": SPEC, "study/study.nc": b"mine"}),
    Case("evaluate over an existing figure", ["evaluate", "spec.toml", "--out", "study", "--size", "5"],
         ["spectra.png", "exists already"], {"spec.toml": SPEC, "study/figures/spectra.png": b"mine"}),
    Case("evaluate writing its result over its observers",
         ["evaluate", "spec.toml", "--observers", "study/study.nc", "--out", "study", "--replace"],
         ["study.nc", "also an input"], {"spec.toml": SPEC, "study/study.nc": "@observers"}),
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
         ["store/manifest.json", "chunk_size = '1' is not a whole number"],
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
         {"measured.toml": SPEC.replace('kind = "laser"\npeak_nm = 465\nlinewidth_nm = 1.0',
                                        'kind = "measured"\nfile = "gone.csv"')}),
    Case("compare: missing second spec", ["compare", "spec.toml", "other.toml"], ["other.toml", "no such file"],
         {"spec.toml": SPEC}),
    Case("report: missing result", ["report", "none.nc"], ["none.nc", "no such file"]),
    Case("sweep: missing spec", ["sweep", "none.toml", "--out", "store"], ["none.toml", "no such"]),
    Case("sweep: spec names a missing reference", ["sweep", "sweep.toml", "--out", "store"],
         ["monitor.toml", "no such file"], {"sweep.toml": SWEEP}),
    # -- display specs: text, syntax, keys, values -------------------------------------------------------
    case("spec: not TOML", ev(spec_text='name = "x\n'), ["spec.toml", "not valid TOML"]),
    case("spec: Latin-1 text", ev(spec_text=SPEC.replace("Three lasers", "Caf\xe9").encode("latin-1")),
         ["spec.toml:1", "0xe9", "not UTF-8"]),
    case("spec: UTF-16 text", ev(spec_text=SPEC.encode("utf-16")), ["spec.toml", "UTF-16", "UTF-8"]),
    case("spec: random bytes", ev(spec_text=bytes(range(128, 256)) * 4), ["spec.toml", "not UTF-8"]),
    case("spec: NUL bytes", ev(spec_text=SPEC.encode() + b"\x00\x00"), ["spec.toml", "NUL"]),
    case("spec: unknown key", ev(spec_text=spec("linewidth_nm = 1.0", "linewidth = 1.0")),
         ["spec.toml", "unknown key 'linewidth'", "allowed"]),
    case("spec: unknown primary type", ev(spec_text=spec('kind = "laser"', 'kind = "plasma"')),
         ["spec.toml", "kind 'plasma' is not known", "laser"]),
    case("spec: missing key", ev(spec_text=spec(BLUE, 'label = "B"\nkind = "gaussian"\npeak_nm = 465')),
         ["spec.toml", "primary 'B'", "missing key 'fwhm_nm'"]),
    case("spec: text for a number", ev(spec_text=spec("peak_nm = 465", 'peak_nm = "465"')),
         ["spec.toml", "peak_nm = '465' is not a number"]),
    case("spec: true for a number", ev(spec_text=spec("peak_nm = 465", "peak_nm = true")),
         ["spec.toml", "peak_nm = True is not a number"]),
    case("spec: NaN peak", ev(spec_text=spec("peak_nm = 465", "peak_nm = nan")), ["spec.toml", "peak_nm = nan", "finite"]),
    case("spec: negative line width", ev(spec_text=spec("linewidth_nm = 1.0", "linewidth_nm = -1.0")),
         ["spec.toml", "linewidth_nm = -1.0", "> 0"]),
    case("spec: two primaries", ev(spec_text=spec("[[primary]]\n" + BLUE + "\n", "")), ["spec.toml", "at least 3"]),
    case("spec: repeated labels", ev(spec_text=spec('label = "G"', 'label = "B"')), ["spec.toml", "repeat"]),
    case("spec: unknown white", ev(spec_text=spec('white = "D65"', 'white = "D99"')), ["spec.toml", "white 'D99'"]),
    case("spec: white with NaN", ev(spec_text=spec('white = "D65"', "white = [0.3127, nan]")),
         ["spec.toml", "white = nan", "finite"]),
    case("spec: white outside the diagram", ev(spec_text=spec('white = "D65"', "white = [0.8, 0.7]")),
         ["spec.toml", "(0.8, 0.7)", "x + y <= 1"]),
    case("spec: unknown transfer", ev(spec_text=spec('transfer = "gamma"', 'transfer = "log"')),
         ["spec.toml", "transfer 'log' is not known"]),
    case("spec: unknown calibration observer", ev(spec_text='calibration_observer = "cat"\n' + SPEC),
         ["spec.toml", "calibration_observer 'cat'"]),
    case("spec: luminance 1e12", ev(spec_text=spec("peak_luminance = 100", "peak_luminance = 1e12")),
         ["spec.toml", "peak_luminance=1000000000000.0", "at most 100000"]),
    case("spec: luminance 1e300", ev(spec_text=spec("peak_luminance = 100", "peak_luminance = 1e300")),
         ["spec.toml", "peak_luminance=1e+300", "at most 100000"]),
    case("spec: negative luminance", ev(spec_text=spec("peak_luminance = 100", "peak_luminance = -5")),
         ["spec.toml", "peak_luminance = -5", "> 0"]),
    case("spec: black above white", ev(spec_text=spec("peak_luminance = 100", "peak_luminance = 100\nblack_luminance = 200")),
         ["spec.toml", "black_luminance=200"]),
    case("spec: extra-primary base unknown", ev(spec_text='extra_primary_added_to = ["B", "G", "Q"]\n' + SPEC),
         ["spec.toml", "extra_primary_added_to", "Q"]),
    case("spec: white out of reach", ev(spec_text=SPEC.replace("peak_nm = 532", "peak_nm = 470").replace(
        "peak_nm = 639", "peak_nm = 480")), ["spec.toml", "white"]),
    case("spec: filter without backlight", ev(spec_text=spec(BLUE, 'label = "B"\nkind = "filter"\ncentre_nm = 460\n'
                                                                  'passband_nm = 40')), ["spec.toml", "[backlight]"]),
    # -- emitters with energy outside the 390-830 nm grid ----------------------------------------------------
    case("emitter: laser at 200 nm", ev(spec_text=spec("peak_nm = 465", "peak_nm = 200")),
         ["spec.toml", "B (peak 200 nm", "no emission", "390-830 nm"]),
    case("emitter: laser at 835 nm", ev(spec_text=spec("peak_nm = 639", "peak_nm = 835")),
         ["spec.toml", "R (peak 835 nm", "no emission"]),
    case("emitter: laser at 389 nm", ev(spec_text=spec("peak_nm = 465", "peak_nm = 389")),
         ["spec.toml", "B (peak 389 nm", "83.19 %", "at most 1 %", "--allow-outside-grid"]),
    case("emitter: Gaussian at 300 nm", ev(spec_text=spec(BLUE, 'label = "B"\nkind = "gaussian"\npeak_nm = 300\n'
                                                                 'fwhm_nm = 30')), ["spec.toml", "peak 300 nm", "no emission"]),
    case("emitter: Gaussian at 400 nm", ev(spec_text=spec(BLUE, 'label = "B"\nkind = "gaussian"\npeak_nm = 400\n'
                                                                'fwhm_nm = 20')), ["spec.toml", "11.95 %", "--allow-outside-grid"]),
    case("emitter: LED at 395 nm", ev(spec_text=spec(BLUE, 'label = "B"\nkind = "led"\npeak_nm = 395\n'
                                                           'half_spectral_width_nm = 15')), ["spec.toml", "23.71 %"]),
    case("emitter: quantum dot at 385 nm", ev(spec_text=spec(BLUE, 'label = "B"\nkind = "quantum_dot"\npeak_nm = 385\n'
                                                                   'fwhm_nm = 30')), ["spec.toml", "62.60 %"]),
    case("emitter: measured far outside", ev(spec_text=spec(BLUE, 'label = "B"\nkind = "measured"\nfile = "m.csv"'),
                                             files={"m.csv": "wavelength_nm,B\n200,1\n300,1\n"}),
         ["m.csv", "no emission"]),
    case("emitter: measured half outside", ev(spec_text=spec(BLUE, 'label = "B"\nkind = "measured"\nfile = "m.csv"'),
                                              files={"m.csv": "wavelength_nm,B\n350,1\n430,1\n"}),
         ["m.csv", "50.00 %", "--allow-outside-grid"]),
    # -- measured spectra (CSV) --------------------------------------------------------------------------
    case("csv: Latin-1", ev(spec_text=MEASURED, files={"m.csv": ("# r\xe9sum\xe9\n" + CSV).encode("latin-1")}),
         ["m.csv:1", "not UTF-8"]),
    case("csv: UTF-16", ev(spec_text=MEASURED, files={"m.csv": CSV.encode("utf-16")}), ["m.csv", "UTF-16"]),
    case("csv: NUL bytes", ev(spec_text=MEASURED, files={"m.csv": CSV.replace("380,", "380\x00,")}), ["m.csv", "NUL"]),
    case("csv: empty", ev(spec_text=MEASURED, files={"m.csv": ""}), ["m.csv", "empty"]),
    case("csv: header only", ev(spec_text=MEASURED, files={"m.csv": CSV_HEAD}), ["m.csv", "no data rows"]),
    case("csv: text in a cell", ev(spec_text=MEASURED, files={"m.csv": CSV.replace("385,", "385x,")}),
         ["m.csv:4", "'385x'", "not a number"]),
    case("csv: ragged row", ev(spec_text=MEASURED, files={"m.csv": CSV + "790,0.1\n"}), ["m.csv", "2 cells", "4 columns"]),
    case("csv: descending wavelengths", ev(spec_text=MEASURED, files={"m.csv": CSV + "500,0,0,0\n"}),
         ["m.csv", "strictly ascending"]),
    case("csv: repeated wavelength", ev(spec_text=MEASURED, files={"m.csv": CSV + "780,0,0,0\n"}),
         ["m.csv", "duplicate wavelength 780"]),
    case("csv: negative value", ev(spec_text=MEASURED, files={"m.csv": CSV + "790,-0.5,0,0\n"}),
         ["m.csv", "negative value -0.5", "column 'R'"]),
    case("csv: NaN value", ev(spec_text=MEASURED, files={"m.csv": CSV + "790,nan,0,0\n"}), ["m.csv", "finite"]),
    case("csv: no header", ev(spec_text=MEASURED, files={"m.csv": CSV.replace(CSV_HEAD, "")}), ["m.csv", "header"]),
    case("csv: column missing", ev(spec_text=MEASURED, files={"m.csv": CSV.replace("R,G,B", "R,G,Blue")}),
         ["spec.toml", "column 'B' is not in the file"]),
    # -- stimulus CSV files --------------------------------------------------------------------------------
    case("stimuli: bad header", ev("--stimuli", "s.csv", files={"s.csv": STIMULI.replace("R,G,B", "r,g")}),
         ["s.csv:1", "header"]),
    case("stimuli: signal above 1", ev("--stimuli", "s.csv", files={"s.csv": STIMULI + "hot,1.5,0,0\n"}),
         ["s.csv", "1.5", "0..1"]),
    case("stimuli: NaN signal", ev("--stimuli", "s.csv", files={"s.csv": STIMULI + "odd,nan,0,0\n"}), ["s.csv", "nan"]),
    case("stimuli: text in a cell", ev("--stimuli", "s.csv", files={"s.csv": STIMULI + "odd,x,0,0\n"}),
         ["s.csv:4", "'x'", "not a number"]),
    case("stimuli: Latin-1", ev("--stimuli", "s.csv", files={"s.csv": (STIMULI + "ros\xe9,1,0.5,0.5\n").encode("latin-1")}),
         ["s.csv:4", "not UTF-8"]),
    case("stimuli: header only", ev("--stimuli", "s.csv", files={"s.csv": "name,R,G,B\n"}), ["s.csv", "empty"]),
    case("stimuli: unknown set", ev("--stimuli", "rainbow"), ["'rainbow' is not known", "ramp"]),
    case("stimuli: count not a number", ev("--stimuli", "cube:x"), ["'cube:x'", "whole number"]),
    case("stimuli: cube of one", ev("--stimuli", "cube:1"), ["per_axis=1", ">= 2"]),
    case("stimuli: objects need reflectances", ev("--reference", "surfaces"), ["reflectance stimuli", "cie13.3"]),
    # -- observer files ------------------------------------------------------------------------------------
    case("observers: not netCDF", ev("--observers", "obs.nc", files={"obs.nc": "name,age\nann,30\n"}),
         ["obs.nc", "not a readable netCDF4 file"]),
    case("observers: truncated file", ev("--observers", "obs.nc", files={"obs.nc": "@truncated"}),
         ["obs.nc", "not a readable netCDF4 file"]),
    case("observers: NaN in one function", ev("--observers", "obs.nc", files={"obs.nc": "@observers-nan"}),
         ["obs.nc", "observer 2", "cmf Y at 490 nm is nan", "finite"]),
    case("observers: negated function", ev("--observers", "obs.nc", files={"obs.nc": "@observers-negated"}),
         ["obs.nc", "observer 1", "cmf Y", "negative"]),
    case("observers: all-zero function", ev("--observers", "obs.nc", files={"obs.nc": "@observers-zero"}),
         ["obs.nc", "observer 3", "cmf Z", "all zero"]),
    case("observers: deep negative x-bar", ev("--observers", "obs.nc", files={"obs.nc": "@observers-x-dip"}),
         ["obs.nc", "observer 4", "cmf X at 600 nm is -0.6", "-25 %"]),
    case("observers: negative cone fundamental", ev("--observers", "obs.nc", files={"obs.nc": "@observers-negative-cone"}),
         ["obs.nc", "observer 0", "lms S at 440 nm", "not below zero"]),
    case("observers: no observer coordinate", ev("--observers", "obs.nc", files={"obs.nc": "@observers-no-coordinate"}),
         ["obs.nc", "no 'observer' coordinate"]),
    case("observers: no xyz dim", ev("--observers", "obs.nc", files={"obs.nc": "@observers-no-xyz"}),
         ["obs.nc", "missing xyz"]),
    case("observers: another grid", ev("--observers", "obs.nc", files={"obs.nc": "@observers-grid"}),
         ["obs.nc", "390-689 nm", "390-830 nm"]),
    case("observers: one array", ev("--observers", "obs.nc", files={"obs.nc": "@observers-one-array"}),
         ["obs.nc", "single DataArray"]),
    case("observers: no cmf", ev("--observers", "obs.nc", files={"obs.nc": "@observers-no-cmf"}),
         ["obs.nc", "no 'cmf' variable"]),
    case("observers: attribute not JSON", ev("--observers", "obs.nc", files={"obs.nc": "@observers-bad-json"}),
         ["obs.nc", "attribute 'parameters'", "not valid JSON"]),
    case("observers: negative weight", ev("--observers", "obs.nc", files={"obs.nc": "@observers-weight"}),
         ["obs.nc", "observer 2", "weight = -0.25"]),
    case("observers: age NaN", ev("--observers", "obs.nc", files={"obs.nc": "@observers-age"}),
         ["obs.nc", "observer 1", "age_years = nan"]),
    case("sweep: observers with NaN", sw("--observers", "obs.nc", files={"obs.nc": "@observers-nan"}),
         ["obs.nc", "observer 2", "nan"]),
    # -- result files given to report ----------------------------------------------------------------------
    Case("report: not netCDF", ["report", "r.nc"], ["r.nc", "not a readable netCDF4 file"], {"r.nc": "a,b\n1,2\n"}),
    Case("report: no metasim result", ["report", "r.nc"], ["no metasim results"], {"r.nc": "@unrelated"}),
    Case("report: one array", ["report", "r.nc"], ["r.nc", "single array"], {"r.nc": "@observers-one-array"}),
    Case("report: attribute not JSON", ["report", "r.nc"], ["r.nc", "attribute 'parameters'", "not valid JSON"],
         {"r.nc": "@observers-bad-json"}),
    # -- command-line values -------------------------------------------------------------------------------
    case("args: size 0", ev("--size", "0", code=2), ["argument --size", "0 is not allowed", ">= 1"]),
    case("args: size negative", ev("--size", "-5", code=2), ["argument --size", ">= 1"]),
    case("args: size not a number", ev("--size", "many", code=2), ["argument --size", "'many'", "whole number"]),
    case("args: seed negative", ev("--seed", "-1", code=2), ["argument --seed", ">= 0"]),
    case("args: ages not numbers", ev("--ages", "young", code=2), ["argument --ages", "'young'"]),
    case("args: ages reversed", ev("--ages", "70-20", code=2), ["argument --ages", "LO 70 is above HI 20"]),
    case("args: ages NaN", ev("--ages", "nan", code=2), ["argument --ages", "finite"]),
    case("args: ages outside the model", ev("--ages", "5-90"), ["age_years=5", "20-80", "--extrapolate"]),
    case("args: field size outside the model", ev("--field-size", "20"), ["field_size_deg=20", "1-10", "--extrapolate"]),
    Case("args: categories 0", ["observers", "--out", "c.nc", "--categories", "0"], ["argument --categories", ">= 1"],
         code=2),
    Case("args: more categories than observers", ["observers", "--out", "c.nc", "--size", "5", "--categories", "9"],
         ["9", "5"]),
    case("args: age bands not numbers", ev("--age-bands", "young,old", code=2), ["argument --age-bands", "ascending"]),
    case("args: age bands descending", ev("--age-bands", "60,40,20", code=2), ["argument --age-bands", "ascending"]),
    case("args: age bands outside the observers", ev("--age-bands", "80,90,100"),
         ["age band 80-89", "outside the observers' ages", "years"]),
    case("args: unknown option", ev("--frobnicate", code=2), ["unrecognized arguments: --frobnicate"]),
    case("args: unknown source", ev("--stimulus-space", "adobe", code=2), ["argument --stimulus-space", "'adobe'"]),
    case("args: chunk size 0", sw("--chunk-size", "0", code=2), ["argument --chunk-size", ">= 1"]),
    case("args: workers 0", sw("--workers", "0", code=2), ["argument --workers", ">= 1"]),
    case("args: unknown scheduler", sw("--scheduler", "fast"), ["scheduler 'fast'", "serial"]),
    Case("args: observers file not .nc", ["observers", "--out", "x.txt"], ["x.txt", ".nc"]),
    Case("args: demo size 0", ["demo", "--size", "0"], ["argument --size"], code=2),
    # -- memory: refused with the estimate before anything is allocated ----------------------------------------
    Case("memory: a billion observers", ["observers", "--out", "big.nc", "--size", "1000000000"],
         ["1,000,000,000 observers", "TB of memory", "8.0 GB available", "at most about"], memory=8e9),
    case("memory: study too large", ev("--size", "200000", "--stimuli", "cube:12"),
         ["200,000 observers x 1,728 stimuli", "GB of memory", "8.0 GB available"], memory=8e9),
    # -- sweep specs ---------------------------------------------------------------------------------------
    case("sweep spec: no [vary]", sw(sweep_text=SWEEP.split("[vary]")[0]), ["sweep.toml", "[vary]"]),
    case("sweep spec: unknown kind", sw(sweep_text=SWEEP.replace('kind = "laser"', 'kind = "led"')),
         ["sweep.toml", "kind 'led' is not known"]),
    case("sweep spec: range with step 0", sw(sweep_text=SWEEP.replace("R = [630, 640]", "R = {start = 630, stop = 640, step = 0}")),
         ["sweep.toml", "step > 0"]),
    case("sweep spec: chunk size 0", sw(sweep_text="chunk_size = 0\n" + SWEEP), ["sweep.toml", "chunk_size = 0"]),
    case("sweep spec: unknown key", sw(sweep_text="colour = 1\n" + SWEEP), ["sweep.toml", "unknown key 'colour'"]),
    case("sweep spec: name not text", sw(sweep_text=SWEEP.replace('name = "Red line"', "name = 5")),
         ["sweep.toml", "name = 5", "string"]),
    case("sweep spec: peak at 835 nm", sw(sweep_text=SWEEP.replace("R = [630, 640]", "R = [630, 835]")),
         ["sweep.toml", "peak 835 nm", "no emission"]),
    case("sweep spec: Latin-1", sw(sweep_text=SWEEP.replace("Red line", "Rouge \xe9").encode("latin-1")),
         ["sweep.toml:1", "not UTF-8"]),
    case("sweep spec: objects with RGB stimuli", sw(sweep_text=SWEEP.replace('reference = "monitor.toml"', 'reference = "surfaces"')),
         ["reflectance stimuli"]),
    case("sweep spec: age bands outside", sw("--age-bands", "80,90"), ["age band 80-90", "outside the observers' ages"]),
    Case("search: missing spec", ["search", "none.toml", "--out", "store"], ["none.toml", "no such"]),
    Case("search: store is a file", ["search", "search.toml", "--out", "store.txt"], ["store.txt", "is a file"],
         {"search.toml": SEARCH, "monitor.toml": SPEC, "store.txt": "mine"}),
    Case("search: unknown key", ["search", "search.toml", "--out", "store"], ["search.toml", "unknown key 'vary'"],
         {"search.toml": SEARCH + "\n[vary]\nkind = 'laser'\n", "monitor.toml": SPEC}),
    Case("search: peak range off the grid", ["search", "search.toml", "--out", "store", "--size", "4"],
         ["search.toml", "peak_nm", "within"],
         {"search.toml": SEARCH.replace("[630, 640]", "[630, 940]"), "monitor.toml": SPEC}),
    Case("search: unknown objective", ["search", "search.toml", "--out", "store", "--size", "4"],
         ["objective 'beauty' is not known"],
         {"search.toml": SEARCH.replace("population = 5", "population = 5\nobjective = 'beauty'"),
          "monitor.toml": SPEC}),
]


def _make(folder: Path, files: dict, generated: dict) -> None:
    for name, content in files.items():
        path = folder / name
        path.parent.mkdir(parents=True, exist_ok=True)
        if isinstance(content, str) and content.startswith("->"):
            path.symlink_to(content[2:])
        elif isinstance(content, str) and content.startswith("@"):
            path.write_bytes(generated[content])
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
def test_bad_input_ends_in_one_line_and_loses_nothing(case, tmp_path, monkeypatch, capsys, generated):
    _make(tmp_path, case.files, generated)
    monkeypatch.chdir(tmp_path)
    if case.memory is not None:
        monkeypatch.setattr("metasim._memory.available_memory", lambda: case.memory)
    before = snapshot(tmp_path)
    code = run_main([*case.argv, "--quiet"])
    err = capsys.readouterr().err
    assert code == case.code, err
    assert_one_error_line(err, case.expect)
    assert snapshot(tmp_path) == before  # every file as it was, none added


def test_a_store_another_run_writes_is_refused_in_one_line(tmp_path, monkeypatch, capsys, generated):
    import socket

    from metasim.sweep.store import store_lock

    _make(tmp_path, {"sweep.toml": SWEEP, "monitor.toml": SPEC}, generated)
    monkeypatch.chdir(tmp_path)
    with store_lock(tmp_path / "store"):  # another writer, as far as the command can tell
        before = snapshot(tmp_path)
        code = run_main(["sweep", "sweep.toml", "--out", "store", "--size", "4", "--quiet"])
        assert snapshot(tmp_path) == before
    assert code == 1
    assert_one_error_line(capsys.readouterr().err, ["store", f"process {os.getpid()} on {socket.gethostname()}",
                                                    "--wait"])
