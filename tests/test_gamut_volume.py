"""CIELAB volume of N-primary colour solids, coverage volume, and the zonotope construction."""

import itertools

import numpy as np
import pytest
import xarray as xr
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from metasim.gamut import lab_coverage_volume, lab_gamut_volume, reference_xyz
from metasim.gamut.volume import zonotope_faces


def xyz_primaries(values, design=None):
    values = np.asarray(values, dtype=float)
    dims = ("primary", "xyz") if design is None else ("design", "primary", "xyz")
    coords = {"xyz": ["X", "Y", "Z"]}
    if design is not None:
        coords["design"] = design
    return xr.DataArray(values, dims=dims, coords=coords, attrs={"units": "1", "long_name": "tristimulus values"})


def zonotope_volume_from_faces(p):
    origin, first, second = zonotope_faces(p[None])
    return float(np.einsum("mfc,mfc->", origin, np.cross(first, second)) / 3.0)


def zonotope_volume_formula(p):
    """Σ |det(Pi, Pj, Pk)| over triples (Shephard 1974; McMullen 1971)."""
    return sum(abs(np.linalg.det(p[list(t)])) for t in itertools.combinations(range(len(p)), 3))


@pytest.mark.parametrize("case", ["generic", "repeated", "coplanar", "scaled copy"])
def test_zonotope_faces_close_the_solid(case, rng):
    p = reference_xyz("bt709").values
    extra = {
        "generic": rng.random((2, 3)),
        "repeated": p[[0]],
        "coplanar": 0.3 * p[[1]] + 0.4 * p[[2]],
        "scaled copy": 0.5 * p[[0]],
    }[case]
    q = np.vstack([p, extra])
    # divergence theorem on the face tiling in XYZ = the zonotope volume formula (Shephard 1974)
    assert zonotope_volume_from_faces(q) == pytest.approx(zonotope_volume_formula(q), rel=1e-9)


def test_srgb_volume_matches_colour_science_monte_carlo():
    import colour
    from colour.utilities import disable_multiprocessing

    srgb = colour.RGB_COLOURSPACES["sRGB"]
    ours = float(lab_gamut_volume(xyz_primaries(np.asarray(srgb.matrix_RGB_to_XYZ).T)))
    limits = np.array([[0, 100], [-90, 100], [-110, 100]])  # encloses the sRGB solid
    with disable_multiprocessing():
        theirs = colour.volume.RGB_colourspace_volume_MonteCarlo(
            srgb, samples=600_000, limits=limits, random_state=np.random.RandomState(17))
    assert ours == pytest.approx(theirs, rel=1e-2)  # colour-science RGB_colourspace_volume_MonteCarlo (~0.25 % noise)


def test_volume_converges_and_carries_labels():
    bt709 = reference_xyz("bt709")
    coarse = lab_gamut_volume(bt709, rtol=1e-3)
    fine = lab_gamut_volume(bt709, rtol=1e-6)
    assert float(coarse) == pytest.approx(float(fine), rel=1e-3)  # refinement claim, no source
    assert float(coarse.volume_change) <= 1e-3
    assert coarse.attrs["units"] and coarse.attrs["long_name"]


def test_volume_vectorised_over_designs(rng):
    base = reference_xyz("bt709").values
    designs = np.stack([np.vstack([base, 0.4 * rng.random((1, 3))]) for _ in range(4)])
    many = lab_gamut_volume(xyz_primaries(designs, design=list("abcd")))
    for k, name in enumerate("abcd"):
        one = float(lab_gamut_volume(xyz_primaries(designs[k])))
        assert float(many.sel(design=name)) == pytest.approx(one, rel=1e-12)


def test_volume_is_invariant_to_the_luminance_scale():
    bt2020 = reference_xyz("bt2020")
    brighter = float(lab_gamut_volume(bt2020 * 350.0))
    assert brighter == pytest.approx(float(lab_gamut_volume(bt2020)), rel=1e-9)  # CIE 15:2004: CIELAB is relative to the white


@settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.floats(0.02, 1.0), min_size=3, max_size=3), st.lists(st.floats(0.0, 1.0), min_size=3, max_size=3))
def test_adding_a_primary_never_reduces_area_or_volume(weights, extra):
    from metasim.gamut import chromaticity_gamut

    base = reference_xyz("display_p3").values * np.asarray(weights)[:, None]
    grown = np.vstack([base, np.asarray(extra)[None] * 0.5 + 1e-3])
    white = xr.DataArray(base.sum(axis=0), dims="xyz", coords={"xyz": ["X", "Y", "Z"]})
    a0 = float(chromaticity_gamut(xyz_primaries(base)).area)
    a1 = float(chromaticity_gamut(xyz_primaries(grown)).area)
    assert a1 >= a0 - 1e-15  # geometry: the hull of a superset contains the hull
    v0 = float(lab_gamut_volume(xyz_primaries(base), white=white, rtol=1e-4))
    v1 = float(lab_gamut_volume(xyz_primaries(grown), white=white, rtol=1e-4))
    assert v1 >= v0 * (1 - 1e-4)  # Z + [0, P] contains Z with the white fixed; to the refinement accuracy


def test_bt2020_solid_covers_all_of_bt709():
    result = lab_coverage_volume(reference_xyz("bt2020"), "bt709")
    assert float(result.coverage) == pytest.approx(1.0, abs=2e-3)  # ITU-R BT.2020-2 ⊃ BT.709-6 (matrix 709→2020 ≥ 0)


def test_coverage_volume_agrees_with_monte_carlo(rng):
    """Share of the BT.2020 solid a 4-primary design covers, against sampling CIELAB directly."""
    import colour

    base = reference_xyz("display_p3").values
    design = np.vstack([base * [[0.9], [0.8], [1.0]], [[0.10, 0.25, 0.30]]])
    white = design.sum(axis=0)
    result = lab_coverage_volume(xyz_primaries(design), "bt2020")
    ref = reference_xyz("bt2020").values * white[1]
    # Monte Carlo: uniform CIELAB points, back to XYZ (colour-science Lab_to_XYZ), membership of each
    # solid by solving for drives (3 primaries: one inverse; 4 primaries: the zonotope's half-spaces)
    n = 800_000
    lab = np.array([0, -150, -150]) + np.array([110, 300, 300]) * rng.random((n, 3))
    xyz = colour.Lab_to_XYZ(lab, colour.XYZ_to_xy(white)) * white[1]
    drives = xyz @ np.linalg.inv(ref)
    in_ref = ((drives >= 0) & (drives <= 1)).all(axis=1)
    from metasim.gamut.coverage_volume import zonotope_halfspaces

    a, b = zonotope_halfspaces(design)
    in_design = (xyz @ a.T <= b).all(axis=1)
    expected = (in_ref & in_design).sum() / in_ref.sum()
    assert float(result.coverage) == pytest.approx(expected, abs=5e-3)  # independent Monte Carlo, 0.5 %
    box = 110 * 300 * 300
    assert float(result.reference_volume) == pytest.approx(box * in_ref.mean(), rel=1e-2)  # same sampling
