"""Renamed options, spec keys and values: the old spelling does what the new one does for one more
release, with a warning that names the new spelling."""

import importlib
import warnings
from pathlib import Path

import numpy as np
import pytest
from test_cli import DEMO, run

import metasim
from metasim.cli.specs import load_display
from metasim.errors import RenamedWarning
from metasim.io import first_design_coordinate
from metasim.sweep.grid import hashed_designs
from metasim.metamerism import categories, cie_13_3_samples, primaries_and_secondaries

#: the laser-phosphor demo spec written with every old key name
OLD_SPEC = """
name = "Old spelling"
transfer = "gamma"
gamma = 2.6
peak_luminance = 48
white = "D65"
extra_primary_base = ["B", "G", "R"]
[backlight]
type = "phosphor_white_led"
pump_peak_nm = 455
pump_half_spectral_width_nm = 2
phosphor_peak_nm = 560
phosphor_fwhm_nm = 115
phosphor_to_pump = 4.0
[[primary]]
label = "B"
type = "laser"
peak_nm = 455
linewidth_nm = 1.5
[[primary]]
label = "G"
type = "filter"
centre_nm = 540
width_nm = 70
edge_nm = 15
[[primary]]
label = "R"
type = "filter"
centre_nm = 660
width_nm = 100
edge_nm = 15
[[primary]]
label = "R+"
type = "laser"
peak_nm = 639
linewidth_nm = 1.0
radiance = 0.5
"""


def test_old_spec_keys_build_the_same_display(tmp_path):
    new = (DEMO / "projector_laser_phosphor.toml").read_text(encoding="utf-8")
    old = tmp_path / "old.toml"
    old.write_text(OLD_SPEC, encoding="utf-8")
    with pytest.warns(RenamedWarning) as seen:
        display, spec = load_display(old)
    messages = " ".join(str(w.message) for w in seen)
    for before, after in (("type", "kind"), ("radiance", "relative_power"), ("width_nm", "passband_nm"),
                          ("phosphor_to_pump", "phosphor_pump_ratio"), ("extra_primary_base", "extra_primary_added_to")):
        assert f"{before!r} is renamed {after!r}" in messages
    assert spec["extra_primary_added_to"] == ["B", "G", "R"]
    fresh, _ = load_display(DEMO / "projector_laser_phosphor.toml")
    np.testing.assert_array_equal(display.spectra.values, fresh.spectra.values)  # same display, either spelling
    assert "kind = " in new and "type = " not in new  # the shipped examples use the new names


def test_both_spellings_of_one_key_are_refused(tmp_path):
    spec = tmp_path / "both.toml"
    spec.write_text(OLD_SPEC.replace('type = "laser"\npeak_nm = 455', 'type = "laser"\nkind = "laser"\npeak_nm = 455'),
                    encoding="utf-8")
    with pytest.raises(metasim.errors.SpecError, match="both 'type' and 'kind'"), warnings.catch_warnings():
        warnings.simplefilter("ignore", RenamedWarning)  # the other old keys of the file
        load_display(spec)


def test_old_option_spellings_work_with_a_notice(tmp_path):
    common = ["evaluate", DEMO / "projector_four_laser.toml", "--size", 6, "--seed", 2, "--stimuli", "primaries",
              "--no-report", "--no-intervals", "--quiet"]
    old = run(*common, "--no-choices", "--source", "bt709", "--strategy", "population", "--out", tmp_path / "old",
              "--reference", DEMO / "grading_monitor.toml")
    new = run(*common, "--no-calibration-ranking", "--stimulus-space", "bt709", "--strategy", "least_mismatch",
              "--out", tmp_path / "new", "--reference", DEMO / "grading_monitor.toml")
    notices = [line for line in old.stderr.splitlines() if line.startswith("metasim: warning:")]
    assert "metasim: warning: --no-choices is renamed --no-calibration-ranking" in "\n".join(notices)
    assert "--source is renamed --stimulus-space" in old.stderr
    assert "--strategy population is renamed --strategy least_mismatch" in old.stderr
    assert "renamed" not in new.stderr
    a, b = (metasim.load_dataset(tmp_path / name / "study.nc") for name in ("old", "new"))
    np.testing.assert_array_equal(a["delta_e_2000"].values, b["delta_e_2000"].values)
    assert a.attrs["drive_strategy"] == b.attrs["drive_strategy"] == "least_mismatch"
    assert "calibration_mean_delta_e" not in a  # --no-choices did skip the ranking


