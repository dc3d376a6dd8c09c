"""The design search: finds a known optimum, respects constraints, is reproducible and resumes after a kill.

Kept tiny (3 observers, 4 stimuli, 2 searched parameters, 8 designs per generation).
"""

import json
import os
import re
import signal
import subprocess
import sys
import textwrap
import time

import numpy as np
import pytest
from figure_checks import assert_axes_labelled
from test_report_reading import check_page

import metasim
from metasim import emitters
from metasim.errors import MetasimWarning, SweepError
from metasim.metamerism import primaries_and_secondaries
from metasim.report import render_report, report_figures
from metasim.sweep import best_design, pareto_front, run_search, search_space
from metasim.sweep.search import PENALTY

OPTIMUM = {"R": 640.0, "G": 532.0}


def inputs():
    reference = metasim.calibrate_white(metasim.make_display(
        emitters.laser_line([465, 532, 640], 1.0, name=["B", "G", "R"]), name="laser reference"), "cie1931_2")
    viewers = metasim.observer_population(3, seed=2, age_years=(20, 70))
    return reference, viewers, primaries_and_secondaries().isel(stimulus=slice(0, 4))


def space():
    return search_space("laser", {"B": {"peak_nm": 465}, "G": {"peak_nm": [515, 550]}, "R": {"peak_nm": [615, 665]}})


@pytest.fixture(scope="module")
def found(tmp_path_factory):
    store = tmp_path_factory.mktemp("search") / "store"
    return store, run_search(space(), *inputs(), store=store, generations=10, population=10, seed=3,
                             tolerance=0.0, scheduler="serial")


def test_finds_the_known_optimum(found):
    # a laser design equal to the reference shows every colour identically to every observer: the
    # optimum of the 95th percentile mismatch is the reference's own peaks, with zero mismatch
    # (common practice, no source: identical spectra are identical stimuli for any observer)
    result = found[1]
    best = best_design(result)
    assert best["R_peak_nm"] == pytest.approx(OPTIMUM["R"], abs=2.0)
    assert best["G_peak_nm"] == pytest.approx(OPTIMUM["G"], abs=2.0)
    assert best["value"] < 0.3
    assert result.attrs["evaluation_count"] == result.sizes["design"] == 10 * 11
    assert set(np.unique(result["generation"].values)) == set(range(11))
    # every searched value within its bounds
    assert result["R_peak_nm"].min() >= 615 and result["R_peak_nm"].max() <= 665
    assert result["G_peak_nm"].min() >= 515 and result["G_peak_nm"].max() <= 550


def test_constraints_are_respected(tmp_path):
    # the reference's coverage of BT.2020 is below 0.85; ask for more than it has
    result = run_search(space(), *inputs(), store=tmp_path / "c", generations=6, population=10, seed=4,
                        constraints={"bt2020_coverage": {"min": 0.85}, "white_efficacy": {"max": 400}},
                        scheduler="serial")
    best = best_design(result)
    assert best["feasible"]
    index = best["design"]
    assert result["gamut_coverage"].sel(reference_gamut="bt2020").values[index] >= 0.85
    assert result["white_efficacy"].values[index] <= 400
    infeasible = result["constraint_violation"].values > 0
    assert (result["search_objective"].values[infeasible] > PENALTY).all()
    assert (result["search_objective"].values[~infeasible] < PENALTY).all()
    # the report's headline and best-designs table rank only designs that meet the constraints first
    page = render_report(result)
    assert "constraints: share of the BT.2020 xy area covered ≥ 0.85" in page  # the reader's words, not keys
    assert f"(of the designs that meet every constraint): design {result['design'].values[index] + 1} " in page
    table = page.split("<h2>Best designs</h2>", 1)[1].split("</table>", 1)[0]
    meets = re.findall(r"<td>(yes|no)</td></tr>", table)
    assert len(meets) == min(10, result.sizes["design"]) and meets == sorted(meets, reverse=True)


def test_same_seed_same_result(found, tmp_path):
    again = run_search(space(), *inputs(), store=tmp_path / "again", generations=10, population=10, seed=3,
                       tolerance=0.0, scheduler="threads", workers=2, chunk_size=5)
    first = found[1]
    for name in ("R_peak_nm", "G_peak_nm", "search_objective"):
        np.testing.assert_array_equal(again[name].values, first[name].values)
    other = run_search(space(), *inputs(), store=tmp_path / "other", generations=1, population=10, seed=9,
                       scheduler="serial")
    assert not np.array_equal(other["R_peak_nm"].values, first["R_peak_nm"].values[:20])


def test_result_opens_in_report_and_pareto(found):
    result = found[1]
    ranks = pareto_front(result.drop_vars("pareto_rank"))["pareto_rank"]
    np.testing.assert_array_equal(ranks.values, result["pareto_rank"].values)
    page = render_report(result)
    assert "<h2>Pareto front</h2>" in page and "<h2>Search</h2>" in page
    check_page(page)
    for fig, _ in report_figures(result).values():
        assert_axes_labelled(fig)


def test_resume_replays_from_store(found):
    store, first = found
    events = []
    again = run_search(space(), *inputs(), store=store, generations=10, population=10, seed=3, tolerance=0.0,
                       scheduler="serial", progress=events.append)
    assert all(e["stored"] for e in events) and len(events) == 11
    np.testing.assert_array_equal(again["search_objective"].values, first["search_objective"].values)


