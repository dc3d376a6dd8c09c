"""Progress lines (metasim.progress) and the command line's use of them.

The reporter is checked with an injected clock (no timing in tests); the command line is checked by
order of events: every subcommand prints its first progress line before its first heavy import
(xarray) begins, so the first line never waits for the numerical modules, and prints nothing
with --quiet.
"""

import io
import sys
import textwrap
import time
from pathlib import Path

import pytest
from test_cli import busy_factor, timed_run

from metasim.progress import Progress, activate, current, format_duration

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "data" / "demo"


class Clock:
    """A clock the test moves by hand."""

    def __init__(self):
        self.now = 100.0

    def __call__(self):
        return self.now


def test_lines_carry_the_elapsed_time_and_step_numbers():
    clock, out = Clock(), io.StringIO()
    progress = Progress(3, stream=out, clock=clock)
    clock.now += 1.25
    progress.say("reading inputs")
    clock.now += 2.0
    progress.step("mismatch of 'A'")
    progress("written")  # the library's callback form
    assert out.getvalue().splitlines() == ["metasim: reading inputs (1.2 s)",
                                           "metasim: [1/3] mismatch of 'A' (3.2 s)",
                                           "metasim: [2/3] written (3.2 s)"]
    progress.step("a")
    progress.step("b")  # more steps than announced: the total grows
    assert out.getvalue().splitlines()[-1] == "metasim: [4/4] b (3.2 s)"


def test_quiet_prints_nothing():
    out = io.StringIO()
    progress = Progress(2, stream=out, quiet=True, heartbeat=0.01)
    with progress:
        progress.say("x")
        progress.step("y")
        list(progress.loop(range(3), "items", every=0))
        time.sleep(0.05)
    assert out.getvalue() == ""


def test_loop_estimates_the_time_left_from_the_mean_time_per_item():
    clock, out = Clock(), io.StringIO()
    progress = Progress(stream=out, clock=clock)
    for _ in progress.loop(range(10), "chunks"):
        clock.now += 2.0  # every item takes 2 s
    lines = out.getvalue().splitlines()
    # after item 1: 9 left x 2 s = 18 s; lines at most every second (here: after every item)
    assert lines[0] == "metasim: chunks: 1/10, about 18 s left (2.0 s)"
    assert lines[4] == "metasim: chunks: 5/10, about 10 s left (10.0 s)"
    assert lines[-1] == "metasim: chunks: 10/10 done in 20 s (20.0 s)"
    assert len(lines) == 10  # nine estimates and the closing line


def test_loop_lines_are_spaced():
    clock, out = Clock(), io.StringIO()
    progress = Progress(stream=out, clock=clock)
    for _ in progress.loop(range(100), "rows", every=1.0):
        clock.now += 0.1
    lines = out.getvalue().splitlines()
    assert 8 <= len(lines) <= 11 and lines[-1].startswith("metasim: rows: 100/100 done in 10 s")


def test_durations_read_as_a_person_writes_them():
    assert format_duration(0.2) == "1 s"
    assert format_duration(42) == "42 s"
    assert format_duration(95) == "1 min 35 s"
    assert format_duration(1800) == "30 min"
    assert format_duration(4000) == "1 h 7 min"


def test_heartbeat_breaks_a_silence_and_stops_with_the_block():
    out = io.StringIO()
    progress = Progress(4, stream=out, heartbeat=0.05)
    with progress:
        progress.step("first")
        deadline = time.monotonic() + 10
        while "still working" not in out.getvalue() and time.monotonic() < deadline:
            time.sleep(0.02)
    text = out.getvalue()
    assert "metasim: still working on step 2 of 4" in text
    time.sleep(0.2)
    assert out.getvalue() == text  # nothing after the block ended


