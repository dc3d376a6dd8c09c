"""The metasim command, run as a user runs it, on small cases.

A population run and the bad-input checks (exit status, one error line, no traceback) start a new
interpreter as a user does (``run(..., process=True)``); the other subcommands run
through :func:`metasim.cli.main` in this process: the console script's code path and output
streams, without paying for a new interpreter's imports each time. Populations are kept small
(120-150 observers); the demo's headline numbers are checked with ranges only a working pipeline
reaches, not copies of its output.
"""

import contextlib
import io
import os
import subprocess
import sys
import threading
import time
import warnings
from pathlib import Path

import numpy as np
import pytest

import metasim

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "data" / "demo"
FOUR_LASER = DEMO / "projector_four_laser.toml"
LASER_PHOSPHOR = DEMO / "projector_laser_phosphor.toml"
MONITOR = DEMO / "grading_monitor.toml"


def run(*args, cwd=None, check=True, process=False) -> subprocess.CompletedProcess:
    """The metasim command: in this process (``metasim.cli.main``, stdout and stderr captured, warnings
    ignored as ``PYTHONWARNINGS=ignore`` does), or with ``process`` in a new interpreter. ``check``:
    fail on a non-zero exit status."""
    if process:
        done = timed_run([sys.executable, "-m", "metasim.cli", *map(str, args)], cwd=cwd)
    else:
        done = _in_process([str(a) for a in args], cwd)
    if check and done.returncode != 0:
        raise AssertionError(f"metasim {' '.join(map(str, args))} failed ({done.returncode}):\n{done.stderr}")
    return done


def timed_run(argv, cwd=None, timeout: float = 300) -> subprocess.CompletedProcess:
    """Run ``argv`` in a new process; the result also holds ``line_times``: the seconds from the start
    at which each stderr line arrived, and ``seconds``: when the process ended."""
    env = {**os.environ, "PYTHONWARNINGS": "ignore"}
    start = time.monotonic()
    with subprocess.Popen(argv, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=cwd, env=env) as child:
        out = []
        reader = threading.Thread(target=lambda: out.append(child.stdout.read()), daemon=True)
        reader.start()
        err, times = [], []
        for line in child.stderr:
            times.append(time.monotonic() - start)
            err.append(line)
        code = child.wait(timeout=timeout)
        reader.join(timeout)
    done = subprocess.CompletedProcess(argv, code, "".join(out), "".join(err))
    done.line_times, done.seconds = times, time.monotonic() - start
    return done


def busy_factor() -> float:
    """How many times longer than on an idle machine a wait may take now: the runnable processes per
    core (1-minute load average), at least 1 (common practice, no source). Bounds on how soon a line
    appears are multiplied by it, so other work on the machine (or the suite's own test workers)
    does not fail them, while an idle machine checks the bound itself."""
    return max(1.0, os.getloadavg()[0] / (os.cpu_count() or 1))


def _in_process(argv, cwd) -> subprocess.CompletedProcess:
    from metasim.cli import main

    out, err = io.StringIO(), io.StringIO()
    with warnings.catch_warnings(), contextlib.redirect_stdout(out), contextlib.redirect_stderr(err), \
            contextlib.chdir(cwd or os.getcwd()):
        warnings.simplefilter("ignore")
        try:
            code = main(argv)
        except SystemExit as exc:  # argparse: usage errors and --help
            code = exc.code if isinstance(exc.code, int) else 1
    return subprocess.CompletedProcess(["metasim", *argv], code, out.getvalue(), err.getvalue())


def assert_one_line_error(done):
    assert done.returncode != 0
    assert "Traceback" not in done.stderr
    lines = [line for line in done.stderr.splitlines() if line.strip()]
    errors = [line for line in lines if line.startswith("metasim: error:")]
    assert len(errors) == 1, done.stderr
    assert all(line.startswith("metasim: ") for line in lines), done.stderr


@pytest.fixture(scope="module")
def workdir(tmp_path_factory):
    return tmp_path_factory.mktemp("cli")


@pytest.fixture(scope="module")
def population_run(workdir):
    path = workdir / "audience.nc"
    return path, run("observers", "--out", path, "--size", 120, "--seed", 3, "--ages", "20-70", process=True)


@pytest.fixture(scope="module")
def population_file(population_run):
    return population_run[0]


def test_a_command_is_never_silent_for_long(population_run):
    # the first line before the numerical modules load, then a line at least every 2 s (the heartbeat,
    # metasim.progress.HEARTBEAT_S) until the end; the bounds leave room for a busy machine
    done = population_run[1]
    times = done.line_times
    slack = busy_factor()
    assert times and times[0] < 2.0 * slack, done.stderr
    gaps = [b - a for a, b in zip(times, times[1:] + [done.seconds])]
    assert max(gaps) < 6.0 * slack, (gaps, slack, done.stderr)  # 2 s heartbeat, room for a busy machine
    assert done.stderr.splitlines()[0].startswith("metasim: observers: inputs checked; loading the numerical modules (")