def test_other_spec_refused(found):
    with pytest.raises(SweepError, match="different spec"):
        run_search(space(), *inputs(), store=found[0], generations=10, population=10, seed=4, scheduler="serial")


@pytest.mark.parametrize("bad, match", [
    ({"primaries": {"R": {"peak_nm": [600, 900]}}}, "within"),
    ({"primaries": {"R": {"peak_nm": 600}, "G": {"peak_nm": 530}, "B": {"peak_nm": 460}}}, "nothing to search"),
    ({"primaries": {"R": {"peak_nm": [600, 650]}}}, "allowed: 3 to 6"),
    ({"primaries": {"R": {"peak_nm": [600, 650], "hue": 3}}}, "unknown parameter 'hue'"),
])
def test_bad_spaces(bad, match):
    with pytest.raises(SweepError, match=match):
        search_space("laser", **bad)


def test_killed_search_resumes_to_the_same_result(found, tmp_path):
    store = tmp_path / "killed"
    script = textwrap.dedent(f"""
        import sys
        sys.path.insert(0, {os.path.dirname(__file__)!r})
        from test_search import inputs, space
        from metasim.sweep import run_search
        run_search(space(), *inputs(), store={str(store)!r}, generations=10, population=10, seed=3, tolerance=0.0,
                   scheduler="serial", chunk_size=5)
    """)
    child = subprocess.Popen([sys.executable, "-c", script])
    target = store / "generation-00003" / "chunk-00000.nc"
    deadline = time.monotonic() + 600
    while not target.exists() and child.poll() is None and time.monotonic() < deadline:
        time.sleep(0.02)
    child.send_signal(signal.SIGKILL)
    child.wait()
    assert child.returncode == -signal.SIGKILL  # killed mid-run, not finished
    assert not (store / "search.nc").exists()
    with pytest.warns(MetasimWarning, match="taking over the lock"):  # the killed run's lock
        resumed = run_search(space(), *inputs(), store=store, generations=10, population=10, seed=3, tolerance=0.0,
                             scheduler="serial", chunk_size=5)
    for name in ("R_peak_nm", "G_peak_nm", "search_objective"):
        np.testing.assert_array_equal(resumed[name].values, found[1][name].values)
    assert json.loads((store / "search.json").read_text())["seed"] == 3


def test_search_command_writes_a_store_and_resumes(tmp_path):
    from metasim.cli import main

    spec = tmp_path / "search.toml"
    spec.write_text(
        'name = "Red line searched"\nstimuli = "primaries"\nreference = "surfaces"\n'
        '[display]\ntransfer = "gamma"\n'
        '[search]\nkind = "laser"\ngenerations = 1\npopulation = 5\nseed = 2\n'
        '[search.primaries.R]\npeak_nm = [620, 650]\n[search.primaries.G]\npeak_nm = 532\n'
        '[search.primaries.B]\npeak_nm = 465\n', encoding="utf-8")
    args = ["search", str(spec), "--out", str(tmp_path / "store"), "--size", "3", "--stimuli", "cie13.3",
            "--scheduler", "serial", "--quiet"]
    assert main(args) == 0
    first = metasim.load_dataset(tmp_path / "store" / "search.nc")
    assert first.attrs["generation_count"] == 2 and first.sizes["design"] == 10
    assert "search" in (tmp_path / "store" / "report.html").read_text(encoding="utf-8")  # beside search.nc
    assert main(args) == 0  # again: read back from the store, same result
    np.testing.assert_array_equal(metasim.load_dataset(tmp_path / "store" / "search.nc")["search_objective"].values,
                                  first["search_objective"].values)


def test_a_search_store_written_before_the_coordinate_rename_is_read_not_recomputed(found, tmp_path):
    """Generations stored with the first coordinate names (``peak_nm_R``; the spec hashes are pinned
    against 0.1.0 in test_renames.py) are read under today's names, not computed again."""
    import shutil

    from metasim.errors import RenamedWarning
    from metasim.io import first_design_coordinate

    store = shutil.copytree(found[0], tmp_path / "old")
    (store / "search.nc").unlink()
    for path in sorted(store.glob("generation-*/sweep.nc")):
        generation = metasim.load_dataset(path)
        first = {name: first_design_coordinate(name) for name in generation.coords
                 if first_design_coordinate(name) != name}
        assert first == {"R_peak_nm": "peak_nm_R", "G_peak_nm": "peak_nm_G"}
        old = generation.rename(first)
        old.attrs["spec"] = {**generation.attrs["spec"],
                             "parameters": [first.get(n, n) for n in generation.attrs["spec"]["parameters"]]}
        metasim.save_dataset(old, path, replace=True)
    seen = []
    with pytest.warns(RenamedWarning, match="'peak_nm_R' is read as 'R_peak_nm'"):
        again = run_search(space(), *inputs(), store=store, generations=10, population=10, seed=3, tolerance=0.0,
                           scheduler="serial", progress=seen.append)
    assert all(event["stored"] for event in seen if event["kind"] == "generation")  # every generation read back
    for name in ("R_peak_nm", "G_peak_nm", "search_objective"):
        np.testing.assert_array_equal(again[name].values, found[1][name].values)
