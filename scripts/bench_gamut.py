"""Benchmark: CIELAB volume of a colour solid to 0.1 %, metasim against Monte Carlo with colour-science.

Two cases, each measured side by side in this one run:

1. A 4-primary solid (laser lines at 635, 532, 465 nm plus a 495 nm cyan, CIE 1931 2° observer,
   white = sum of the primaries). colour-science has no volume function for N > 3 primaries, so its
   side is the straightforward Monte Carlo built from its primitives: uniform CIELAB points in a box
   around the solid, ``colour.Lab_to_XYZ``, and the hit test ``colour.volume.is_within_mesh_volume``
   against the solid's vertices in XYZ (all 2^N on/off drive combinations; the solid is convex in
   XYZ, so the Delaunay test of its vertices is exact membership).
2. The BT.2020 solid with colour-science's own ``colour.volume.RGB_colourspace_volume_MonteCarlo``.

Equal precision: metasim refines until its volume changes by <= 0.1 %; the Monte Carlo gets the
sample count whose standard error is 0.1 %, n = (1 − p) / (p · 0.001²), p = hit share of the box
(from a pilot run). Both results are compared with a metasim run refined to 1e-7.

Run: ``python scripts/bench_gamut.py``
"""

from __future__ import annotations

import itertools
import time
import warnings

import numpy as np
import xarray as xr

warnings.filterwarnings("ignore", module="colour")

import colour  # noqa: E402

import metasim  # noqa: E402
from metasim.gamut import candidate_spectra, lab_gamut_volume, reference_xyz  # noqa: E402

PRECISION = 1e-3
SEED = 20261202


def best_time(function, repeats: int = 5):
    function()  # warm-up (imports, caches)
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        value = function()
        times.append(time.perf_counter() - start)
    return min(times), value


def lab_box(primaries: np.ndarray, white: np.ndarray, rng) -> np.ndarray:
    """A box around the CIELAB solid: extremes of many drive combinations, 3 % margin."""
    drives = rng.random((200_000, primaries.shape[0]))
    drives = np.where(rng.random(drives.shape) < 0.5, np.round(drives), drives)  # many surface points
    lab = colour.XYZ_to_Lab(drives @ primaries / white[1], colour.XYZ_to_xy(white))
    lo, hi = lab.min(axis=0), lab.max(axis=0)
    margin = 0.03 * (hi - lo)
    return np.stack([np.maximum(lo - margin, [0, -np.inf, -np.inf]), np.minimum(hi + margin, [100, np.inf, np.inf])], 1)


def monte_carlo_volume(primaries: np.ndarray, white: np.ndarray, box: np.ndarray, samples: int, rng) -> float:
    """Monte Carlo CIELAB volume with colour-science primitives (Lab_to_XYZ, is_within_mesh_volume)."""
    vertices = np.array(list(itertools.product([0.0, 1.0], repeat=primaries.shape[0]))) @ primaries / white[1]
    white_xy = colour.XYZ_to_xy(white)
    inside = 0
    for start in range(0, samples, 1_000_000):
        count = min(1_000_000, samples - start)
        lab = box[:, 0] + (box[:, 1] - box[:, 0]) * rng.random((count, 3))
        inside += int(colour.volume.is_within_mesh_volume(colour.Lab_to_XYZ(lab, white_xy), vertices).sum())
    return float(np.prod(box[:, 1] - box[:, 0]) * inside / samples)


def samples_for(share: float) -> int:
    return int(np.ceil((1.0 - share) / (share * PRECISION**2)))


def report(title, ours_time, ours, mc_time, mc, samples, truth):
    print(f"\n{title}")
    print(f"  reference (metasim, rtol 1e-7): {truth:,.0f} CIELAB units^3")
    print(f"  metasim   rtol 0.1 %          : {ours:,.0f}  error {100 * (ours / truth - 1):+.3f} %  "
          f"time {1e3 * ours_time:8.1f} ms")
    print(f"  Monte Carlo, {samples:,} samples : {mc:,.0f}  error {100 * (mc / truth - 1):+.3f} %  "
          f"time {1e3 * mc_time:8.1f} ms")
    print(f"  ratio (Monte Carlo / metasim) : {mc_time / ours_time:.1f}x")


def main() -> None:
    rng = np.random.default_rng(SEED)
    observer = metasim.standard_observer("cie1931_2")
    spectra = candidate_spectra([635.0, 532.0, 465.0, 495.0], observer.cmf.wavelength)
    spectra = spectra.rename(peak_wavelength="primary").assign_coords(primary=["R", "G", "B", "C"])
    spectra = spectra * xr.DataArray([1.0, 0.35, 1.2, 0.4], dims="primary", coords={"primary": ["R", "G", "B", "C"]})
    xyz = metasim.tristimulus(spectra, observer, scale="none")
    p4 = xyz.transpose("primary", "xyz").values
    white = p4.sum(axis=0)

    truth = float(lab_gamut_volume(xyz, rtol=1e-7))
    ours_time, ours = best_time(lambda: float(lab_gamut_volume(xyz, rtol=PRECISION)))
    box = lab_box(p4, white, rng)
    pilot = monte_carlo_volume(p4, white, box, 200_000, rng)
    samples = samples_for(pilot / np.prod(box[:, 1] - box[:, 0]))
    start = time.perf_counter()
    mc = monte_carlo_volume(p4, white, box, samples, rng)
    mc_time = time.perf_counter() - start
    report("4 primaries (lasers 635/532/465/495 nm, CIE 1931 2°)", ours_time, ours, mc_time, mc, samples, truth)

    bt2020 = colour.RGB_COLOURSPACES["ITU-R BT.2020"]
    p3 = reference_xyz("bt2020")
    truth3 = float(lab_gamut_volume(p3, rtol=1e-7))
    ours3_time, ours3 = best_time(lambda: float(lab_gamut_volume(p3, rtol=PRECISION)))
    limits = lab_box(p3.values, p3.values.sum(axis=0), rng)
    share = truth3 / np.prod(limits[:, 1] - limits[:, 0])
    samples3 = samples_for(share)
    start = time.perf_counter()
    mc3 = colour.volume.RGB_colourspace_volume_MonteCarlo(bt2020, samples=samples3, limits=limits)
    mc3_time = time.perf_counter() - start
    report("3 primaries (ITU-R BT.2020), colour.volume.RGB_colourspace_volume_MonteCarlo",
           ours3_time, ours3, mc3_time, mc3, samples3, truth3)


if __name__ == "__main__":
    main()