def test_old_library_names_still_work():
    monitor, _ = load_display(DEMO / "grading_monitor.toml")
    lasers, _ = load_display(DEMO / "projector_four_laser.toml")
    viewers = metasim.observer_population(4, seed=3)
    with pytest.warns(RenamedWarning, match="'objects' is renamed 'surfaces'"):
        old = metasim.mismatch("objects", lasers, viewers, cie_13_3_samples())
    with warnings.catch_warnings():
        warnings.simplefilter("error", RenamedWarning)
        new = metasim.mismatch("surfaces", lasers, viewers, cie_13_3_samples())
    np.testing.assert_array_equal(old["delta_e_2000"].values, new["delta_e_2000"].values)
    with pytest.warns(RenamedWarning, match="'population' is renamed 'least_mismatch'"):
        metasim.mismatch(monitor, lasers, viewers, primaries_and_secondaries(), strategy="population")


# -- --out and the example files --------------------------------------------------------------------------

@pytest.mark.parametrize("command, kind", [("demo", "FOLDER"), ("observers", "FILE"), ("evaluate", "FOLDER"),
                                           ("compare", "FOLDER"), ("report", "FILE"), ("tables", "FOLDER"),
                                           ("sweep", "FOLDER"), ("search", "FOLDER"), ("estimate", "FOLDER")])
def test_every_help_says_whether_out_is_a_file_or_a_folder(command, kind):
    done = run(command, "--help", check=False)
    lines = done.stdout.splitlines()
    first = next(i for i, line in enumerate(lines) if line.startswith("  --out "))  # the option, not the usage
    rest = [line for line in lines[first + 1:first + 4] if line.startswith("     ")]  # its wrapped help
    out = " ".join(" ".join([lines[first], *rest]).split())
    assert kind in out, out
    if command in ("evaluate", "compare"):  # distinct defaults: one run does not meet the other's files
        assert f"(default metasim-{command})" in out


def test_demo_files_writes_the_examples_and_their_format(tmp_path):
    folder = tmp_path / "examples"
    done = run("demo", "--files", folder)
    names = sorted(p.name for p in folder.iterdir())
    assert {"README.md", "projector_four_laser.toml", "grading_monitor.toml", "grading_monitor_spectra.csv",
            "sweep_red_laser.toml", "search_red_green.toml", "lab_matches.csv"} <= set(names)
    assert "Display design spec format" in (folder / "README.md").read_text(encoding="utf-8")
    assert "examples:" in done.stdout and not (tmp_path / "metasim-demo").exists()  # nothing computed
    display, _ = load_display(folder / "grading_monitor.toml")  # a copied spec works where it lands
    assert display.n_primaries == 3
    again = run("demo", "--files", folder, check=False)
    assert again.returncode != 0 and "--replace" in again.stderr  # nothing a user edited is overwritten


# -- library keywords ----------------------------------------------------------------------------------------

