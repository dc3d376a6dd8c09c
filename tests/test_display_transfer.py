"""Transfer functions pinned to colour-science's implementations of the standards."""

import numpy as np
import pytest
import xarray as xr

from metasim.display import eotf, eotf_inverse
from metasim.errors import DisplayError

colour = pytest.importorskip("colour")
models = colour.models

V = xr.DataArray(np.linspace(0.0, 1.0, 1001), dims=("stimulus",))
RGB = xr.DataArray(np.random.default_rng(7).random((200, 3)), dims=("stimulus", "primary"))


def test_srgb():
    np.testing.assert_allclose(eotf(V, "srgb", peak_luminance=1).values, models.eotf_sRGB(V.values), atol=1e-9)  # IEC 61966-2-1 (colour-science)
    ours = eotf_inverse(V, "srgb", peak_luminance=1).values
    np.testing.assert_allclose(ours, models.eotf_inverse_sRGB(V.values), atol=1e-9)  # IEC 61966-2-1 (colour-science)
    assert eotf(V, "srgb", peak_luminance=80).attrs["units"] == "cd m-2"


@pytest.mark.parametrize("black", [0.0, 0.1])
def test_bt1886(black):
    np.testing.assert_allclose(eotf(V, "bt1886", peak_luminance=100, black_luminance=black).values,
                               models.eotf_BT1886(V.values, black, 100), atol=1e-9)  # ITU-R BT.1886 (colour-science)
    light = V * 100
    np.testing.assert_allclose(eotf_inverse(light, "bt1886", peak_luminance=100, black_luminance=black).values,
                               models.eotf_inverse_BT1886(light.values, black, 100), atol=1e-9)  # ITU-R BT.1886 (colour-science)


def test_pq():
    np.testing.assert_allclose(eotf(V, "pq").values / 10000, models.eotf_ST2084(V.values) / 10000, atol=1e-9)  # SMPTE ST 2084 (colour-science)
    light = V * 10000
    ours = eotf_inverse(light, "pq").values
    np.testing.assert_allclose(ours, models.eotf_inverse_ST2084(light.values), atol=1e-9)  # SMPTE ST 2084 (colour-science)


@pytest.mark.parametrize("black, peak", [(0.0, 1000.0), (0.01, 1000.0), (0.005, 600.0)])
def test_hlg(black, peak):
    ref = models.eotf_BT2100_HLG(RGB.values, black, peak)
    ours = eotf(RGB, "hlg", peak_luminance=peak, black_luminance=black)
    np.testing.assert_allclose(ours.values / peak, ref / peak, atol=1e-9)  # ITU-R BT.2100 HLG (colour-science)
    back = eotf_inverse(ours, "hlg", peak_luminance=peak, black_luminance=black)
    np.testing.assert_allclose(back.values, models.eotf_inverse_BT2100_HLG(ref, black, peak), atol=1e-9)  # ITU-R BT.2100 HLG (colour-science)


def test_gamma_and_round_trips():
    np.testing.assert_allclose(eotf(V, "gamma", gamma=2.6, peak_luminance=1).values, V.values**2.6, atol=1e-12)  # pure power law
    signal = V[1:]  # PQ maps 0 to c1^m2 ≈ 7.3e-7 on the way back (SMPTE ST 2084), so skip V = 0
    for name in ("srgb", "gamma", "linear", "bt1886", "pq"):
        np.testing.assert_allclose(eotf_inverse(eotf(signal, name), name).values, signal.values, atol=1e-9)


def test_unknown_transfer_function():
    with pytest.raises(DisplayError, match="'sRGB2' is not known; allowed: srgb"):
        eotf(V, "sRGB2")
    with pytest.raises(DisplayError, match="needs luminance_weights"):
        eotf(xr.DataArray(np.ones((2, 4)), dims=("stimulus", "primary")), "hlg")


@pytest.mark.parametrize("transfer", ["srgb", "gamma", "linear", "bt1886", "pq", "hlg"])
def test_numpy_twins_equal_the_labelled_functions(transfer):
    from metasim.display.transfer import eotf_inverse_values, eotf_values

    peak, black, gamma = (400.0, 0.05, 2.4)
    weights = np.array([0.3, 0.6, 0.1])
    kwargs = {"peak_luminance": peak, "black_luminance": black, "gamma": gamma}
    if transfer == "hlg":
        kwargs["luminance_weights"] = weights
    signal = RGB.assign_coords(primary=["R", "G", "B"])
    twin = eotf_values(signal.values, transfer, peak, black, gamma, weights if transfer == "hlg" else None)
    np.testing.assert_array_equal(twin, eotf(signal, transfer, **kwargs).values)  # same formulas (internal, no source)
    light = eotf(signal, transfer, **kwargs)
    twin = eotf_inverse_values(light.values, transfer, peak, black, gamma, weights if transfer == "hlg" else None)
    np.testing.assert_array_equal(twin, eotf_inverse(light, transfer, **kwargs).values)  # same formulas (internal, no source)
