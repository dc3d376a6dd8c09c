"""`metasim estimate`: colour-matching data files in, a fit result and its report out."""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr
from colour.quality.datasets.tcs import SDS_TCS
from figure_checks import assert_axes_labelled
from test_cli import DEMO, MONITOR, assert_one_line_error, run
from test_report_reading import check_page

import metasim
from metasim.cli.specs import load_display
from metasim.fitting import check_matching_data, colour_matching_data, matching_session_data, synthetic_matches
from metasim.fitting.model import predict
from metasim.report import render_report


def _write_cmf_csv(path, subjects=12, noise=0.02):
    plan = colour_matching_data(None, test_wavelengths=np.linspace(400, 690, 30), primaries=[645.16, 526.32, 444.44])
    data = synthetic_matches(plan, metasim.observer_population(subjects, seed=5, age_years=(20, 70), field_size_deg=10),
                             setting_noise=noise, seed=1)
    lines = ["# invented subjects (synthetic matches)", "# primary_wavelengths_nm: 645.16, 526.32, 444.44",
             "subject,test_wavelength_nm,R,G,B,field_size_deg,age_years"]
    for i in range(subjects):
        for s, wl in enumerate(data["test_wavelength"].values):
            a = data["amount"].values[i, s, 0]
            lines.append(f"v{i:02d},{wl:.1f},{a[0]!r},{a[1]!r},{a[2]!r},10,{data['age_years'].values[i]:.0f}")
    path.write_text("\n".join(lines) + "\n")
    return data


@pytest.fixture(scope="module")
def cmf_fit(tmp_path_factory):
    folder = tmp_path_factory.mktemp("estimate")
    data = _write_cmf_csv(folder / "matches.csv")
    done = run("estimate", folder / "matches.csv", "--out", folder / "fit", "--no-categories")
    return folder, data, done


def test_estimate_writes_a_fit_and_a_report(cmf_fit):
    folder, data, done = cmf_fit
    assert "fitted 12 subjects (12 converged)" in done.stdout
    result = metasim.load_dataset(folder / "fit" / "fit.nc")
    assert list(result["observer"].values) == [f"v{i:02d}" for i in range(12)]
    truth = np.stack([data[f"true_{k}"].values for k in metasim.observers.DEVIATIONS], axis=1)
    z = (result["estimate"].values - truth) / result["standard_error"].values
    assert (np.abs(z) < 3).mean() > 0.95  # Gaussian posterior (common practice, no source)
    html = (folder / "fit" / "report.html").read_text()
    for text in ("Data and setting noise", "against the population spread", "Matches before and after",
                 "not separable from", "data:image/png;base64,", "Cautions", "not a measurement of anyone"):
        assert text in html
    assert "IEC 60825-1" not in html  # observer-only reports carry only the cautions that apply to them
    page = check_page(html)  # parses, every image and table whole, no stored key or JSON text
    prior = next(t for t in page.tables if t["head"][0] == ["parameter", "population mean",
                                                            "population standard deviation"])
    assert ["lens density (%)", "0.000", "18.700"] in prior["rows"]  # the prior as a table, not JSON text
    assert "Blondé" in " ".join(page.text) and "\\u00e9" not in html
    from metasim.report import report_figures

    for fig, _ in report_figures(result).values():
        assert_axes_labelled(fig)


def test_fit_file_serves_as_observers_of_a_study(cmf_fit, capsys):
    folder, _, _ = cmf_fit
    code, out = _main(capsys, "evaluate", DEMO / "projector_four_laser.toml", "--reference", MONITOR, "--observers",
                      folder / "fit" / "fit.nc", "--out", folder / "study", "--no-calibration-ranking", "--no-report",
                      "--stimuli", "primaries")
    study = metasim.load_dataset(folder / "study" / "study.nc")
    assert code == 0 and study.sizes["observer"] == 12 and "95th percentile" in out.out