def test_observers_writes_a_population(population_file):
    population = metasim.load_dataset(population_file)
    assert population.sizes["observer"] == 120
    ages = population["age_years"].values
    assert ages.min() >= 20 and ages.max() <= 70
    assert population.attrs["seed"] == 3


def test_observers_categories_with_report(workdir):
    out, html = workdir / "groups.nc", workdir / "groups.html"
    run("observers", "--out", out, "--size", 60, "--seed", 1, "--categories", 4, "--report", html, "--quiet")
    groups = metasim.load_dataset(out)
    assert groups.sizes["observer"] == 4
    assert np.isclose(groups["weight"].values.sum(), 1.0)  # shares of the population (definition)
    assert "data:image/png;base64," in html.read_text()


@pytest.fixture(scope="module")
def evaluated(workdir, population_file):
    out = workdir / "evaluate"
    done = run("evaluate", FOUR_LASER, "--reference", MONITOR, "--observers", population_file,
               "--stimuli", "primaries,ramp:3", "--no-calibration-ranking", "--no-report", "--out", out)
    return out, done


def test_evaluate_against_a_reference_display(evaluated):
    out, done = evaluated
    assert "metasim: [" in done.stderr  # progress lines
    result = metasim.load_dataset(out / "study.nc")
    assert list(result["display_role"].values) == ["reference", "design"]
    assert result.sizes["design"] == 1 and result.sizes["observer"] == 120
    assert {"delta_e_2000", "gamut_coverage", "lab_volume", "area_gain_share"} <= set(result.data_vars)
    assert not (out / "report.html").exists()
    # the answer with its interval and the population-size advice (intervals on by default)
    assert "95th percentile of" in done.stdout and "needs about" in done.stdout
    lower, upper = result["delta_e_2000_overall_interval"].sel(statistic="p95").values.ravel()
    assert lower < float(result["delta_e_2000_overall"].sel(statistic="p95", design=result["design"][0])) < upper
    assert result.attrs["interval_resamples"] >= 200 and result.attrs["interval_level"] == 0.95


def test_report_of_a_study_file(workdir, evaluated):
    out, _ = evaluated
    html, figures = workdir / "evaluate.html", workdir / "evaluate-figures"
    run("report", out / "study.nc", "--out", html, "--figures", figures, "--quiet")
    text = html.read_text()
    assert text.count("data:image/png;base64,") >= 5
    assert "CIE 170-1" in text and "CIE 1931 2°" in text  # the models used are stated
    assert {p.name for p in figures.glob("*.png")} >= {
        "chromaticity.png", "spectra.png", "age_bands.png", "p95_by_stimulus.png", "extra_primary.png"}


def test_evaluate_against_real_objects(workdir, population_file):
    out = workdir / "objects"
    run("evaluate", LASER_PHOSPHOR, "--observers", population_file, "--no-calibration-ranking", "--no-report", "--out", out,
        "--quiet")
    result = metasim.load_dataset(out / "study.nc")
    assert result.attrs["reference_kind"] == "surfaces"
    assert result.sizes["stimulus"] == 14  # the CIE 13.3 test colour samples (CIE 13.3-1995)
    assert not (out / "report.html").exists()


def test_compare_second_against_first(workdir, population_file):
    out = workdir / "compare"
    run("compare", MONITOR, FOUR_LASER, "--observers", population_file, "--stimuli", "primaries",
        "--no-calibration-ranking", "--no-report", "--out", out, "--quiet")
    result = metasim.load_dataset(out / "study.nc")
    assert result.sizes["display"] == 2 and result.sizes["design"] == 1
    assert str(result["design"].values[0]) == "Four-laser projector (candidate A)"
    assert result.attrs["reference"] == "Grading monitor (reference)"


def test_compare_two_designs_states_who_sees_which_closer(workdir, population_file):
    out = workdir / "compare-two"
    done = run("compare", FOUR_LASER, LASER_PHOSPHOR, "--reference", MONITOR, "--observers", population_file,
               "--stimuli", "primaries", "--no-calibration-ranking", "--no-report", "--out", out, "--quiet", "--resamples", 200)
    result = metasim.load_dataset(out / "study.nc")
    share = float(result["comparison_share_second_closer"])
    assert 0.0 <= share <= 1.0 and "of viewers" in done.stdout.splitlines()[0]
    assert result.attrs["interval_resamples"] == 200
    bad = run("compare", FOUR_LASER, LASER_PHOSPHOR, "--reference", MONITOR, "--observers", population_file,
              "--stimuli", "primaries", "--out", workdir / "bad-resamples", "--resamples", 50, check=False)
    assert_one_line_error(bad)
    assert "--resamples" in bad.stderr and ">= 200" in bad.stderr


