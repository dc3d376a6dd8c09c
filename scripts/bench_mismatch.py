"""Benchmark: population mismatch, metasim's engine vs the straightforward colour-science loop.

Run:  python scripts/bench_mismatch.py [--observers 1000] [--stimuli 200] [--loop-observers N]

Case: a broadband three-primary reference monitor and a four-primary laser test display, both
white-matched for the CIE 1931 observer; ``--stimuli`` random BT.709 colours; ``--observers``
CIE 170-1 individual observers aged 20-70 (seeded).

metasim, two timings: (1) one call of :func:`metasim.mismatch` — the full study (white
calibration, drive solving for both displays, every observer's XYZ, CIELAB, CIE 2000, the
metamerism index and all summaries); (2) exactly the loop's work with metasim's public functions
(``Display.observed_xyz``: both displays' primaries integrated for all observers and applied to the
same drives; ``tristimulus`` of the reference white, ``xyz_to_lab``, ``delta_e_2000``), vectorised
over observers and stimuli.

colour-science loop: per observer, build its colour-matching functions, ``sd_to_XYZ``
(method "Integration") of every primary of both displays and of the reference white, the
observer's 3 × N matrices, XYZ of every stimulus from the drives metasim solved (the drives are the
same work on both sides and are taken from metasim), ``XYZ_to_Lab`` against the observer's white,
``delta_E`` (CIE 2000). With ``--loop-observers`` < ``--observers`` the loop time is measured on
that many observers and scaled (stated in the output).
Prints both times, the ratio and the largest difference of the per-observer ΔE00. The process keeps
freed memory for reuse as the ``metasim`` command does (:mod:`metasim._memory`; it applies to both
sides); ``--default-allocator`` leaves glibc's default policy.
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np

warnings.filterwarnings("ignore")


def build_case(n_observers: int, n_stimuli: int, seed: int):
    import metasim
    from metasim import emitters
    from metasim.display import calibrate_white, make_display
    from metasim.metamerism import rgb_set

    ref = make_display(emitters.gaussian([612, 548, 455], [38, 42, 28], name=["R", "G", "B"]), name="reference monitor")
    ref = calibrate_white(ref, "cie1931_2", white="D65", luminance=100.0)
    test = make_display(emitters.laser_line([638, 532, 465, 589], 1.0, name=["R", "G", "B", "Y"]), name="laser projector")
    observers = metasim.observer_population(n_observers, seed=seed, age_years=(20, 70))
    rng = np.random.default_rng(seed)
    stimuli = rgb_set(rng.uniform(0, 1, (n_stimuli, 3)), [f"colour {i}" for i in range(n_stimuli)])
    return ref, test, observers, stimuli


def colour_loop(ref, test, observers, drive_ref, drive_test, count: int) -> np.ndarray:
    return colour_delta_e(observers, ref.spectra.transpose("primary", "wavelength").values, ref.black.values,
                          ref.white_spectrum().values, test.spectra.transpose("primary", "wavelength").values,
                          test.black.values, drive_ref, drive_test, count)


def colour_delta_e(observers, ref_primaries, ref_black, ref_white, test_primaries, test_black, drive_ref, drive_test,
                   count: int) -> np.ndarray:
    """CIE 2000 differences (count × stimuli) of the first ``count`` observers, the straightforward
    colour-science way: ``sd_to_XYZ`` per primary, black and white, XYZ of the drives, ``XYZ_to_Lab``
    against the reference white, ``delta_E``. Spectra are numpy arrays on the observers' grid."""
    import colour

    wl = observers.wavelength.values
    shape = colour.SpectralShape(wl[0], wl[-1], wl[1] - wl[0])
    cmf_all = observers["cmf"].transpose("observer", "wavelength", "xyz").values
    out = np.empty((count, drive_ref.shape[0]))
    for o in range(count):
        cmfs = colour.MultiSpectralDistributions(cmf_all[o], wl, name=f"observer {o}")

        def xyz(values):
            return colour.sd_to_XYZ(colour.SpectralDistribution(values, wl), cmfs, method="Integration",
                                    k=683.0, shape=shape)

        m_ref = np.column_stack([xyz(p) for p in ref_primaries])
        m_test = np.column_stack([xyz(p) for p in test_primaries])
        white = xyz(ref_white)
        xyz_ref = drive_ref @ m_ref.T + xyz(ref_black)
        xyz_test = drive_test @ m_test.T + xyz(test_black)
        white_xy = colour.XYZ_to_xy(white)
        lab_ref = colour.XYZ_to_Lab(xyz_ref / white[1], white_xy)
        lab_test = colour.XYZ_to_Lab(xyz_test / white[1], white_xy)
        out[o] = colour.delta_E(lab_ref, lab_test, method="CIE 2000")
    return out


