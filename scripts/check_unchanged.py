"""Before/after check for changes that must not change any number.

``write OUT.npz`` computes a fixed set of results and stores every numeric variable and coordinate:

* the demo study (``data/demo/``: grading monitor against both projector designs, a seeded
  audience, the demo's stimuli; gamut, mismatch, intervals, calibration ranking, white trims);
* the demo sweep spec (``data/demo/sweep_red_laser.toml``) through the ``metasim sweep`` command;
* smaller checks of the standards' facts: ICtCp and ΔE_ITP, a PQ display against an HLG one with
  BT.2020 stimuli (ΔE_ITP in the engine), every source space's matrix and decoding, every transfer
  function both ways, every reference gamut, observer categories.

``compare A.npz B.npz`` checks that both files hold the same names, shapes and values: numbers
within ``1e-12 · max(1, |value|)`` (NaN where the other has NaN), everything else equal. It prints
the largest difference per group and exits 1 on any difference.

Usage::

    python scripts/check_unchanged.py write /tmp/before.npz
    ... change the code ...
    python scripts/check_unchanged.py write /tmp/after.npz
    python scripts/check_unchanged.py compare /tmp/before.npz /tmp/after.npz
"""

from __future__ import annotations

import argparse
import contextlib
import io
import sys
import tempfile
import warnings
from pathlib import Path

import numpy as np

TOLERANCE = 1e-12


def _add(out: dict, prefix: str, obj) -> None:
    """Every variable and coordinate of a Dataset (or one DataArray) under ``prefix/name``."""
    import xarray as xr

    if isinstance(obj, xr.DataArray):
        obj = obj.to_dataset(name=obj.name or "value")
    for name, variable in {**obj.coords.variables, **obj.data_vars.variables}.items():
        values = np.asarray(variable.values)
        if values.dtype.kind in "OUS":
            values = values.astype(str)
        out[f"{prefix}/{name}"] = values


def demo_study(size: int) -> dict:
    from metasim.cli.demo import AUDIENCE_AGES, DEMO_DIR, DESIGN_SPECS, REFERENCE_SPEC, STIMULI
    from metasim.cli.specs import load_display
    from metasim.cli.study import build_population, build_stimuli
    from metasim.study import run_study

    reference, _ = load_display(DEMO_DIR / REFERENCE_SPEC)
    designs, bases = [], []
    for name in DESIGN_SPECS:
        display, spec = load_display(DEMO_DIR / name)
        designs.append(display)
        bases.append(spec.get("extra_primary_base"))
    observers = build_population(size, 2024, AUDIENCE_AGES, 2)
    stimuli = build_stimuli(STIMULI.format(csv=DEMO_DIR / "stimuli.csv"))
    result = run_study(reference, designs, observers, stimuli, seed=2024, extra_bases=bases, resamples=200)
    out: dict = {}
    _add(out, "study", result)
    return out


def demo_sweep(size: int) -> dict:
    import xarray as xr

    from metasim.cli import main
    from metasim.cli.demo import DEMO_DIR

    out: dict = {}
    with tempfile.TemporaryDirectory() as folder:
        store = Path(folder) / "store"
        with contextlib.redirect_stdout(io.StringIO()):
            code = main(["sweep", str(DEMO_DIR / "sweep_red_laser.toml"), "--out", str(store), "--size", str(size),
                         "--scheduler", "serial", "--resamples", "200", "--no-report", "--quiet"])
        if code:
            raise SystemExit(f"metasim sweep exited with {code}")
        with xr.open_dataset(store / "sweep.nc") as ds:
            _add(out, "sweep", ds.load())
    return out