@pytest.mark.parametrize("call, old, new", [
    (lambda **k: metasim.emitters.laser_line(532, 1.0, **k), "radiance", "relative_power"),
    (lambda **k: metasim.emitters.gaussian(530, 30, **k), "radiance", "relative_power"),
    (lambda **k: metasim.emitters.ohno_led(630, 15, **k), "radiance", "relative_power"),
    (lambda **k: metasim.emitters.quantum_dot(630, 30, **k), "radiance", "relative_power"),
    (lambda **k: metasim.emitters.phosphor_white_led(**k), "radiance", "relative_power"),
    (lambda **k: metasim.emitters.phosphor_white_led(**k), "phosphor_to_pump", "phosphor_pump_ratio"),
])
def test_old_emitter_keywords_work_and_warn(call, old, new):
    with pytest.warns(DeprecationWarning, match=f"keyword '{old}' is renamed '{new}'") as seen:
        before = call(**{old: 3.0})
    assert issubclass(seen[0].category, RenamedWarning)  # the project's renamed-name notice
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        after = call(**{new: 3.0})
    np.testing.assert_array_equal(before.values, after.values)
    with pytest.raises(TypeError, match=f"both {old}= and {new}="):
        call(**{old: 3.0, new: 3.0})


def test_old_filter_and_grid_keywords_work_and_warn():
    with pytest.warns(DeprecationWarning, match="'width_nm' is renamed 'passband_nm'"):
        old = metasim.emitters.band_pass_filter(540, width_nm=80)
    np.testing.assert_array_equal(old.values, metasim.emitters.band_pass_filter(540, passband_nm=80).values)
    base = metasim.emitters.laser_line([465, 532], 1.0, name=["B", "G"])
    with pytest.warns(DeprecationWarning, match="'radiance' is renamed 'relative_power'"):
        old = metasim.design_grid("laser", {"R": [630, 640]}, 1.0, base=base, radiance=2.0)
    new = metasim.design_grid("laser", {"R": [630, 640]}, 1.0, base=base, relative_power=2.0)
    xr_equal = old.identical(new)
    assert xr_equal
    with pytest.warns(DeprecationWarning, match="'width_nm' is renamed 'fwhm_nm'"):
        old = metasim.design_grid("laser", {"R": [630, 640]}, base=base, width_nm=[1.0, 2.0])
    new = metasim.design_grid("laser", {"R": [630, 640]}, base=base, fwhm_nm=[1.0, 2.0])
    assert old.identical(new) and list(new.coords) == ["design", "primary", "wavelength", "R_peak_nm", "fwhm_nm"]
    assert new["fwhm_nm"].attrs == {"units": "nm", "long_name": "linewidth of the varied primaries"}


def test_spectrum_locus_coverage_was_locus_share():
    lasers = metasim.emitters.laser_line([630, 532, 465], 1.0, name=["R", "G", "B"])
    observer = metasim.standard_observer("cie1931_2")
    with pytest.warns(DeprecationWarning, match=r"locus_share\(\) is renamed spectrum_locus_coverage\(\)"):
        old = metasim.gamut.locus_share(lasers, observer)
    new = metasim.gamut.spectrum_locus_coverage(lasers, observer)
    assert float(old) == float(new) and new.attrs["units"] == "1"
    assert "locus_share" not in metasim.gamut.__all__


# -- result variables: new names in files, old files still open --------------------------------------------

RENAMED = {"locus_share": "spectrum_locus_coverage", "share_beyond": "share_of_observers_above_threshold",
           "share_beyond_overall": "share_of_pairs_above_threshold",
           "share_beyond_overall_interval": "share_of_pairs_above_threshold_interval"}


@pytest.fixture(scope="module")
def small_study_file(tmp_path_factory):
    folder = tmp_path_factory.mktemp("renamed")
    run("evaluate", DEMO / "projector_four_laser.toml", "--reference", DEMO / "grading_monitor.toml", "--size", 6,
        "--seed", 2, "--stimuli", "primaries", "--no-report", "--resamples", 200, "--quiet", "--out", folder / "new")
    return folder / "new" / "study.nc"


def test_results_carry_the_new_names_with_units_and_long_names(small_study_file):
    study = metasim.load_dataset(small_study_file)
    for old, new in RENAMED.items():
        assert old not in study and new in study, new
        assert study[new].attrs["units"] == "1" and study[new].attrs["long_name"], new
    assert "above each threshold" in study["share_of_pairs_above_threshold"].attrs["long_name"]
    assert "spectrum-locus" in study["spectrum_locus_coverage"].attrs["long_name"]


