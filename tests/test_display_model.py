"""Display model and white calibration: the BT.709 matrix, Dataset round trip, bad input."""

import numpy as np
import pytest
import xarray as xr

from metasim import emitters
from metasim.colorimetry import tristimulus, xyz_to_xy
from metasim.display import Display, calibrate_white, make_display, stack_designs
from metasim.errors import DisplayError, SpectrumError
from metasim.observers import standard_observer

WL = np.arange(360.0, 831.0)
LINES_NM = (460.0, 530.0, 640.0)
BT709_XY = ((0.64, 0.33), (0.30, 0.60), (0.15, 0.06))


def _lines_mixed_to(xy_targets, obs):
    """Primaries made of three narrow laser lines mixed to hit given chromaticities exactly."""
    lines = emitters.laser_line(list(LINES_NM), 1.0, WL)
    basis = tristimulus(lines, obs, scale="none").transpose("xyz", "primary").values
    rows = []
    for x, y in xy_targets:
        weights = np.linalg.solve(basis, np.array([x / y, 1.0, (1 - x - y) / y]))
        assert (weights >= 0).all()
        rows.append(weights @ lines.values)
    return xr.DataArray(np.array(rows), dims=("primary", "wavelength"),
                        coords={"primary": ["R", "G", "B"], "wavelength": WL}, attrs={"units": "W sr-1 m-2 nm-1"})


@pytest.fixture(scope="module")
def cie1931():
    return standard_observer("cie1931_2", WL)


def test_bt709_display_reproduces_iec_matrix(cie1931):
    colour = pytest.importorskip("colour")
    display = calibrate_white(make_display(_lines_mixed_to(BT709_XY, cie1931)), cie1931, white="D65", luminance=1.0)
    matrix = display.primary_tristimulus(cie1931).transpose("xyz", "primary").values
    reference = colour.RGB_COLOURSPACES["sRGB"].matrix_RGB_to_XYZ
    np.testing.assert_allclose(matrix, reference, atol=1e-3)  # IEC 61966-2-1:1999 matrix (colour-science)
    assert display.attrs["calibration_observer"] == "cie1931_2"


def test_calibration_hits_white_for_any_observer():
    obs = standard_observer("cie2015_10", np.arange(390.0, 831.0))
    spectra = emitters.stack_primaries(emitters.quantum_dot([625, 530], 30), emitters.ohno_led(455, 12),
                                       emitters.laser_line(495, 1))
    display = calibrate_white(make_display(spectra), obs, white=(0.3127, 0.3290), luminance=250.0)
    white = display.white_tristimulus(obs)
    np.testing.assert_allclose(xyz_to_xy(white).values, [0.3127, 0.3290], atol=1e-9)
    assert float(white.sel(xyz="Y")) == pytest.approx(250.0, rel=1e-9)
    assert float(display.peak_luminance) == pytest.approx(250.0)
    assert (display.to_dataset()["primary_gain"] > 0).all()


def test_dataset_round_trip_and_designs(tmp_path):
    designs = [make_display(emitters.laser_line([455 + i, 532, 638], 1.0), transfer="pq", name=f"d{i}")
               for i in range(3)]
    stacked = calibrate_white(stack_designs(designs, design=[0, 1, 2]), "cie1931_2", luminance=1000.0)
    assert stacked.batch_dims == ["design"]
    ds = stacked.to_dataset()
    for name in ("spectra", "black", "peak_luminance", "primary_gain"):
        assert "units" in ds[name].attrs and "long_name" in ds[name].attrs
    path = tmp_path / "display.nc"
    ds.to_netcdf(path)
    back = Display.from_dataset(xr.load_dataset(path))
    xr.testing.assert_allclose(back.spectra, stacked.spectra)
    assert back.transfer == "pq" and back.primaries == stacked.primaries
    one = calibrate_white(designs[1], "cie1931_2", luminance=1000.0)
    np.testing.assert_allclose(back.spectra.sel(design=1).values, one.spectra.values, rtol=1e-12)


