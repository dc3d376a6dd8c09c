"""The report of a combined sweep (STORE/sweep.nc): figure, best design, best-designs table, models, cautions.

Kept tiny (20 observers, 4 stimuli, 5 and 2×2 designs) so the file runs in a few seconds.
"""

import base64
import html
import re

import numpy as np
import pytest

import metasim
from metasim import emitters, plots
from metasim.errors import MetasimError
from metasim.metamerism import primaries_and_secondaries
from metasim.report import CAUTIONS, is_sweep, render_report, report_figures, write_report
from metasim.sweep import design_grid, run_sweep
from figure_checks import assert_axes_labelled
from test_cli import run
from test_report_reading import check_page

IMAGE = re.compile(r'src="data:image/png;base64,([A-Za-z0-9+/=]+)"')


@pytest.fixture(scope="module")
def inputs():
    spectra = emitters.gaussian([612, 548, 455], [38, 42, 28], name=["R", "G", "B"])
    monitor = metasim.calibrate_white(metasim.make_display(spectra, name="studio monitor"), "cie1931_2",
                                      white="D65", luminance=100)
    viewers = metasim.observer_population(20, seed=3, age_years=(20, 70))
    stimuli = primaries_and_secondaries().isel(stimulus=slice(0, 4))
    return monitor, viewers, stimuli


@pytest.fixture(scope="module")
def red_sweep(tmp_path_factory, inputs):
    store = tmp_path_factory.mktemp("red") / "store"
    designs = design_grid("laser", peaks_nm={"R": [620, 630, 640, 650, 660], "G": [532], "B": [465]}, fwhm_nm=1.0)
    return store, run_sweep(designs, *inputs, store=store, chunk_size=2, scheduler="serial")


@pytest.fixture(scope="module")
def pair_sweep(tmp_path_factory, inputs):
    store = tmp_path_factory.mktemp("pair") / "store"
    designs = design_grid("laser", peaks_nm={"R": [625, 645], "G": [525, 535], "B": [465]}, fwhm_nm=1.0)
    return store, run_sweep(designs, *inputs, store=store, scheduler="serial")


def best_of(result):
    p95 = result["delta_e_2000_overall"].sel(statistic="p95").values
    return int(np.argmin(p95)), float(np.min(p95))


def assert_sweep_page(text, result):
    images = IMAGE.findall(text)
    assert len(images) == 2  # the sweep figure and the Pareto front
    assert base64.b64decode(images[0]).startswith(b"\x89PNG\r\n\x1a\n")  # PNG signature (ISO/IEC 15948)
    index, p95 = best_of(result)
    assert f"Best design: design {result['design'].values[index] + 1}" in text  # numbered from 1, like ranks
    assert f"95th percentile {p95:.2f} and median" in text  # in the answer box
    assert "IEC 60825-1" in text and "IEC 62471" in text and "Cautions" in text
    assert all(html.escape(c) in text for c in CAUTIONS)
    assert "Models and parameters" in text and "Sweep spec" in text
    assert "per-design summaries of metasim.mismatch" in text and "CIE 170-1:2006" in text
    assert f"{result.sizes['design']} designs, each judged by 20 observers × 4 stimuli" in text
    assert "<script" not in text and "http" not in text.replace("http-equiv", "")  # self-contained page


def test_sweep_is_recognised(red_sweep, inputs):
    result = red_sweep[1]
    assert is_sweep(result)
    assert not is_sweep(metasim.observer_population(5, seed=1))
    assert plots.sweep_parameters(result) == (["R_peak_nm"], ["G_peak_nm", "B_peak_nm", "fwhm_nm"])
    assert plots.parameter_label(result, "R_peak_nm") == "red laser peak (nm)"
    assert plots.parameter_label(result, "fwhm_nm") == "laser line width (FWHM) (nm)"


def test_one_parameter_sweep_report(red_sweep):
    result = red_sweep[1]
    text = render_report(result)
    assert_sweep_page(text, result)
    check_page(text)  # parses, every image and table whole, no stored key, the answer box first
    index, _ = best_of(result)
    peak = float(result["R_peak_nm"].values[index])
    assert f"(red laser peak {peak:g} nm)" in text
    assert "<th>red laser peak (nm)</th>" in text and "BT.2020 covered" in text
    best_table = text.split("<h2>Best designs</h2>", 1)[1].split("<h2>", 1)[0]
    assert best_table.count("<tr><td>") == 5  # every design in the best-designs table (five of them)
    figure = report_figures(result)["sweep"][0]
    axes = figure.axes
    assert len(axes) == 2 and axes[-1].get_xlabel() == "red laser peak (nm)"
    assert "BT.2020" in axes[1].get_ylabel() and "ΔE00" in axes[0].get_ylabel()
    labels = [t.get_text() for t in axes[0].get_legend().get_texts()]
    assert labels[:2] == ["95th percentile", "median"] and labels[2].startswith(f"best: design {index + 1}")
    assert labels[3].startswith("2 ΔE00")  # the threshold line is in the legend, not a label at the plot's edge
    assert_axes_labelled(figure)
    figure.canvas.draw()
    legend = axes[0].get_legend().get_window_extent()
    assert legend.x0 >= axes[0].get_window_extent().x1 - 1 and legend.x1 <= figure.bbox.x1  # beside the data, whole
    if "pareto" in report_figures(result):
        assert_axes_labelled(report_figures(result)["pareto"][0])