def test_a_file_written_with_the_old_names_still_opens_with_a_notice(small_study_file, tmp_path, capsys):
    from metasim.cli import main
    from metasim.report import render_report

    study = metasim.load_dataset(small_study_file)
    old = study.rename({new: old for old, new in RENAMED.items()})
    path = metasim.save_dataset(old, tmp_path / "old.nc")
    with pytest.warns(RenamedWarning, match="'share_beyond_overall' is read as 'share_of_pairs_above_threshold'"):
        back = metasim.load_dataset(path)
    assert sorted(set(RENAMED.values()) - set(back.data_vars)) == []
    np.testing.assert_array_equal(back["share_of_pairs_above_threshold"].values,
                                  study["share_of_pairs_above_threshold"].values)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RenamedWarning)
        page = render_report(back, figures={})
    assert page == render_report(study, figures={})  # the report of an old file reads as that of a new one
    assert "covers the spectrum locus" in page
    capsys.readouterr()
    with warnings.catch_warnings():
        warnings.simplefilter("always", RenamedWarning)
        assert main(["report", str(path), "--out", str(tmp_path / "old.html"), "--quiet"]) == 0
    notice = capsys.readouterr().err
    assert "metasim: warning: a file written before variables were renamed: 'locus_share' is read as" in notice


def test_search_spec_keys_fwhm_nm_and_relative_power(tmp_path):
    from metasim.cli.search import read_search_spec, spec_search_space

    body = ('[search]\nkind = "laser"\n[search.primaries.R]\npeak_nm = [620, 650]\n{width} = 2.0\n{power} = [0.5, 2]\n'
            '[search.primaries.G]\npeak_nm = 532\n[search.primaries.B]\npeak_nm = 465\n')
    (tmp_path / "new.toml").write_text(body.format(width="fwhm_nm", power="relative_power"), encoding="utf-8")
    (tmp_path / "old.toml").write_text(body.format(width="width_nm", power="power"), encoding="utf-8")
    with warnings.catch_warnings():
        warnings.simplefilter("error", RenamedWarning)
        new = spec_search_space(read_search_spec(tmp_path / "new.toml"))[0]
    with pytest.warns(RenamedWarning) as seen:
        old = spec_search_space(read_search_spec(tmp_path / "old.toml"))[0]
    messages = " ".join(str(w.message) for w in seen)
    assert "'width_nm' is renamed 'fwhm_nm'" in messages and "'power' is renamed 'relative_power'" in messages
    assert old.describe() == new.describe()  # the same searched space (and store hash) either way
    assert [name for name, _, _ in new.parameters] == ["R_peak_nm", "R_relative_power"]
    assert "fwhm_nm = 1.0" in (DEMO / "search_red_green.toml").read_text(encoding="utf-8")


@pytest.mark.parametrize("old_module", ["metasim.observers", "metasim.observers.categories"])
@pytest.mark.parametrize("name", ["observer_categories", "observer_features"])
def test_old_import_path_of_the_observer_categories_works_with_a_warning(old_module, name):
    module = importlib.import_module(old_module)
    with pytest.warns(DeprecationWarning, match=f"{old_module}.{name} has moved to metasim.metamerism.categories.{name}"):
        old = getattr(module, name)
    assert old is getattr(categories, name)
    with pytest.raises(AttributeError, match="no_such_name"):
        module.no_such_name


# -- design coordinates: <label>_peak_nm, <label>_fwhm_nm, <label>_relative_power ---------------------------