def test_heartbeat_names_the_activity_until_the_next_step():
    out = io.StringIO()
    progress = Progress(2, stream=out, heartbeat=0.05)
    with progress:
        progress.say("inputs checked", activity="loading the numerical modules")
        deadline = time.monotonic() + 10
        while "still loading" not in out.getvalue() and time.monotonic() < deadline:
            time.sleep(0.02)
        progress.step("observers drawn")  # a step ends the activity
        while "still working" not in out.getvalue() and time.monotonic() < deadline:
            time.sleep(0.02)
    lines = out.getvalue().splitlines()
    assert any(line.startswith("metasim: still loading the numerical modules (") for line in lines)
    after = lines[[i for i, line in enumerate(lines) if "observers drawn" in line][0] + 1:]
    assert after and all("still working on step 2 of 2" in line for line in after)


def test_current_is_the_active_reporter_or_a_silent_one():
    assert current().quiet
    progress = Progress(stream=io.StringIO(), heartbeat=None)
    with activate(progress):
        assert current() is progress
        inner = Progress(stream=io.StringIO(), heartbeat=None)
        with inner:
            assert current() is inner
        assert current() is progress
    assert current() is not progress and current().quiet


# -- the command line: the first line comes before the heavy imports ---------------------------------------

#: runs the command with an import hook: the first import of xarray prints a marker and ends the process
PROBE = textwrap.dedent("""
    import os, sys
    class Stop:
        def find_spec(self, name, path=None, target=None):
            if name == "xarray":
                sys.stderr.write("HEAVY IMPORT\\n"); sys.stderr.flush(); os._exit(0)
            return None
    sys.meta_path.insert(0, Stop())
    from metasim.cli import main
    sys.exit(main(sys.argv[1:]))
""")


def _commands(tmp: Path) -> dict:
    (tmp / "result.nc").write_bytes(b"\x89HDF\r\n\x1a\n" + bytes(64))  # opened only after the heavy import
    (tmp / "matches.csv").write_text("subject,test_wavelength_nm,r,g,b\ns1,500,0.1,0.2,0.3\n", encoding="utf-8")
    return {
        "demo": ["demo", "--out", tmp / "demo"],
        "observers": ["observers", "--out", tmp / "audience.nc", "--size", "5"],
        "evaluate": ["evaluate", DEMO / "projector_four_laser.toml", "--reference", DEMO / "grading_monitor.toml",
                     "--out", tmp / "study"],
        "compare": ["compare", DEMO / "projector_four_laser.toml", DEMO / "projector_laser_phosphor.toml",
                    "--out", tmp / "pair"],
        "report": ["report", tmp / "result.nc", "--out", tmp / "result.html"],
        "tables": ["tables", tmp / "result.nc", "--out", tmp / "tables"],
        "sweep": ["sweep", DEMO / "sweep_red_laser.toml", "--out", tmp / "store"],
        "search": ["search", DEMO / "search_red_green.toml", "--out", tmp / "search"],
        "estimate": ["estimate", tmp / "matches.csv", "--primaries", "645,526,444", "--out", tmp / "fit"],
    }


def _probe(args, quiet=False):
    argv = [sys.executable, "-c", PROBE, *map(str, args)] + (["--quiet"] if quiet else [])
    return timed_run(argv, cwd=ROOT, timeout=120)


@pytest.mark.parametrize("command", ["demo", "observers", "evaluate", "compare", "report", "tables", "sweep",
                                     "search", "estimate"])
def test_every_command_speaks_before_loading_the_numerical_modules(tmp_path, command):
    done = _probe(_commands(tmp_path)[command])
    lines = done.stderr.splitlines()
    assert "HEAVY IMPORT" in lines, done.stderr  # the command did reach its heavy work
    first = lines.index("HEAVY IMPORT")
    assert first >= 1 and lines[0].startswith(f"metasim: {command}: "), done.stderr
    # within 2 s of the start (a second or two of loading follows: the heartbeat covers it)
    assert done.line_times[0] < 2.0 * busy_factor(), done.line_times


def test_quiet_command_prints_no_progress(tmp_path):
    done = _probe(_commands(tmp_path)["evaluate"], quiet=True)
    assert done.stderr.splitlines() == ["HEAVY IMPORT"]