def test_two_parameter_sweep_report_is_a_heat_map(pair_sweep):
    result = pair_sweep[1]
    text = render_report(result)
    assert_sweep_page(text, result)
    figure = report_figures(result)["sweep"][0]
    heat, bar = figure.axes
    assert heat.get_xlabel() == "red laser peak (nm)" and heat.get_ylabel() == "green laser peak (nm)"
    assert "(ΔE00)" in bar.get_ylabel() and "CIELAB" not in bar.get_ylabel()  # a CIE 2000 difference, named so
    assert_axes_labelled(figure)
    grid = heat.images[0].get_array()
    assert grid.shape == (2, 2)
    p95 = result["delta_e_2000_overall"].sel(statistic="p95")
    for d in range(4):
        i = [525.0, 535.0].index(float(result["G_peak_nm"][d]))
        j = [625.0, 645.0].index(float(result["R_peak_nm"][d]))
        assert grid[i, j] == pytest.approx(float(p95[d]))  # the heat map holds the summary values (no outside reference)


def test_more_parameters_give_a_rank_plot(pair_sweep):
    result = pair_sweep[1].assign_coords(fwhm_nm=("design", [1.0, 2.0, 3.0, 4.0], {"units": "nm"}))
    figure = plots.sweep_figure(result)
    ax = figure.axes[0]
    assert_axes_labelled(figure)
    assert ax.get_xlabel().startswith("Rank of the design")
    line = ax.get_lines()[0].get_ydata()
    assert list(line) == sorted(line)
    text = render_report(result)
    assert_sweep_page(text, result)


def test_existing_reports_still_refuse_unrelated_data():
    with pytest.raises(MetasimError, match="no metasim results"):
        render_report(metasim.observer_population(3, seed=1).drop_vars("cmf"))


def test_cli_report_of_a_sweep_store(tmp_path, red_sweep):
    store, result = red_sweep
    out = tmp_path / "sweep.html"
    done = run("report", store / "sweep.nc", "--out", out, "--figures", tmp_path / "figures", check=False)
    assert done.returncode == 0, done.stderr
    assert "report:" in done.stdout and "Traceback" not in done.stderr
    text = out.read_text(encoding="utf-8")
    assert_sweep_page(text, result)
    assert (tmp_path / "figures" / "sweep.png").read_bytes().startswith(b"\x89PNG")


def test_write_report_of_a_loaded_sweep(tmp_path, pair_sweep):
    store, result = pair_sweep
    loaded = metasim.load_dataset(store / "sweep.nc")
    path = write_report(loaded, tmp_path / "pair.html", title="Red and green lines")
    text = path.read_text(encoding="utf-8")
    assert "<h1>Red and green lines</h1>" in text
    assert_sweep_page(text, result)


def test_per_stimulus_sweep_lists_the_hardest_stimuli(tmp_path, inputs):
    designs = design_grid("laser", peaks_nm={"R": [625, 645], "G": [532], "B": [465]}, fwhm_nm=1.0)
    result = run_sweep(designs, *inputs, store=tmp_path / "per-stimulus", scheduler="serial", per_stimulus=True)
    text = render_report(result)
    index, _ = best_of(result)
    assert f"Hardest stimuli for design {result['design'].values[index] + 1}" in text
    p95 = result["delta_e_2000_by_stimulus"].isel(design=index).sel(statistic="p95")
    hardest = str(p95["stimulus"].values[int(np.argmax(p95.values))])
    first_row = text.split("Hardest stimuli")[1].split("<tr><td>")[1]
    assert first_row.startswith(f"{html.escape(hardest)}</td>")  # the worst stimulus heads the table
    assert "Hardest stimuli" not in render_report(run_sweep(designs, *inputs, store=tmp_path / "plain",
                                                            scheduler="serial"))


def test_edge_warning_names_the_parameter_in_words():
    import xarray as xr

    sweep = xr.Dataset(coords={"R_peak_nm": ("design", [610.0, 650.0], {"units": "nm"})},
                       attrs={"edge_warnings": "the best design has R_peak_nm = 650 nm, the upper end of the swept "
                                               "range 610-650 nm: extend the range beyond 650 nm"})
    (message,) = plots.sweep.edge_messages(sweep)
    assert message.startswith("the best design has red primary peak = 650 nm") and "R_peak_nm" not in message


def test_shares_near_the_ends_are_never_rounded_to_all_or_none(red_sweep):
    from metasim.report.answer import sweep_sentences
    from metasim.statistics.headline import share_with_interval
    from metasim.units import format_share

    # common practice, no source: a share is "100 %" only when every case is in it
    assert [format_share(v) for v in (0.998, 0.9996, 0.995, 0.0004, 0.004, 0.5, 1.0, 0.0)] == [
        "99.8 %", "> 99.9 %", "99.5 %", "< 0.1 %", "0.4 %", "50 %", "100 %", "0 %"]
    assert share_with_interval(0.998, [0.991, 1.0]) == "99.8 % (99.1–100 %)"
    result = red_sweep[1].copy()
    coverage = result["gamut_coverage"].copy()
    coverage.loc[{"reference_gamut": "bt2020"}] = 0.998
    result["gamut_coverage"] = coverage
    text = " ".join(sweep_sentences(result))
    assert "it covers 99.8 % of the BT.2020 xy area" in text and "100 %" not in text
    page = render_report(result, figures={})
    assert "99.8 %" in page and "100.0 %" not in page
