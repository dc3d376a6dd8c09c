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
                                               (:func:`format_share`: never 100 % or 0 % unless exact)
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
    """A file's unit as a reader reads it: ``"W sr-1 m-2 nm-1"`` → ``"W sr⁻¹ m⁻² nm⁻¹"``; ``"1"`` → ``""``.

    Parameters
    ----------
    units : str
        A ``units`` attribute as stored in a result file (``"nm"``, ``"cd m-2"``, ``"1"``, ...); ``None``
        or empty reads as no unit.

    Returns
    -------
    str
        The display form of :data:`DISPLAY_FORMS` (superscripts, ``cd/m²``), ``""`` for unitless
        (``"1"``) or missing units, any other unit unchanged.

    Examples
    --------
    >>> unit_text("W sr-1 m-2 nm-1")
    'W sr⁻¹ m⁻² nm⁻¹'
    >>> unit_text("cd m-2"), unit_text(UNITLESS), unit_text(DELTA_E00)
    ('cd/m²', '', 'ΔE00')
    """
    units = str(units or "")
    if units == UNITLESS:
        return ""
    return DISPLAY_FORMS.get(units, units)


def axis_label(quantity: str, units: str) -> str:
    """An axis label with its unit in brackets: ``axis_label("95th percentile", DELTA_E00)`` →
    ``"95th percentile (ΔE00)"``; unitless quantities get ``(unitless)`` or ``(%)`` from the caller.

    Parameters
    ----------
    quantity : str
        What the axis shows, in words ("95th percentile", "wavelength").
    units : str
        The quantity's ``units`` attribute as stored in a file (read through :func:`unit_text`).

    Returns
    -------
    str
        ``"quantity (unit)"``, or ``"quantity (unitless)"`` when the unit is ``"1"`` or missing.

    Examples
    --------
    >>> axis_label("CIE 2000 colour difference", DELTA_E00)
    'CIE 2000 colour difference (ΔE00)'
    >>> axis_label("spectral radiance", "W sr-1 m-2 nm-1")
    'spectral radiance (W sr⁻¹ m⁻² nm⁻¹)'
    >>> axis_label("share of observers", UNITLESS)
    'share of observers (unitless)'
    """
    text = unit_text(units)
    return f"{quantity} ({text})" if text else f"{quantity} (unitless)"


def format_share(value, decimals: int = 0, *, sign: bool = True) -> str:
    """A share (a fraction, 0..1) as a percentage that never claims all or none when it is not.

    Shares are rounded to ``decimals``, with one decimal more near the ends (below 1 % and above
    99 %); a share that still rounds to 100 % or to 0 % without being exactly 1 or 0 is written
    ``"> 99.9 %"`` / ``"< 0.1 %"``. Exactly 1 and 0 are ``"100 %"`` and ``"0 %"``.

    Parameters
    ----------
    value : float
        The share, a fraction (NaN gives ``"–"``).
    decimals : int
        Decimals of the percentage away from the ends (>= 0).
    sign : bool
        Append ``" %"`` (``False`` for a bound written before a shared sign, as in ``"84–90 %"``).

    Returns
    -------
    str
        The percentage as a reader reads it.

    Examples
    --------
    >>> format_share(0.998), format_share(0.87), format_share(1.0), format_share(0.0)
    ('99.8 %', '87 %', '100 %', '0 %')
    >>> format_share(0.99996), format_share(0.0004), format_share(0.004)
    ('> 99.9 %', '< 0.1 %', '0.4 %')
    >>> format_share(0.9234, 1), format_share(0.5, sign=False)
    ('92.3 %', '50')
    """
    value = float(value)
    end = " %" if sign else ""
    if value != value:  # NaN
        return "–"
    if value in (0.0, 1.0):
        return f"{100 * value:.0f}{end}"
    percent = 100 * value
    digits = max(int(decimals), 1) if (percent < 1 or percent > 99) else max(int(decimals), 0)
    text = f"{percent:.{digits}f}"
    if 0 < value < 1:
        step = 10.0 ** -digits
        if float(text) >= 100:
            return f"> {100 - step:.{digits}f}{end}"
        if float(text) <= 0:
            return f"< {step:.{digits}f}{end}"
    return f"{text}{end}"


def format_volume(value: float) -> str:
    """A CIELAB volume as a reader reads it: ``1.11e6`` → ``"1.11 million CIELAB units³"``.

    Parameters
    ----------
    value : float
        A volume in CIELAB space (units: ``CIELAB units³``, i.e. ΔE*ab cubed); NaN for one not computed.

    Returns
    -------
    str
        Three significant figures in millions from one million up, a whole number with thousands
        separators below, ``"not computed"`` for NaN.

    References
    ----------
    CIE 15:2004 §8.2.1 (CIELAB, the space whose volume this is).

    Examples
    --------
    >>> format_volume(1_110_000.0)
    '1.11 million CIELAB units³'
    >>> format_volume(825_431.6)
    '825,432 CIELAB units³'
    >>> format_volume(float("nan"))
    'not computed'
    """
    value = float(value)
    if value != value:  # NaN
        return "not computed"
    if abs(value) >= 1e6:
        return f"{value / 1e6:.3g} million {LAB_VOLUME}"
    return f"{value:,.0f} {LAB_VOLUME}"


__all__ = ["DELTA_E00", "DELTA_E_AB", "DELTA_E_ITP", "LAB_VOLUME", "UNITLESS", "DISPLAY_FORMS", "unit_text",
           "axis_label", "format_share", "format_volume"]
