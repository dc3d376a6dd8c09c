"""Derive the CIE 170-1 low-density photopigment absorbances from the Stockman & Sharpe 2° fundamentals.

metasim does not ship the absorbances; ``metasim.observers.physiological`` computes them once at
first use (cached). This script repeats the derivation step by step, independently of that code,
prints the table as CSV (``wavelength_nm,L,M,S``) to stdout or writes it to ``--output``, and
reports on stderr (a) the agreement with metasim's cached table and (b) the check that the 10°
fundamentals predicted from these 2°-derived absorbances match the Stockman & Sharpe 10° table.

Inversion of lms(λ) ∝ λ·[1 − 10^(−D_peak·a(λ))]·10^(−D_mac(λ) − D_ocul(λ)) at f = 2°:
D_mac,max = 0.35 (the shipped macular table as is), D_peak = 0.50 (L, M), 0.40 (S), ocular media
of the 32-year-old observer (shipped lens table):

1. quantal absorptance ∝ lms(λ) / λ · 10^(D_mac(λ) + D_ocul(λ));
2. scale it so its peak equals 1 − 10^(−D_peak) (the absorptance of a peak absorbance of 1);
3. a(λ) = −log10(1 − absorptance) / D_peak, then scale to peak 1; S is 0 above 615 nm.

References: CIE 170-1:2006; Stockman & Sharpe (2000) Vision Research 40, 1711-1737; Stockman,
Sharpe & Fach (1999) Vision Research 39, 2901-2927 (lens and macular tables).

Usage: python scripts/derive_absorbances.py [--output absorbances.csv]
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import colour
import numpy as np

from metasim.io import write_text
from metasim.observers import low_density_absorbance

DATA = Path(__file__).resolve().parents[1] / "data"


def _table(name: str) -> np.ndarray:
    rows = [line for line in (DATA / name).read_text().splitlines() if line and not line.startswith("#")]
    return np.loadtxt(rows[1:], delimiter=",")  # rows[0] is the header


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--output", type=Path, help="write the CSV here instead of stdout")
    args = parser.parse_args()

    lens, macula = _table("lens_density_32y_1nm.csv"), _table("macular_density_2deg_1nm.csv")
    wl = lens[:, 0]
    ss2 = colour.MSDS_CMFS["Stockman & Sharpe 2 Degree Cone Fundamentals"]
    fundamentals = np.nan_to_num(ss2.copy().align(colour.SpectralShape(wl[0], wl[-1], 1)).values.T)
    peak_density = np.array([0.50, 0.50, 0.40])[:, None]

    quantal = fundamentals / wl * 10.0 ** (lens[:, 1] + macula[:, 1])
    absorptance = quantal / quantal.max(axis=1, keepdims=True) * (1.0 - 10.0**-peak_density)
    absorbance = -np.log10(1.0 - absorptance) / peak_density
    absorbance /= absorbance.max(axis=1, keepdims=True)
    absorbance[2, wl > 615] = 0.0

    cached = low_density_absorbance(wl).transpose("cone", "wavelength").values
    print(f"max |script - metasim cached| = {np.abs(absorbance - cached).max():.2e}", file=sys.stderr)

    f = 10.0  # independent check: predict the 10° fundamentals
    pigment = np.array([0.38 + 0.54 * np.exp(-f / 1.333)] * 2 + [0.30 + 0.45 * np.exp(-f / 1.333)])[:, None]
    macular_10 = macula[:, 1] * 0.485 * np.exp(-f / 6.132) / 0.35
    predicted = wl * (1.0 - 10.0 ** (-pigment * absorbance)) * 10.0 ** (-macular_10 - lens[:, 1])
    predicted /= predicted.max(axis=1, keepdims=True)
    ss10 = colour.MSDS_CMFS["Stockman & Sharpe 10 Degree Cone Fundamentals"]
    table_10 = np.nan_to_num(ss10.copy().align(colour.SpectralShape(wl[0], wl[-1], 1)).values.T)
    errors = np.abs(predicted - table_10).max(axis=1)
    print("10° check, max |predicted - Stockman & Sharpe 10°| (peak-normalised on the 1 nm grid): "
          + ", ".join(f"{c} {e:.2e}" for c, e in zip("LMS", errors)), file=sys.stderr)

    lines = ["# CIE 170-1 low-density photopigment absorbances (peak 1), derived from Stockman & Sharpe (2000)",
             "# 2-degree cone fundamentals (colour-science) by scripts/derive_absorbances.py",
             "wavelength_nm,L,M,S"]
    lines += [f"{w:g},{a[0]:.8e},{a[1]:.8e},{a[2]:.8e}" for w, a in zip(wl, absorbance.T)]
    text = "\n".join(lines) + "\n"
    if args.output:
        write_text(args.output, text)
        print(f"wrote {args.output}", file=sys.stderr)
    else:
        sys.stdout.write(text)


if __name__ == "__main__":
    main()
