"""Reports as a reader meets them: the page parses, every image is there, every table has a header,
no stored key or Python literal shows, an answer box opens the page and the cautions that apply close it.

Pages are parsed with the standard library's html.parser; the design spec files quoted verbatim
(``<pre class="spec-file">``) are the user's own files and are not page text.
"""

import base64
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest

import metasim
from metasim.cli.specs import load_display
from metasim.cli.study import build_stimuli, spec_texts
from metasim.report import render_report

DEMO = Path(__file__).resolve().parents[1] / "data" / "demo"
#: stored keys and literals a reader must not meet in page text
RAW = ("cie1931_2", "cie1964_10", "population_mean", "min_norm", "True", "False", "None", '{"', "nan")


class Page(HTMLParser):
    """The visible text, images, tables and section order of a report page."""

    def __init__(self):
        super().__init__()
        self.text, self.images, self.tables, self.order = [], [], [], []
        self._skip, self._table, self._row, self._cell = 0, None, None, None

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if tag in ("style", "title") or (tag == "pre" and attrs.get("class") == "spec-file"):
            self._skip += 1
        if tag == "img":
            self.images.append(attrs)
            self.order.append("figure")
        if tag == "section" and attrs.get("class") == "answer":
            self.order.append("answer")
        if tag == "table":
            self._table = {"head": [], "rows": []}
            self.order.append("table")
        if tag == "tr" and self._table is not None:
            self._row = []
        if tag in ("th", "td") and self._row is not None:
            self._cell = [tag, ""]

    def handle_endtag(self, tag):
        if tag in ("style", "title", "pre") and self._skip:
            self._skip -= 1
        if tag in ("th", "td") and self._cell is not None:
            self._row.append(tuple(self._cell))
            self._cell = None
        if tag == "tr" and self._row is not None:
            if all(kind == "th" for kind, _ in self._row):
                self._table["head"].append([text for _, text in self._row])
            else:
                self._table["rows"].append([text for _, text in self._row])
            self._row = None
        if tag == "table" and self._table is not None:
            self.tables.append(self._table)
            self._table = None

    def handle_data(self, data):
        if self._cell is not None:
            self._cell[1] += data
        if not self._skip:
            self.text.append(data)


def read(page: str) -> Page:
    parser = Page()
    parser.feed(page)
    parser.close()
    return parser


def check_page(page: str) -> Page:
    parsed = read(page)
    assert parsed.images, "no figure"
    for image in parsed.images:
        src = image.get("src", "")
        assert src.startswith("data:image/png;base64,") and image.get("alt")
        assert base64.b64decode(src.split(",", 1)[1]).startswith(b"\x89PNG\r\n\x1a\n")  # PNG signature (ISO/IEC 15948)
    assert parsed.tables
    for table in parsed.tables:
        assert len(table["head"]) == 1 and all(h.strip() for h in table["head"][0]), table["head"]
        assert all(len(row) == len(table["head"][0]) for row in table["rows"])
    text = " ".join(parsed.text)
    for raw in RAW:
        assert raw not in text.split() and raw not in text.replace("(", " ").split(), raw
    assert '{"' not in text and "\\u00" not in text
    # file names and the library functions a model text points to (metasim.x.y, scipy.x.y) are names to look up
    words = [w for w in text.split() if "_" in w and not w.endswith((".nc", ".csv"))
             and not any(lib in w for lib in ("metasim.", "scipy."))]
    assert not words, words
    assert parsed.order[0] == "answer", parsed.order[:3]  # the answer box opens the page
    return parsed


@pytest.fixture(scope="module")
def study():
    monitor, monitor_spec = load_display(DEMO / "grading_monitor.toml")
    laser, laser_spec = load_display(DEMO / "projector_four_laser.toml")
    hybrid, hybrid_spec = load_display(DEMO / "projector_laser_phosphor.toml")
    observers = metasim.observer_population(40, seed=5, age_years=(20, 70))
    return metasim.run_study(monitor, [laser, hybrid], observers, build_stimuli("primaries"), rank_calibration=True,
                             white_categories=3, spec_texts=spec_texts({monitor.name: monitor_spec, laser.name: laser_spec,
                                                                       hybrid.name: hybrid_spec}),
                             extra_peaks_nm=np.arange(450.0, 651.0, 25.0)), observers


def test_study_report_reads_without_the_manual(study):
    page = render_report(study[0])
    parsed = check_page(page)
    text = " ".join(parsed.text)
    answer = text[text.index("Answer"):text.index("Numbers per design")]
    assert "less than" in answer and "of viewers" in answer and "aged" in answer  # which design, by how much, for whom
    assert "IEC 60825-1" in answer  # the one-line caution in the box
    assert "(" in answer and "–" in answer  # intervals
    cautions = text[text.rindex("Cautions"):]
    assert "IEC 60825-1" in cautions and "IEC 62471" in cautions and "model observers" in cautions
    assert "CIE 1931 2°" in text and "minimum-norm drive" in text
    assert "CIELAB units³" in text and "e+06" not in text


