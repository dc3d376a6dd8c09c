"""Gamut analysis of N-primary displays.

* :func:`chromaticity_gamut`, :func:`gamut_coverage`, :func:`spectrum_locus`,
  :func:`spectrum_locus_coverage` (was ``locus_share``),
  :func:`observer_gamut` — hull, area and coverage in CIE 1931 xy or CIE 1976 u'v', per observer.
* :func:`lab_gamut_volume` — CIELAB volume of the colour solid (zonotope of the primaries).
* :func:`lab_coverage_volume` — share of a reference solid's CIELAB volume covered.
* :func:`extra_primary_gain` — area and volume added by one more primary, per candidate wavelength.
"""

from metasim.gamut._inputs import REFERENCE_GAMUTS, primaries_xyz, reference_xy, reference_xyz
from metasim.gamut.chromaticity import (
    chromaticity_gamut,
    gamut_coverage,
    locus_share as locus_share,  # the old name of spectrum_locus_coverage, one release (not in __all__)
    observer_gamut,
    spectrum_locus,
    spectrum_locus_coverage,
)
from metasim.gamut.coverage_volume import lab_coverage_volume
from metasim.gamut.extra import candidate_spectra, extra_primary_gain
from metasim.gamut.volume import lab_gamut_volume

__all__ = [
    "REFERENCE_GAMUTS",
    "primaries_xyz",
    "reference_xy",
    "reference_xyz",
    "chromaticity_gamut",
    "gamut_coverage",
    "spectrum_locus",
    "spectrum_locus_coverage",
    "observer_gamut",
    "lab_gamut_volume",
    "lab_coverage_volume",
    "candidate_spectra",
    "extra_primary_gain",
]
