"""The unit vocabulary of metasim: one set of unit names for result files, figures, tables and reports.

A result file's ``units`` attribute, a figure's axis label (the unit in brackets) and a report's
table header use the same names:

========================  ===================  ====================================================
quantity                  unit name            notes
========================  ===================  ====================================================
CIE 2000 difference       ``ΔE00``             CIE 15:2004 / CIE 142-2001 (CIEDE2000); sentences
                                               say "CIE 2000 units"; the metamerism index and every
                                               statistic of CIE 2000 differences carry it too
CIELAB difference         ``ΔE*ab``            CIE 1976 (CIE 15:2004)
BT.2124 difference        ``ΔE_ITP``           ITU-R BT.2124
CIELAB volume             ``CIELAB units³``    a volume in L*a*b* space (ΔE*ab cubed)
CIELAB coordinates,       ``1``                unitless
chromaticities, areas
shares                    ``1``                fractions in files; reports and figures show %
wavelength                ``nm``
spectral radiance         ``W sr-1 m-2 nm-1``  figures write it with superscripts
luminance, XYZ            ``cd m-2``           figures write cd/m²
========================  ===================  ====================================================

The standard library only, so that the command line can read it before the numerical modules load.
"""

from __future__ import annotations

#: CIE 2000 colour difference (CIE 15:2004; CIE 142-2001)
DELTA_E00 = "ΔE00"
#: CIELAB (CIE 1976) colour difference
DELTA_E_AB = "ΔE*ab"
#: ITU-R BT.2124 colour difference
DELTA_E_ITP = "ΔE_ITP"
#: volume in CIELAB space
LAB_VOLUME = "CIELAB units³"
#: unitless values and shares (fractions)
UNITLESS = "1"

#: how a unit stored in a file is written on a figure axis or in a table header
DISPLAY_FORMS = {"W sr-1 m-2 nm-1": "W sr⁻¹ m⁻² nm⁻¹", "cd m-2": "cd/m²", "(CIELAB unit)3": LAB_VOLUME}


def unit_text(units: str) -> str:
    """A file's unit as a reader reads it: ``"W sr-1 m-2 nm-1"`` → ``"W sr⁻¹ m⁻² nm⁻¹"``; ``"1"`` → ``""``."""
    units = str(units or "")
    if units == UNITLESS:
        return ""
    return DISPLAY_FORMS.get(units, units)


def axis_label(quantity: str, units: str) -> str:
    """An axis label with its unit in brackets: ``axis_label("95th percentile", DELTA_E00)`` →
    ``"95th percentile (ΔE00)"``; unitless quantities get ``(unitless)`` or ``(%)`` from the caller.

    >>> axis_label("CIE 2000 colour difference", DELTA_E00)
    'CIE 2000 colour difference (ΔE00)'
    """
    text = unit_text(units)
    return f"{quantity} ({text})" if text else f"{quantity} (unitless)"


def format_volume(value: float) -> str:
    """A CIELAB volume as a reader reads it: ``1.11e6`` → ``"1.11 million CIELAB units³"``.

    >>> format_volume(1_110_000.0)
    '1.11 million CIELAB units³'
    """
    value = float(value)
    if value != value:  # NaN
        return "not computed"
    if abs(value) >= 1e6:
        return f"{value / 1e6:.3g} million {LAB_VOLUME}"
    return f"{value:,.0f} {LAB_VOLUME}"


__all__ = ["DELTA_E00", "DELTA_E_AB", "DELTA_E_ITP", "LAB_VOLUME", "UNITLESS", "DISPLAY_FORMS", "unit_text",
           "axis_label", "format_volume"]