def test_population_report_carries_only_its_cautions(study):
    page = render_report(study[1])
    parsed = check_page(page)
    text = " ".join(parsed.text)
    assert "IEC 60825-1" not in text and "model observers" in text.lower()
    assert "40 model observers aged 20 to 70 years" in page.split("<title>")[1].split("</title>")[0]  # a title saying what it holds


def test_category_report_tabulates_the_shares(study):
    from figure_checks import assert_axes_labelled
    from metasim.report import report_figures

    categories = metasim.observer_categories(study[1], 4, seed=1)
    for population in (study[1], categories):
        fig = report_figures(population)["observers"][0]
        assert_axes_labelled(fig)
        fig.canvas.draw()
        ticks = [float(t.get_text().replace("−", "-")) for t in fig.axes[0].get_yticklabels() if t.get_text()]
        assert all(t == int(t) for t in ticks) or population is categories  # whole observers, never 1.25 of one
    assert fig.axes[0].get_ylabel() == "Share of the population (%)"  # categories: their shares, not a count
    parsed = check_page(render_report(categories))
    table = next(t for t in parsed.tables if t["head"][0][:2] == ["category", "share of the population"])
    shares = [float(row[1].rstrip(" %")) for row in table["rows"]]
    assert len(shares) == 4 and abs(sum(shares) - 100) < 0.5


def test_every_variable_has_a_long_name_of_its_own(study):
    # a long name says what a variable holds, not its key with spaces; no two variables share one
    names = {}
    for key, variable in study[0].data_vars.items():
        long_name = str(variable.attrs.get("long_name", ""))
        assert long_name and long_name != key.replace("_", " "), key
        assert variable.attrs.get("units"), key
        names.setdefault(long_name, []).append(key)
    shared = {name: keys for name, keys in names.items() if len(keys) > 1}
    assert not shared, shared
    assert study[0]["lab_volume"].attrs["units"] == study[0]["volume_gain"].attrs["units"] == "CIELAB units³"
    assert study[0]["delta_e_2000"].attrs["units"] == "ΔE00"


@pytest.fixture(scope="module")
def demo_sweep_and_search(tmp_path_factory):
    """The demo sweep (the red laser line, 610-650 nm) and the demo search, run through the command
    line with 20 observers; their reports read back."""
    from test_cli import run

    folder = tmp_path_factory.mktemp("sweep-reading")
    run("sweep", DEMO / "sweep_red_laser.toml", "--out", folder / "sweep", "--size", 20, "--quiet")
    run("search", DEMO / "search_red_green.toml", "--out", folder / "search", "--size", 20, "--quiet")
    return folder


def test_sweep_report_reads_without_the_manual(demo_sweep_and_search):
    sweep = metasim.load_dataset(demo_sweep_and_search / "sweep" / "sweep.nc")
    parsed = check_page((demo_sweep_and_search / "sweep" / "report.html").read_text(encoding="utf-8"))
    settings = {row[0]: row[1] for table in parsed.tables for row in table["rows"] if len(row) == 2}
    best = int(sweep.attrs["best_design"])  # the file's 0-based index; readers see numbers from 1
    assert settings["best design"] == f"design {best + 1}"
    assert settings["designs that cannot be told apart from the best"].startswith("design")
    if sweep.attrs.get("edge_warnings"):
        assert settings["edge warnings"].startswith("the best design has red laser peak = ")
    assert settings["FWHM (nm)"] == "1" and settings["relative power"] == "1"
    assert "R_peak_nm" in sweep.coords and "R_peak_nm" not in " ".join(parsed.text)


def test_search_report_names_the_search_settings(demo_sweep_and_search):
    search = metasim.load_dataset(demo_sweep_and_search / "search" / "search.nc")
    parsed = check_page((demo_sweep_and_search / "search" / "report.html").read_text(encoding="utf-8"))
    settings = {row[0]: row[1] for table in parsed.tables for row in table["rows"] if len(row) == 2}
    assert settings["best design"] == f"design {int(search.attrs['best_design']) + 1}"
    assert settings["best design meets every constraint"] in ("yes", "no")
    # the search's "strategy" is that of differential evolution (Storn & Price 1997), not the drive strategy
    assert settings["differential evolution strategy"].startswith("DE/best/1/bin")
    assert settings["drive strategy (more than three primaries)"] == "minimum-norm drive"