def test_render_is_additive_and_refuses_bad_drives():
    display = make_display(emitters.gaussian([450, 540, 620], 25), black=emitters.gaussian(550, 150).isel(primary=0) * 1e-3)
    drive = xr.DataArray([[0.2, 0.5, 1.0]], dims=("stimulus", "primary"))
    out = display.render(drive)
    expected = display.black + (drive.isel(stimulus=0).values[:, None] * display.spectra.values).sum(0)
    np.testing.assert_allclose(out.isel(stimulus=0).values, expected.values)  # additivity (Berns 1996 display model)
    with pytest.raises(DisplayError, match="drive value 1.2 is outside the allowed range 0..1"):
        display.render(xr.DataArray([0.2, 1.2, 0.0], dims=("primary",)))
    with pytest.raises(DisplayError, match="-0.1 is outside"):
        display.render(xr.DataArray([0.2, -0.1, 0.0], dims=("primary",)))


def test_observed_xyz_equals_colour_science_on_the_rendered_spectra():
    import colour

    import metasim

    display = make_display(emitters.gaussian([450, 540, 620], 25),
                           black=emitters.gaussian(550, 150).isel(primary=0) * 1e-3, name="three LEDs")
    designs = stack_designs([display, make_display(emitters.laser_line([455, 532, 638], 2.0))], design=[0, 1])
    observers = metasim.observer_population(3, seed=7, age_years=(25, 70))
    rng = np.random.default_rng(2)
    drive = xr.DataArray(rng.uniform(0, 1, (4, 3)), dims=("stimulus", "primary"),
                         coords={"stimulus": list("abcd"), "primary": designs.primaries})
    seen = designs.observed_xyz(drive, observers)
    assert seen.dims == ("design", "observer", "stimulus", "xyz") and seen.attrs["units"] == "cd m-2"
    wl = observers.wavelength.values
    for design in (0, 1):
        spectra = designs.spectra.sel(design=design)
        black = designs.black.sel(design=design) if "design" in designs.black.dims else designs.black
        for o in range(3):
            cmfs = colour.MultiSpectralDistributions(observers["cmf"].isel(observer=o).transpose("wavelength", "xyz")
                                                     .values, wl)
            for s in range(4):
                radiance = black.values + drive.values[s] @ spectra.values
                expected = colour.sd_to_XYZ(colour.SpectralDistribution(radiance, wl), cmfs, method="Integration",
                                            k=683.0, shape=colour.SpectralShape(wl[0], wl[-1], 1))
                # colour-science's sd_to_XYZ ("Integration", k = 683 lm/W) of the rendered spectrum
                np.testing.assert_allclose(seen.sel(design=design).isel(observer=o, stimulus=s).values, expected,
                                           rtol=1e-10)
    one = display.observed_xyz(drive.isel(stimulus=0), "cie1931_2")  # one observer, one stimulus
    assert one.dims == ("xyz",)
    with pytest.raises(DisplayError, match="outside the allowed range"):
        display.observed_xyz(drive + 1.0, observers)


def test_bad_displays():
    good = emitters.gaussian([450, 540, 620], 25)
    with pytest.raises(DisplayError, match="at least 3 primaries"):
        make_display(good.isel(primary=[0, 1]))
    with pytest.raises(DisplayError, match="same spectral shape"):
        make_display(emitters.stack_primaries(good, (good.isel(primary=[1]) * 2).assign_coords(primary=["copy"])))
    pair = emitters.laser_line([460, 620], 1)
    mixture = (pair.sum("primary") * 0.5).expand_dims(primary=["mix"])  # lies on the line between the two
    collinear = emitters.stack_primaries(pair, mixture.assign_attrs(units=pair.attrs["units"]))
    with pytest.raises(DisplayError, match="collinear"):
        make_display(collinear)
    with pytest.raises(SpectrumError, match="negative value"):
        make_display(good * xr.DataArray([1, -1, 1], dims="primary"))
    with pytest.raises(DisplayError, match="'hdr10' is not known; allowed: srgb"):
        make_display(good, transfer="hdr10")
    with pytest.raises(DisplayError, match="cannot be reached"):
        calibrate_white(make_display(emitters.gaussian([450, 500, 540], 20)), "cie1931_2", white=(0.45, 0.41))
