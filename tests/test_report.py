"""The HTML report and its figures, in process, on a small study."""

import base64
import html
import re
from pathlib import Path

import numpy as np
import pytest
import xarray as xr
from figure_checks import assert_axes_labelled

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
    assert 'kind = "laser"' in plain  # the design spec is reproduced
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


# -- the figures, read off the matplotlib objects --------------------------------------------------------

@pytest.fixture(scope="module")
def study_figures(small_study):
    from metasim.report import report_figures

    return {name: fig for name, (fig, _) in report_figures(small_study[0]).items()}


def test_every_study_figure_labels_its_axes_with_units(study_figures):
    assert sorted(study_figures) == ["age_bands", "chromaticity", "extra_primary", "p95_by_stimulus", "spectra"]
    for fig in study_figures.values():
        assert_axes_labelled(fig)


def test_stimulus_chart_says_what_it_plots(study_figures, small_study):
    ax = study_figures["p95_by_stimulus"].axes[0]
    assert ax.get_title().startswith("95th percentile") and "Worst" not in ax.get_title()
    assert ax.get_ylabel().startswith("Stimulus") and "(ΔE00)" in ax.get_xlabel()
    p95 = small_study[0]["delta_e_2000_by_stimulus"].sel(statistic="p95").isel(design=0)
    shown = [t.get_text() for t in ax.get_yticklabels()]
    assert len(shown) == int((p95 > 1e-9).sum())  # no empty row for a stimulus nobody sees differ
    assert shown[-1] == str(p95["stimulus"].values[int(np.argmax(p95.values))])  # the largest at the top


def test_chromaticity_diagram_draws_every_listed_gamut(study_figures, small_study):
    ax = study_figures["chromaticity"].axes[0]
    listed = list(small_study[0]["reference_gamut"].values)
    assert {"display_p3", "dci_p3"} <= set(listed)
    names = [t.get_text() for t in ax.get_legend().get_texts()]
    # Display P3 and DCI-P3 share their primaries (SMPTE EG 432-1; from memory): one outline, both names
    assert "Display P3 and DCI-P3 (same primaries)" in names and "ITU-R BT.709" in names and "ITU-R BT.2020" in names
    fig = study_figures["chromaticity"]
    fig.canvas.draw()
    box = fig.bbox
    for text in ax.texts:  # every locus label inside the picture, none cut at its edge
        extent = text.get_window_extent()
        assert box.x0 <= extent.x0 and extent.x1 <= box.x1 and box.y0 <= extent.y0 and extent.y1 <= box.y1, text.get_text()
    assert "460" in [t.get_text() for t in ax.texts]


def test_spectra_keep_broadband_curves_readable_beside_laser_lines(small_study):
    from metasim.report import figure_builders

    monitor, _ = load_display(DEMO / "grading_monitor.toml")
    hybrid, hybrid_spec = load_display(DEMO / "projector_laser_phosphor.toml")
    observers = small_study[3].isel(observer=slice(0, 5))
    study = metasim.run_study(monitor, [hybrid], observers, build_stimuli("primaries"), rank_calibration=False,
                              white_categories=0, intervals=False, spec_texts=spec_texts({hybrid.name: hybrid_spec}),
                              extra_peaks_nm=np.arange(450.0, 651.0, 50.0))
    fig = figure_builders(study)["spectra"][0]()
    ax = fig.axes[1]  # the laser-phosphor projector: two laser lines and two filtered phosphor bands
    top = ax.get_ylim()[1]
    broad = max(float(np.max(line.get_ydata())) for line in ax.get_lines()
                if "filter" in line.get_label())
    assert broad > 0.5 * top  # the broadband curves fill their panel
    labels = [" ".join(t.get_text().split()) for t in ax.get_legend().get_texts()]  # wrapped lines joined
    # the red filter is centred at 660 nm and 100 nm wide (the spec): the label names its band, then the peak
    assert any(label.startswith("R: backlight through a 610-710 nm") for label in labels), labels
    assert ax.get_legend().get_bbox_to_anchor().x0 >= ax.get_window_extent().x1 - 1  # beside the panel
    assert_axes_labelled(fig)


def test_extra_primary_figure_marks_the_designs_own_extra_primary(study_figures):
    ax = study_figures["extra_primary"].axes[0]
    assert "C 500 nm" in [t.get_text() for t in ax.texts]  # candidate A's cyan line is beyond its base (B, G, R)


def test_extra_primary_label_stays_clear_of_the_curves(study_figures):
    fig = study_figures["extra_primary"]
    ax = fig.axes[0]
    renderer = fig.canvas.get_renderer()
    label = next(t for t in ax.texts if t.get_text() == "C 500 nm")
    box = label.get_window_extent(renderer)
    for line in ax.lines:
        x, y = (np.asarray(v, dtype=float) for v in line.get_data())
        if x.size < 3 or np.unique(x).size < 2:  # the curves, not the vertical marks
            continue
        points = ax.transData.transform(np.column_stack([x, y]))
        inside = ((points[:, 0] >= box.x0) & (points[:, 0] <= box.x1)
                  & (points[:, 1] >= box.y0) & (points[:, 1] <= box.y1))
        assert not inside.any(), f"the label covers {line.get_label()} at {x[inside]} nm"
        assert points[:, 1].max() < box.y0  # every curve stays below the band that holds the label


def test_age_band_figure_explains_its_marks(study_figures):
    ax = study_figures["age_bands"].axes[0]
    names = [t.get_text() for t in ax.get_legend().get_texts()]
    assert "mean" in names and "median" in names and "thresholds 1, 2, 3 ΔE00" in names
    assert "last band includes" in ax.get_xlabel()
