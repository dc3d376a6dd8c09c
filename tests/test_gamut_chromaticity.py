"""Chromaticity gamut: hull, area, coverage of reference gamuts, spectrum locus, per-observer gamut."""

import numpy as np
import pytest
import xarray as xr

import metasim
from metasim import emitters
from metasim.gamut import (
    candidate_spectra,
    chromaticity_gamut,
    gamut_coverage,
    spectrum_locus_coverage,
    observer_gamut,
    spectrum_locus,
)

BT709_XY = [(0.64, 0.33), (0.30, 0.60), (0.15, 0.06)]  # ITU-R BT.709-6, table 1 item 1.2


def xy_primaries(points, design=None):
    values = np.asarray(points, dtype=float)
    if design is None:
        dims, coords = ("primary", "chromaticity"), {}
    else:
        dims, coords = ("design", "primary", "chromaticity"), {"design": design}
    coords["chromaticity"] = ["x", "y"]
    return xr.DataArray(values, dims=dims, coords=coords, attrs={"units": "1", "long_name": "xy"})


def triangle_area(a, b, c):
    return 0.5 * abs((b[0] - a[0]) * (c[1] - a[1]) - (c[0] - a[0]) * (b[1] - a[1]))


def inside_polygon(px, py, vertices):
    """Even-odd ray casting (independent of the hull code under test)."""
    inside = np.zeros(px.shape, dtype=bool)
    n = len(vertices)
    for k in range(n):
        x0, y0 = vertices[k]
        x1, y1 = vertices[(k + 1) % n]
        crosses = (y0 > py) != (y1 > py)
        with np.errstate(divide="ignore", invalid="ignore"):
            x_at = x0 + (py - y0) * (x1 - x0) / (y1 - y0)
        inside ^= crosses & (px < x_at)
    return inside


def test_bt709_area_is_the_triangle_of_its_primaries():
    gamut = chromaticity_gamut(xy_primaries(BT709_XY))
    assert abs(float(gamut.area) - triangle_area(*BT709_XY)) < 1e-9  # ITU-R BT.709-6 primaries
    assert abs(float(chromaticity_gamut("bt709").area) - triangle_area(*BT709_XY)) < 1e-9  # ITU-R BT.709-6
    assert gamut.area.attrs["units"] == "1" and "long_name" in gamut.polygon.attrs


def test_bt2020_covers_all_of_bt709():
    assert float(gamut_coverage("bt2020", "bt709")) == pytest.approx(1.0, abs=1e-12)  # ITU-R BT.2020-2 ⊃ BT.709-6
    assert float(gamut_coverage("bt2020", "bt709", space="uv")) == pytest.approx(1.0, abs=1e-12)  # same, u'v'
    assert float(gamut_coverage("bt709", "bt709")) == pytest.approx(1.0, abs=1e-12)  # identity, geometry


@pytest.mark.parametrize("space", ["xy", "uv"])
def test_coverage_agrees_with_point_in_polygon_monte_carlo(space, rng):
    designs = xy_primaries(
        [[(0.69, 0.30), (0.20, 0.72), (0.16, 0.02)], [(0.66, 0.34), (0.33, 0.55), (0.12, 0.10)]],
        design=["wide", "narrow"],
    )
    four = xy_primaries([(0.70, 0.29), (0.26, 0.68), (0.08, 0.50), (0.15, 0.05)])
    for design, reference in ((designs, "bt709"), (designs, "display_p3"), (four, "bt2020")):
        share = gamut_coverage(design, reference, space=space)
        gamut_d = chromaticity_gamut(design, space)
        gamut_r = chromaticity_gamut(reference, space)
        ref_poly = gamut_r.polygon.values
        lo, hi = ref_poly.min(axis=0), ref_poly.max(axis=0)
        points = lo + (hi - lo) * rng.random((300_000, 2))
        in_ref = inside_polygon(points[:, 0], points[:, 1], ref_poly)
        polys = gamut_d.polygon.values.reshape(-1, gamut_d.sizes["vertex"], 2)
        for k, poly in enumerate(polys):
            poly = poly[np.isfinite(poly).all(axis=1)]
            in_both = in_ref & inside_polygon(points[:, 0], points[:, 1], poly)
            expected = in_both.sum() / in_ref.sum()
            got = float(np.ravel(share.values)[k])
            assert got == pytest.approx(expected, rel=5e-3)  # independent Monte Carlo (ray casting), 0.5 %


def test_hull_area_matches_qhull_for_random_points(rng):
    from scipy.spatial import ConvexHull

    points = rng.random((40, 7, 2))
    gamut = chromaticity_gamut(xy_primaries(points, design=np.arange(40)))
    expected = [ConvexHull(p).volume for p in points]  # Qhull (scipy): 2-D "volume" is the area
    np.testing.assert_allclose(gamut.area.values, expected, rtol=1e-12)  # Qhull via scipy ConvexHull
    assert ((gamut.vertex_primary >= 0).sum("vertex") == gamut.on_hull.sum("primary")).all()


def test_extra_primary_inside_adds_exactly_zero_area():
    inside = BT709_XY + [(0.3127, 0.3290)]  # D65 white point lies inside (CIE 15:2004)
    base = float(chromaticity_gamut(xy_primaries(BT709_XY)).area)
    grown = chromaticity_gamut(xy_primaries(inside))
    assert float(grown.area) == base  # geometry: an interior point is not a hull vertex
    assert not bool(grown.on_hull.values[3])


