"""The embedded demo study: an invented post-production house chooses a screening-room projector.

Kestrel Lane Post (invented; no real company, product or person is meant) finishes every job on a
broadband grading monitor and is weighing two projector designs for its new screening room, where
audiences aged 20 to 70 watch the same pictures: four narrow laser lines (candidate A) or a
laser-phosphor hybrid (candidate B). The demo builds a seeded audience, evaluates both designs
against the monitor (gamut, extra-primary gain, population mismatch, calibration choices) and
writes a result file, figures and an HTML report. Inputs live in ``data/demo/`` (see its README).
"""

from __future__ import annotations

from pathlib import Path

from metasim._paths import data_dir
from metasim.cli.specs import load_display
from metasim.cli.study import build_population, build_stimuli, spec_texts
from metasim.cli.paths import FIGURES_DIR, REPORT_FILE, RESULT_FILE, range_text
from metasim.io import check_outputs, save_dataset
from metasim.progress import Progress
from metasim.report import report_outputs, write_report
from metasim.study import run_study

DEMO_DIR = data_dir() / "demo"
REFERENCE_SPEC = "grading_monitor.toml"
DESIGN_SPECS = ("projector_four_laser.toml", "projector_laser_phosphor.toml")
AUDIENCE_AGES = (20.0, 70.0)
STIMULI = "ramp:6,primaries,{csv}"


def run_demo(out, *, size: int = 1000, seed: int = 2024, quiet: bool = False, replace: bool = False,
             progress: Progress | None = None) -> dict:
    """Run the demo study into the folder ``out``; returns the paths written and the result.

    Existing outputs (``study.nc``, ``report.html``, the figures) are replaced only with ``replace``;
    otherwise the demo stops before computing (:func:`metasim.io.check_outputs`). Progress lines go
    to ``progress`` (default: a new :class:`metasim.progress.Progress`, silent with ``quiet``).
    """
    out = Path(out)
    figures = out / FIGURES_DIR
    check_outputs([out / RESULT_FILE, *report_outputs("study", out / REPORT_FILE, figures)], replace=replace)
    out.mkdir(parents=True, exist_ok=True)
    progress = progress if progress is not None else Progress(quiet=quiet)
    progress.steps = 13
    reference, ref_spec = load_display(DEMO_DIR / REFERENCE_SPEC)
    designs, specs = [], {reference.name: ref_spec}
    for name in DESIGN_SPECS:
        display, spec = load_display(DEMO_DIR / name)
        designs.append(display)
        specs[display.name] = spec
    progress.step(f"displays: {reference.name!r} and {len(designs)} designs from {DEMO_DIR}")
    observers = build_population(size, seed, AUDIENCE_AGES, 2)
    progress.step(f"audience: {size} observers aged {range_text(AUDIENCE_AGES)}, seed {seed}")
    stimuli = build_stimuli(STIMULI.format(csv=DEMO_DIR / "stimuli.csv"))
    result = run_study(reference, designs, observers, stimuli, spec_texts=spec_texts(specs), progress=progress, seed=seed,
                       extra_bases=[specs[d.name].get("extra_primary_added_to") for d in designs])
    result.attrs["title"] = "Kestrel Lane Post: screening-room projector candidates against the grading monitor"
    result.attrs["scenario"] = ("invented demo: a post-production house weighs two projector designs against its "
                                "broadband grading monitor for audiences aged 20-70")
    result_path = save_dataset(result, out / RESULT_FILE, replace=replace)
    progress.step(f"wrote {result_path}")
    report_path = write_report(result, out / REPORT_FILE, figures_dir=figures, source=RESULT_FILE, replace=replace)
    progress.step(f"wrote {report_path} and {figures}")
    return {"result": result, "result_path": result_path, "report_path": report_path, "figures_dir": figures}


__all__ = ["DEMO_DIR", "run_demo"]