def standards() -> dict:
    import xarray as xr

    import metasim
    from metasim.display import SOURCE_SPACES, source_matrix, rgb_to_xyz
    from metasim.display.transfer import TRANSFER_FUNCTIONS, eotf, eotf_inverse
    from metasim.emitters import gaussian, laser_line
    from metasim.gamut import REFERENCE_GAMUTS
    from metasim.gamut._inputs import reference_xy, reference_xyz
    from metasim.metamerism import neutral_ramp, primaries_and_secondaries, rgb_cube_grid, combine

    out: dict = {}
    rng = np.random.default_rng(7)
    xyz = xr.DataArray(rng.uniform(0.01, 1.0, (40, 3)) * [95.0, 100.0, 108.0] * rng.uniform(0.1, 40.0, (40, 1)),
                       dims=("stimulus", "xyz"), coords={"xyz": ["X", "Y", "Z"]})
    ictcp = metasim.xyz_to_ictcp(xyz)
    _add(out, "standards/ictcp", ictcp)
    _add(out, "standards/delta_e_itp", metasim.delta_e_itp(ictcp, metasim.xyz_to_ictcp(xyz * 1.03 + 0.2)))
    signal = xr.DataArray(np.linspace(0.0, 1.0, 33)[:, None] * [1.0, 0.7, 0.3], dims=("stimulus", "primary"),
                          coords={"primary": ["R", "G", "B"]})
    for transfer in TRANSFER_FUNCTIONS:
        light = eotf(signal, transfer, black_luminance=0.05 if transfer in ("bt1886", "hlg") else 0.0)
        _add(out, f"standards/eotf/{transfer}", light.rename("light"))
        back = eotf_inverse(light, transfer, black_luminance=0.05 if transfer in ("bt1886", "hlg") else 0.0)
        _add(out, f"standards/eotf_inverse/{transfer}", back.rename("signal"))
    for source in SOURCE_SPACES:
        _add(out, f"standards/source_matrix/{source}", source_matrix(source).rename("matrix"))
        for encoding in (None, "pq", "hlg"):
            decoded = rgb_to_xyz(signal, source, encoding=encoding, white_luminance=120.0, peak_luminance=600.0)
            _add(out, f"standards/rgb_to_xyz/{source}/{encoding}", decoded.rename("decoded"))
    for name in REFERENCE_GAMUTS:
        _add(out, f"standards/reference_xy/{name}", reference_xy(name).rename("primary_xy"))
        _add(out, f"standards/reference_xyz/{name}", reference_xyz(name, 100.0).rename("primary_xyz"))
    # an HDR pair: ΔE_ITP in the engine, BT.2020 stimuli decoded with PQ
    hdr_reference = metasim.calibrate_white(
        metasim.make_display(gaussian([455, 535, 615], [25, 30, 35], name=["B", "G", "R"]), transfer="hlg"),
        "cie1931_2", luminance=600.0)
    hdr_test = metasim.make_display(laser_line([465, 532, 638], 1.0, name=["B", "G", "R"]), transfer="pq")
    stimuli = combine(neutral_ramp(4, source="bt2020"), primaries_and_secondaries(source="bt2020"),
                      rgb_cube_grid(3, source="bt2020"))
    observers = metasim.observer_population(40, seed=11, age_years=(20, 80), field_size_deg=(2, 10))
    result = metasim.mismatch(hdr_reference, hdr_test, observers, stimuli)
    _add(out, "standards/hdr_mismatch", result)
    categories = metasim.observer_categories(metasim.observer_population(80, seed=5, age_years=(20, 70)), 5, seed=5)
    _add(out, "standards/categories", categories.drop_vars([v for v in categories.data_vars]))
    return out


def write(path: str, size: int, sweep_size: int) -> None:
    warnings.simplefilter("ignore")
    out = {**standards(), **demo_study(size), **demo_sweep(sweep_size)}
    from metasim.io import write_bytes

    buffer = io.BytesIO()
    np.savez_compressed(buffer, **out)
    write_bytes(path, buffer.getvalue())
    print(f"wrote {len(out)} arrays to {path}")


def compare(path_a: str, path_b: str) -> int:
    a, b = np.load(path_a), np.load(path_b)
    failures, worst = [], {}
    for name in sorted(set(a.files) ^ set(b.files)):
        failures.append(f"{name}: only in {path_a if name in a.files else path_b}")
    for name in sorted(set(a.files) & set(b.files)):
        x, y = a[name], b[name]
        group = name.split("/")[0] if not name.startswith("standards/") else "/".join(name.split("/")[:2])
        if x.shape != y.shape:
            failures.append(f"{name}: shape {x.shape} vs {y.shape}")
            continue
        if x.dtype.kind in "fc" or y.dtype.kind in "fc":
            x, y = x.astype(float), y.astype(float)
            if not np.array_equal(np.isnan(x), np.isnan(y)):
                failures.append(f"{name}: NaN at different places")
                continue
            finite = ~np.isnan(x)
            difference = np.abs(x - y)[finite]
            allowed = TOLERANCE * np.maximum(1.0, np.abs(x[finite]))
            largest = float(difference.max()) if difference.size else 0.0
            worst[group] = max(worst.get(group, 0.0), largest)
            if (difference > allowed).any():
                failures.append(f"{name}: largest difference {largest:.3g} ({int((difference > allowed).sum())} values "
                                f"beyond {TOLERANCE:g})")
        elif not np.array_equal(x, y):
            failures.append(f"{name}: values differ ({x.dtype})")
    for group, largest in sorted(worst.items()):
        print(f"{group:40s} largest difference {largest:.3g}")
    for line in failures:
        print("DIFFERENT", line)
    print(f"{len(set(a.files) & set(b.files))} arrays compared: "
          + ("identical to 1e-12" if not failures else f"{len(failures)} differ"))
    return 1 if failures else 0


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    sub = parser.add_subparsers(dest="command", required=True)
    w = sub.add_parser("write", help="compute the results and write them to an .npz file")
    w.add_argument("out")
    w.add_argument("--size", type=int, default=200, help="observers of the demo study (default 200)")
    w.add_argument("--sweep-size", type=int, default=60, help="observers of the sweep (default 60)")
    c = sub.add_parser("compare", help="compare two files written by 'write'")
    c.add_argument("before")
    c.add_argument("after")
    args = parser.parse_args(argv)
    if args.command == "write":
        write(args.out, args.size, args.sweep_size)
        return 0
    return compare(args.before, args.after)


if __name__ == "__main__":
    sys.exit(main())