#: a sweep store written by metasim 0.1.0 (the release before the design coordinates were renamed) and
#: interrupted after its first chunk: two laser designs (red at 630 and 645 nm, green 532, blue 465,
#: 1 nm line widths given per primary), the suite's monitor as reference, 4 observers (seed 5, ages
#: 20-70), the six primaries and secondaries, chunks of one design
OLD_STORE = Path(__file__).parent / "data" / "sweep-store-0.1.0"
#: spec hashes metasim 0.1.0 computed (see test_stores_begun_before_the_rename_keep_their_spec_hash)
HASHES_0_1_0 = {"shared_lazy_grid": "26a00d797e28ea9257db698bfbefaf0d527679bf4c48b8f5cd546f26008ce0d2",
                "search_generation_designs": "7005d2c7e35ecf2d83e4b2ecf131cbdc809b011b326ab6deee2ae96ef9333f36",
                "search_space": "d13bfad984f2f7dfd867c45f3a905c59898f32fc0742b9baa7afde9c5c7f72dd"}


def old_store_designs():
    return metasim.design_grid("laser", peaks_nm={"R": [630, 645], "G": [532], "B": [465]},
                               fwhm_nm={"R": [1.0], "G": [1.0], "B": [1.0]})


def old_store_viewers():
    return metasim.observer_population(4, seed=5, age_years=(20, 70))


def test_grid_and_search_coordinates_name_the_primary_then_the_parameter():
    from metasim.sweep import search_space

    grid = old_store_designs()
    assert [c for c in grid.coords if grid[c].dims == ("design",) and c != "design"] == [
        "R_peak_nm", "G_peak_nm", "B_peak_nm", "R_fwhm_nm", "G_fwhm_nm", "B_fwhm_nm"]
    assert grid["R_fwhm_nm"].attrs == {"units": "nm", "long_name": "linewidth of primary R"}
    space = search_space("laser", {"R": {"peak_nm": [615, 660], "fwhm_nm": [1.0, 3.0], "relative_power": [0.5, 2.0]},
                                   "G": {"peak_nm": 532}, "B": {"peak_nm": 465}})
    designs = space.designs([[630, 1.5, 1.0]])
    assert [name for name, _, _ in space.parameters] == ["R_peak_nm", "R_fwhm_nm", "R_relative_power"]
    assert designs["R_relative_power"].attrs["long_name"] == "relative power before calibration of primary R"
    with pytest.warns(RenamedWarning, match="primary 'R' parameter 'power' is renamed 'relative_power'"):
        old = search_space("laser", {"R": {"peak_nm": [615, 660], "width_nm": [1.0, 3.0], "power": [0.5, 2.0]},
                                     "G": {"peak_nm": 532}, "B": {"peak_nm": 465}})
    assert old.describe() == space.describe() and old.parameters == space.parameters
    with pytest.raises(metasim.errors.SweepError, match="both 'width_nm' and 'fwhm_nm' given"):
        search_space("laser", {"R": {"peak_nm": 630, "width_nm": 1.0, "fwhm_nm": 2.0}, "G": {"peak_nm": 532},
                               "B": {"peak_nm": 465}})


def test_stores_begun_before_the_rename_keep_their_spec_hash():
    """The spec hash reads design coordinates under their first names, so a store begun by 0.1.0
    resumes: the hashes below were computed by metasim 0.1.0 for the same inputs."""
    from metasim.sweep import search_space, spec_hash

    shared = metasim.design_grid("laser", peaks_nm={"R": [630, 645], "G": [532], "B": [465]}, fwhm_nm=[1.0, 2.0],
                                 lazy=True)
    space = search_space("laser", {"R": {"peak_nm": [615, 660], "fwhm_nm": [1.0, 3.0], "relative_power": [0.5, 2.0]},
                                   "G": {"peak_nm": 532}, "B": {"peak_nm": 465}})
    generation = space.designs([[630, 1.5, 1.0], [640, 2.0, 1.5]])
    assert spec_hash(shared) == HASHES_0_1_0["shared_lazy_grid"]
    assert spec_hash(hashed_designs(generation)) == HASHES_0_1_0["search_generation_designs"]
    assert spec_hash(space.describe()) == HASHES_0_1_0["search_space"]
    # the whole grid as an array hashes like the lazy grid
    assert spec_hash(hashed_designs(shared.block(0, shared.count))) == HASHES_0_1_0["shared_lazy_grid"]


