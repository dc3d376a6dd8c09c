"""Write the demo colour-matching data ``data/demo/lab_matches.csv`` (invented, for the demo only).

Scenario (invented): the Kestrel Lane Post vision bench had eight model volunteers, aged 22 to 68, to
match monochromatic test lights from 400 to 700 nm with the three CIE 1964 / Stiles-Burch primaries
(645.16, 526.32, 444.44 nm) in a 10 degree field. The matches are those of eight model observers
drawn from metasim's population model, with 2 % setting noise; nobody real is described.

    python scripts/make_demo_matches.py            # rewrites data/demo/lab_matches.csv
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

import metasim
from metasim.fitting.synthetic import synthetic_matches
from metasim.io import write_text
from metasim.observers.physiological import DEVIATIONS

SEED = 1964
AGES = [22, 27, 34, 41, 47, 55, 61, 68]
PRIMARIES_NM = (645.16, 526.32, 444.44)
TEST_NM = np.arange(400.0, 701.0, 10.0)


def main(out: Path) -> None:
    drawn = metasim.observer_population(len(AGES), seed=SEED, field_size_deg=10.0)
    people = {name: drawn.coords[name].values for name in DEVIATIONS}
    people.update(age_years=np.array(AGES, dtype=float), field_size_deg=np.full(len(AGES), 10.0))
    plan = metasim.colour_matching_data(test_wavelengths=TEST_NM, primaries=PRIMARIES_NM, field_size_deg=10.0)
    data = synthetic_matches(plan, people, setting_noise=0.02, seed=SEED)
    amounts = data["amount"].isel(repeat=0).transpose("observer", "stimulus", "primary").values
    lines = [
        "# Invented demo data: model observers' matches, not measurements of real people.",
        f"# Made by scripts/make_demo_matches.py (seed {SEED}, setting noise 2 %).",
        "# primary_wavelengths_nm: " + ", ".join(f"{p:g}" for p in PRIMARIES_NM),
        "subject,test_wavelength_nm,R,G,B,field_size_deg,age_years",
    ]
    for i, age in enumerate(AGES):
        for j, wl in enumerate(TEST_NM):
            r, g, b = amounts[i, j]
            lines.append(f"v{i + 1:02d},{wl:g},{r:.6g},{g:.6g},{b:.6g},10,{age}")
    write_text(out, "\n".join(lines) + "\n")


if __name__ == "__main__":
    main(Path(sys.argv[1]) if len(sys.argv) > 1 else Path(__file__).resolve().parents[1] / "data" / "demo" / "lab_matches.csv")
