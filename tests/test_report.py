"""The HTML report and its figures, in process, on a small study."""

import base64
import html
import re
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

import metasim
from metasim import plots
from metasim.cli.specs import load_display
from metasim.cli.study import build_stimuli, spec_texts
from metasim.errors import MetasimError
from metasim.report import CAUTIONS, render_report, write_report

DEMO = Path(__file__).resolve().parents[1] / "data" / "demo"
IMAGE = re.compile(r'src="data:image/png;base64,([A-Za-z0-9+/=]+)"')


@pytest.fixture(scope="module")
def small_study():
    monitor, monitor_spec = load_display(DEMO / "grading_monitor.toml")
    laser, laser_spec = load_display(DEMO / "projector_four_laser.toml")
    observers = metasim.observer_population(40, seed=5, age_years=(20, 70))
    stimuli = build_stimuli("primaries")
    result = metasim.run_study(monitor, [laser], observers, stimuli, rank_calibration=False, white_categories=0,
                               spec_texts=spec_texts({monitor.name: monitor_spec, laser.name: laser_spec}),
                               extra_bases=[["B", "G", "R"]], extra_peaks_nm=np.arange(450.0, 651.0, 10.0))
    return result, monitor, laser, observers, stimuli


@pytest.fixture(scope="module")
def study_report(small_study):
    """The HTML report of the small study, rendered once for the tests that read it."""
    return render_report(small_study[0])


def test_report_embeds_figures_and_states_models(study_report):
    text = study_report
    images = IMAGE.findall(text)
    assert len(images) == 5
    assert all(base64.b64decode(data).startswith(b"\x89PNG\r\n\x1a\n") for data in images)  # PNG signature (ISO/IEC 15948)
    assert "CIE 170-1:2006" in text  # observer model from the file's attributes
    assert "CIE 1931 2°" in text and "minimum-norm drive" in text  # calibration observer, drive strategy
    assert "Four-laser projector (candidate A)" in text
    plain = html.unescape(text)
    assert 'type = "laser"' in plain  # the design spec is reproduced
    for caution in CAUTIONS:
        assert caution in plain


def test_report_needs_no_network(study_report):
    text = study_report
    assert "<script" not in text and "<link" not in text
    assert not re.search(r'(src|href)="(https?:)?//', text)


def test_report_round_trips_through_a_file(small_study, tmp_path):
    path = metasim.save_dataset(small_study[0], tmp_path / "study.nc")
    html = write_report(metasim.load_dataset(path), tmp_path / "report.html", figures_dir=tmp_path / "figures")
    assert len(IMAGE.findall(html.read_text())) == 5
    assert len(list((tmp_path / "figures").glob("*.png"))) == 5


def test_report_of_a_plain_mismatch_result(small_study):
    _, monitor, laser, observers, stimuli = small_study
    result = metasim.mismatch(monitor, laser, observers, stimuli)
    text = render_report(result)
    assert len(IMAGE.findall(text)) == 2  # age bands and per-stimulus chart; no gamut in a plain result
    assert "Answer" in text and "Numbers per design" in text and laser.name in text


def test_report_of_an_observer_population(small_study):
    text = render_report(small_study[3])
    assert len(IMAGE.findall(text)) == 1
    assert "Observers" in text and "40" in text


def test_report_refuses_unrelated_data(tmp_path):
    with pytest.raises(MetasimError, match="no metasim results"):
        render_report(xr.Dataset({"foo": ("x", [1.0, 2.0])}))
    with pytest.raises(MetasimError, match="does not exist"):
        write_report(xr.Dataset(), tmp_path / "nowhere" / "r.html")


def test_age_band_membership_follows_the_engine(small_study):
    result = small_study[0]
    ages = result["age_years"].values
    masks = plots.band_members(ages, result["age_band"].values)
    counts = result["observers_per_age_band"].isel(design=0).values
    assert [int(m.sum()) for m in masks] == list(counts)  # same bands as metasim.metamerism.summarise