def test_a_sweep_store_begun_before_the_rename_resumes_under_the_new_names(tmp_path, monitor, stimuli):
    import json
    import shutil

    from metasim.sweep import run_sweep
    from metasim.sweep.store import file_checksum

    store = shutil.copytree(OLD_STORE, tmp_path / "store")
    before = json.loads((store / "manifest.json").read_text())
    kept = file_checksum(store / "chunk-00000.nc")
    with pytest.warns(RenamedWarning, match="'peak_nm_R' is read as 'R_peak_nm'"):
        resumed = run_sweep(old_store_designs(), monitor, old_store_viewers(), stimuli, store=store, chunk_size=1,
                            scheduler="serial").load()
    after = json.loads((store / "manifest.json").read_text())
    assert after["spec_hash"] == before["spec_hash"]  # the same sweep: not refused, not started afresh
    assert file_checksum(store / "chunk-00000.nc") == kept  # the chunk 0.1.0 computed is kept, not redone
    assert after["spec"]["parameters"] == ["R_peak_nm", "G_peak_nm", "B_peak_nm", "R_fwhm_nm", "G_fwhm_nm",
                                           "B_fwhm_nm"]
    fresh = run_sweep(old_store_designs(), monitor, old_store_viewers(), stimuli, store=tmp_path / "fresh",
                      chunk_size=1, scheduler="serial").load()
    assert set(resumed.coords) == set(fresh.coords) and "peak_nm_R" not in resumed.coords
    for name in fresh.data_vars:
        if fresh[name].dtype.kind == "f":
            np.testing.assert_allclose(resumed[name].values, fresh[name].values, rtol=0, atol=1e-12, err_msg=name)
        else:
            np.testing.assert_array_equal(resumed[name].values, fresh[name].values, err_msg=name)


def test_a_sweep_file_written_before_the_rename_opens_under_the_new_names(tmp_path, monitor, stimuli):
    from metasim import plots
    from metasim.sweep import run_sweep
    from metasim.sweep.store import open_sweep

    result = run_sweep(old_store_designs(), monitor, old_store_viewers(), stimuli, store=tmp_path / "store",
                       chunk_size=2, scheduler="serial").load()
    first = {new: first_design_coordinate(new) for new in result.coords if first_design_coordinate(new) != new}
    assert first == {"R_peak_nm": "peak_nm_R", "G_peak_nm": "peak_nm_G", "B_peak_nm": "peak_nm_B",
                     "R_fwhm_nm": "width_nm_R", "G_fwhm_nm": "width_nm_G", "B_fwhm_nm": "width_nm_B"}
    old = result.rename(first)
    old.attrs["spec"] = {**result.attrs["spec"], "parameters": [first[n] for n in result.attrs["spec"]["parameters"]]}
    old.attrs["edge_warnings"] = "the best design has peak_nm_R = 645 nm, the upper end of the swept range"
    path = metasim.save_dataset(old, tmp_path / "old-sweep.nc")
    for read in (metasim.load_dataset, open_sweep):
        with pytest.warns(RenamedWarning, match="'width_nm_R' is read as 'R_fwhm_nm'"):
            back = read(path)
        assert set(back.coords) == set(result.coords)
        assert back.attrs["spec"]["parameters"] == result.attrs["spec"]["parameters"]
        np.testing.assert_array_equal(back["R_peak_nm"].values, [630.0, 645.0])
    assert plots.edge_messages(back) == ["the best design has red laser peak = 645 nm, the upper end of the swept range"]
    # a design list keeps the names its author gave, old-looking or not
    listed = metasim.sweep.design_list([old_store_designs().isel(design=0).drop_vars(list(first))] * 2,
                                       peak_nm_R=[630.0, 631.0])
    assert "peak_nm_R" in hashed_designs(listed).coords