def test_extra_primary_outside_adds_exactly_its_new_triangle():
    cyan = (0.12, 0.40)  # beyond the green-blue edge only
    base = float(chromaticity_gamut(xy_primaries(BT709_XY)).area)
    grown = float(chromaticity_gamut(xy_primaries(BT709_XY + [cyan])).area)
    new_triangle = triangle_area(BT709_XY[1], BT709_XY[2], cyan)
    assert grown - base == pytest.approx(new_triangle, rel=1e-12, abs=1e-15)  # geometry


def test_vectorised_over_designs_equals_one_by_one(rng):
    points = 0.1 + 0.6 * rng.random((6, 4, 2))
    many = chromaticity_gamut(xy_primaries(points, design=np.arange(6)))
    cover = gamut_coverage(xy_primaries(points, design=np.arange(6)), "bt709")
    for k in range(6):
        one = chromaticity_gamut(xy_primaries(points[k]))
        assert float(many.area[k]) == pytest.approx(float(one.area), rel=1e-12)
        assert float(cover[k]) == pytest.approx(float(gamut_coverage(xy_primaries(points[k]), "bt709")), rel=1e-12)


def test_spectrum_locus_and_share_for_laser_primaries():
    wl = metasim.wavelength_grid(360, 830)
    observer = metasim.standard_observer("cie1931_2", wl)
    locus = spectrum_locus(observer)
    lasers = candidate_spectra([630.0, 532.0, 465.0], wl).rename(peak_wavelength="primary")
    share = float(spectrum_locus_coverage(lasers, observer))
    xy = observer.cmf.sel(wavelength=[630.0, 532.0, 465.0]).values
    xy = (xy[:2] / xy.sum(axis=0)).T
    # monochromatic primaries sit on the locus (CIE 15:2004 §7.3): share = their triangle / locus area
    assert share == pytest.approx(triangle_area(*xy) / float(locus.area), rel=1e-9)
    assert 0.33 < float(locus.area) < 0.34  # CIE 1931 locus hull area, from memory (about 0.335)


def test_observer_gamut_uses_each_observers_own_diagram():
    wl = metasim.default_grid()
    names = ["cie1931_2", "cie1964_10", "cie2015_2"]
    observers = xr.concat([metasim.standard_observer(n, wl)[["cmf"]] for n in names], dim="observer",
                          coords="minimal", compat="override").assign_coords(observer=names)
    lasers = candidate_spectra([635.0, 530.0, 455.0], wl).rename(peak_wavelength="primary")
    result = observer_gamut(lasers, observers)
    assert result.area.dims == ("observer",)
    for name in names:
        cmf = observers.cmf.sel(observer=name, wavelength=[635.0, 530.0, 455.0]).values
        xy = (cmf[:2] / cmf.sum(axis=0)).T
        assert float(result.area.sel(observer=name)) == pytest.approx(triangle_area(*xy), rel=1e-9)  # definition
        own = spectrum_locus(observers.sel(observer=name))
        assert float(result.locus_area.sel(observer=name)) == pytest.approx(float(own.area), rel=1e-12)
    assert set(result.coverage.coords["reference"].values) == {"bt709", "display_p3", "dci_p3", "bt2020"}


def test_display_like_object_is_accepted():
    wl = metasim.default_grid()
    observer = metasim.standard_observer("cie1931_2", wl)

    class Panel:
        spectra = candidate_spectra([630.0, 532.0, 465.0], wl, "gaussian", 25.0).rename(peak_wavelength="primary")

    direct = chromaticity_gamut(Panel.spectra, observer=observer)
    assert float(chromaticity_gamut(Panel(), observer=observer).area) == float(direct.area)


def test_gamut_round_trips_through_netcdf(tmp_path):
    gamut = chromaticity_gamut("display_p3", space="uv")
    path = metasim.save_dataset(gamut, tmp_path / "gamut.nc")
    back = metasim.load_dataset(path)
    xr.testing.assert_identical(back, gamut)


def test_batched_gamut_numbers_equal_the_labelled_functions():
    from metasim.gamut.chromaticity import xy_gamut_numbers

    spectra = xr.concat([emitters.laser_line([red, 532, 465], 1.0, name=["R", "G", "B"]) for red in (620, 640, 660)],
                        dim="design")
    xyz = metasim.tristimulus(spectra, metasim.standard_observer("cie1931_2"), scale="none")
    area, coverage, xy = xy_gamut_numbers(xyz.transpose("design", "primary", "xyz").values, ("bt709", "bt2020"))
    gamut = metasim.chromaticity_gamut(xyz)
    np.testing.assert_array_equal(area, gamut["area"].values)  # the labelled functions, same arithmetic
    np.testing.assert_array_equal(coverage[:, 1], metasim.gamut_coverage(gamut, "bt2020").values)
    np.testing.assert_array_equal(xy, gamut["chromaticity_of_primary"].transpose("design", "primary", "chromaticity").values)
    assert coverage[0, 0] == 1.0  # laser primaries enclose BT.709 (ITU-R BT.709-6 primaries)