def test_estimate_of_sessions_with_a_display_spec(tmp_path, capsys):
    display, _ = load_display(MONITOR)
    wl = display.wavelengths.values
    import colour

    d65 = colour.SDS_ILLUMINANTS["D65"]
    light = np.interp(wl, d65.wavelengths, d65.values)
    names = list(SDS_TCS["CIE 1995"])[:8]
    refl = np.stack([np.interp(wl, SDS_TCS["CIE 1995"][n].wavelengths, SDS_TCS["CIE 1995"][n].values) for n in names])
    refs = xr.DataArray(refl * light, dims=("stimulus", "wavelength"), coords={"stimulus": names, "wavelength": wl})
    plan = matching_session_data(None, references=refs, display=display)
    drives, _ = predict(check_matching_data(plan).geometry, np.zeros((1, 8)), [32.0], [2.0], jacobian=False)
    refs = refs * (0.7 / drives[0].max(axis=1))[:, None]
    metasim.write_spectra_csv(refs.rename(stimulus="channel"), tmp_path / "references.csv")
    plan = matching_session_data(None, references=refs, display=display)
    data = synthetic_matches(plan, metasim.observer_population(5, seed=8, age_years=(30, 60)), setting_noise=0.005,
                             seed=2, repeats=2)
    rows = ["subject,stimulus,R,G,B,age_years"]
    for i in range(5):
        for s, name in enumerate(names):
            for r in range(2):
                rows.append(f"p{i},{name},{','.join(repr(v) for v in data['setting'].values[i, s, r])},"
                            f"{data['age_years'].values[i]:.1f}")
    (tmp_path / "sessions.csv").write_text("\n".join(rows) + "\n")
    code, out = _main(capsys, "estimate", tmp_path / "sessions.csv",
                      "--references", tmp_path / "references.csv", "--display", MONITOR, "--out", tmp_path / "fit",
                      "--no-report", "--no-categories")
    assert code == 0 and "fitted 5 subjects (5 converged)" in out.out
    result = metasim.load_dataset(tmp_path / "fit" / "fit.nc")
    assert result.attrs["matching_data"] == "matching session"
    # CIE 2000 between reference and setting as the fitted observer sees it: setting noise sized (CIE 15:2004)
    assert float(result["match_error"].median()) < float(result["match_error_mean_observer"].median())
    page = render_report(result)
    assert "Data and setting noise" in page and "Headline" not in page  # the answer box says the headline once


def _main(capsys, *args):
    from metasim.cli import main

    code = main([*map(str, args), "--quiet"])
    return code, capsys.readouterr()


def test_estimate_bad_input_gives_one_line_errors(tmp_path, capsys):
    (tmp_path / "no_primaries.csv").write_text("subject,test_wavelength_nm,R,G,B\na,500,0.1,0.8,0.1\n")
    assert_one_line_error(run("estimate", tmp_path / "no_primaries.csv", "--out", tmp_path / "x", check=False))
    (tmp_path / "nan.csv").write_text("subject,test_wavelength_nm,R,G,B\na,500,nan,,nan\n")
    (tmp_path / "session.csv").write_text("subject,stimulus,R,G,B\na,s1,0.2,1.4,0.3\n")
    metasim.write_spectra_csv(xr.DataArray(np.ones((1, 441)), dims=("channel", "wavelength"),
                                           coords={"channel": ["s1"], "wavelength": np.arange(390.0, 831.0)}),
                              tmp_path / "refs.csv")
    cases = [
        ((tmp_path / "no_primaries.csv",), "no primaries"),
        ((tmp_path / "nan.csv", "--primaries", "645.16,526.32,444.44"), "every 'amount' value is NaN"),
        ((tmp_path / "nan.csv", "--primaries", "red,green,blue"), "give three wavelengths in nm"),
        ((tmp_path / "session.csv", "--references", tmp_path / "refs.csv", "--display", MONITOR), "outside 0..1"),
        ((tmp_path / "session.csv",), "need the reference spectra and the display"),
    ]
    for args, message in cases:
        code, out = _main(capsys, "estimate", *args, "--out", tmp_path / "x")
        assert code == 1 and out.err.count("\n") == 1 and out.err.startswith("metasim: error:")
        assert message in out.err