def metasim_same_work(ref, test, observers, drive_ref, drive_test):
    """The loop's work with metasim's public functions, vectorised over observers and stimuli."""
    from metasim import delta_e_2000, tristimulus, xyz_to_lab

    xyz_ref = ref.observed_xyz(drive_ref, observers)  # per observer: primary matrices, then the drives
    xyz_test = test.observed_xyz(drive_test, observers)
    white = tristimulus(ref.white_spectrum(), observers)
    return delta_e_2000(xyz_to_lab(xyz_ref, white), xyz_to_lab(xyz_test, white))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--observers", type=int, default=1000)
    parser.add_argument("--stimuli", type=int, default=200)
    parser.add_argument("--loop-observers", type=int, default=None,
                        help="observers timed in the colour-science loop (default: all)")
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--seed", type=int, default=11)
    parser.add_argument("--default-allocator", action="store_true",
                        help="leave glibc's allocator policy as it is (the metasim command keeps freed memory)")
    args = parser.parse_args()

    from metasim import mismatch
    from metasim._memory import keep_freed_memory

    kept = False if args.default_allocator else keep_freed_memory()  # as the metasim command runs

    ref, test, observers, stimuli = build_case(args.observers, args.stimuli, args.seed)
    result = mismatch(ref, test, observers, stimuli)  # warm-up (compiles kernels once)
    best = float("inf")
    for _ in range(args.repeats):
        start = time.perf_counter()
        result = mismatch(ref, test, observers, stimuli)
        best = min(best, time.perf_counter() - start)

    count = args.observers if args.loop_observers is None else min(args.loop_observers, args.observers)
    # the engine white-matched the test display for CIE 1931; the loop gets the same matched display
    from metasim import standard_observer
    from metasim.colorimetry import tristimulus, xyz_to_xy
    from metasim.display import calibrate_white

    ref_white = tristimulus(ref.white_spectrum(), standard_observer("cie1931_2"))
    matched = calibrate_white(test, "cie1931_2", white=xyz_to_xy(ref_white), luminance=ref_white.sel(xyz="Y", drop=True))
    drive_ref = result["drive_reference"].transpose("stimulus", "reference_primary").values
    drive_test = result["drive_test"].transpose("stimulus", "primary").values
    same = float("inf")
    for _ in range(args.repeats):
        start = time.perf_counter()
        same_work = metasim_same_work(ref, matched, observers, result["drive_reference"].rename(reference_primary="primary"),
                                      result["drive_test"])
        same = min(same, time.perf_counter() - start)
    start = time.perf_counter()
    theirs = colour_loop(ref, matched, observers, drive_ref, drive_test, count)
    loop = (time.perf_counter() - start) * args.observers / count
    ours = result["delta_e_2000"].transpose("observer", "stimulus").values[:count]

    print(f"case                          : {args.observers} observers x 2 displays x {args.stimuli} stimuli")
    print(f"allocator                     : {'freed memory kept for reuse (both sides)' if kept else 'default policy'}")
    print(f"metasim mismatch(), full study: {best * 1e3:9.1f} ms (best of {args.repeats}; also solves drives,"
          " matches the white, index, summaries)")
    print(f"metasim, the loop's work      : {same * 1e3:9.1f} ms (observed_xyz, xyz_to_lab, delta_e_2000 on all pairs)")
    scaled = "" if count == args.observers else f" (measured on {count} observers, scaled)"
    print(f"colour-science loop           : {loop * 1e3:9.1f} ms{scaled}")
    print(f"speed ratio, full study       : {loop / best:9.1f} x")
    print(f"speed ratio, the loop's work  : {loop / same:9.1f} x")
    same_values = same_work.transpose("observer", "stimulus").values[:count]
    print(f"largest |delta E00 difference|: {np.max(np.abs(ours - theirs)):.3e} (full study), "
          f"{np.max(np.abs(same_values - theirs)):.3e} (the loop's work)")


if __name__ == "__main__":
    main()