def test_demo_headline_numbers(workdir):
    out = workdir / "demo"
    done = run("demo", "--out", out, "--size", 150, "--seed", 11)
    assert "95th percentile" in done.stdout
    result = metasim.load_dataset(out / "study.nc")
    p95 = result["delta_e_2000_overall"].sel(statistic="p95")
    laser, hybrid = (float(p95.sel(design=d)) for d in result["design"].values)
    # narrow lines against a broadband reference mismatch more than broadband primaries:
    # fact of the trade, common practice, no source
    assert laser > 1.5 * hybrid
    assert 3.0 < laser < 30.0 and 1.0 < hybrid < 15.0  # population spread is visible, not absurd (common practice, no source)
    share = result["share_of_pairs_above_threshold"].sel(threshold=2.0)
    assert share.sel(design=result["design"].values[0]) > share.sel(design=result["design"].values[1])
    area = result["gamut_area_xy"]
    assert float(area.isel(display=1)) > float(area.isel(display=0))  # four lasers span more than the monitor (geometry)
    assert float(result["gamut_coverage"].isel(display=1).sel(reference_gamut="bt709")) > 0.999
    assert 0.0 < float(result["gamut_coverage"].isel(display=0).sel(reference_gamut="bt2020")) < 1.0
    gain = result["area_gain_share"].isel(design=0)
    best = float(gain["peak_wavelength"][int(gain.argmax("peak_wavelength"))])
    assert 480.0 <= best <= 525.0  # the cyan gap between blue and green lines of an RGB laser set (geometry)
    assert np.isfinite(result["delta_e_2000_by_age"].values).all()
    text = (out / "report.html").read_text()
    assert text.count("data:image/png;base64,") >= 5
    assert "IEC 60825-1" in text and "IEC 62471" in text
    assert "Kestrel Lane Post" in text


def test_help_shows_worked_examples():
    for command in ("demo", "observers", "evaluate", "compare", "report"):
        done = run(command, "--help")
        assert "example" in done.stdout and f"metasim {command}" in done.stdout


def test_bad_inputs_give_one_line_errors(workdir):
    bad_spec = workdir / "bad.toml"
    bad_spec.write_text('name = "x"\n[[primary]]\nlabel = "A"\nkind = "plasma"\n')
    cases = [
        ("evaluate", workdir / "missing.toml"),  # missing file
        ("evaluate", bad_spec),                 # bad spec: unknown primary type
        ("demo", "--frobnicate"),               # unknown option
    ]
    for case in cases:
        assert_one_line_error(run(*case, check=False, process=True))
    assert run("demo", "--frobnicate", check=False, process=True).returncode == 2


@pytest.mark.parametrize("args", [
    ("report", str(DEMO / "stimuli.csv")),             # not a result file
    ("observers", "--out", "x.nc", "--ages", "5-90"),  # outside the model's ages
    ("observers", "--out", "x.txt"),                   # wrong output kind
    ("evaluate", str(FOUR_LASER), "--stimuli", "rainbow"),  # unknown stimulus set
])
def test_bad_inputs_in_process(args, capsys, tmp_path, monkeypatch):
    from metasim.cli import main

    monkeypatch.chdir(tmp_path)
    code = main([*args, "--quiet"])
    err = capsys.readouterr().err
    assert code == 1
    assert err.count("\n") == 1 and err.startswith("metasim: error:")


def test_spec_errors_name_the_problem(tmp_path):
    from metasim.cli.specs import SpecError, load_display

    cases = {
        'name = "x"\n': "at least 3",
        'transfer = "log"\n': "transfer 'log' is not known",
        '[[primary]]\nlabel = "A"\nkind = "laser"\npeak = 500\n': "unknown key 'peak'",
        '[[primary]]\nlabel = "A"\nkind = "gaussian"\npeak_nm = 500\n': "missing key 'fwhm_nm'",
        '[[primary]]\nlabel = "A"\nkind = "filter"\ncentre_nm = 500\npassband_nm = 40\n': "[backlight]",
        '[[primary]]\nlabel = "A"\nkind = "measured"\nfile = "none.csv"\n': "none.csv",
    }
    for text, expected in cases.items():
        path = tmp_path / "spec.toml"
        path.write_text(text)
        with pytest.raises(SpecError, match=None) as info:
            load_display(path)
        assert expected in str(info.value), str(info.value)
        assert "\n" not in str(info.value)
