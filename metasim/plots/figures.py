"""Figures of metasim results (matplotlib, drawn off-screen with the Agg renderer, saved as PNG).

Every function takes labelled xarray inputs (the variables of a study result, see
:mod:`metasim.study`, or the same-named outputs of the library) and returns a
:class:`matplotlib.figure.Figure`; :func:`png_bytes` and :func:`save_png` turn it into a file.
No pyplot state is used, so figures can be made from threads and never open a window.

Figures: :func:`chromaticity_diagram` (spectrum locus, each display's gamut, BT.709 / BT.2020
outlines), :func:`primary_spectra`, :func:`delta_e_by_age` (box plots of CIE 2000 differences per
age band), :func:`p95_by_stimulus` (bar chart), :func:`extra_primary_gain` (gain curves) and
:func:`observer_spread` (for population files), :func:`sweep_figure` (per-design summaries of a
sweep against its varied parameters: curves, a heat map or a rank plot).

Colours: metasim's own palette — the reference in slate, designs in ember, teal, plum and ochre;
spectra are drawn in the approximate sRGB colour of each primary.
"""

from __future__ import annotations

import io
import textwrap
from pathlib import Path

import numpy as np
import xarray as xr
from matplotlib import rc_context
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.ticker import MaxNLocator

from metasim.io import write_bytes
from metasim.units import DELTA_E00, unit_text

REFERENCE_COLOUR = "#2b3a55"
DESIGN_COLOURS = ("#d9633b", "#2a9d8f", "#8e5ea2", "#b8a31f", "#5b7fbf", "#a34f4f")
OUTLINE_COLOUR = "#7d7d7d"
STYLE = {
    "font.size": 10.5, "axes.titlesize": 12, "axes.labelsize": 10.5, "legend.fontsize": 9,
    "axes.spines.top": False, "axes.spines.right": False, "axes.grid": True, "grid.color": "#e4e4e4",
    "grid.linewidth": 0.6, "axes.axisbelow": True, "figure.dpi": 110, "savefig.dpi": 110,
}
LOCUS_TICKS_NM = (460, 480, 490, 500, 510, 520, 540, 560, 580, 600, 620)
#: the CIE 2000 difference on an axis, its unit in brackets (metasim.units)
DELTA_E_LABEL = f"CIE 2000 colour difference ({DELTA_E00})"
#: CIE 1931 xy of the D65 white: the centre the locus labels point away from (CIE 15:2004)
D65_XY = (0.3127, 0.3290)
#: names and line styles of the reference gamut outlines
REFERENCE_OUTLINES = {"bt709": ("--", "ITU-R BT.709"), "bt2020": (":", "ITU-R BT.2020"),
                      "display_p3": ("-.", "Display P3"), "dci_p3": ((0, (5, 1, 1, 1)), "DCI-P3")}


def _figure(width: float, height: float, nrows: int = 1, ncols: int = 1, **kwargs):
    fig = Figure(figsize=(width, height), layout="constrained")
    FigureCanvasAgg(fig)
    axes = fig.subplots(nrows, ncols, squeeze=False, **kwargs)
    return fig, axes


def png_bytes(fig: Figure) -> bytes:
    """The figure as PNG bytes.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        A figure of this module (or any figure with a canvas).

    Returns
    -------
    bytes
        The PNG file, drawn in the house style (:data:`STYLE`, 110 dpi).

    References
    ----------
    ISO/IEC 15948:2004 (Portable Network Graphics).

    Examples
    --------
    >>> from matplotlib.figure import Figure
    >>> png_bytes(Figure(figsize=(1.0, 1.0)))[1:4]
    b'PNG'
    """
    buffer = io.BytesIO()
    with rc_context(STYLE):
        fig.savefig(buffer, format="png")
    return buffer.getvalue()


def save_png(fig: Figure, path, *, replace: bool = True) -> Path:
    """Write the figure as a PNG file (through :func:`metasim.io.write_bytes`); returns the path.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        The figure.
    path : path-like
        The PNG file; its folder must exist.
    replace : bool
        Replace an existing file (default True).

    Returns
    -------
    Path
        ``path``.

    Raises
    ------
    OutputError
        ``path`` is a folder or its folder does not exist.
    OutputExistsError
        ``path`` exists and ``replace`` is False.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> from matplotlib.figure import Figure
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = save_png(Figure(figsize=(1.0, 1.0)), pathlib.Path(folder) / "blank.png")
    ...     print(path.name, path.read_bytes()[1:4])
    blank.png b'PNG'
    """
    return write_bytes(path, png_bytes(fig), replace=replace)


def colours_for(names, roles=None) -> dict:
    """Colour of each display: slate for the reference, the design palette in order for the others.

    Parameters
    ----------
    names : sequence
        Display (or design) names, in order.
    roles : sequence of str, optional
        ``"reference"`` or ``"design"`` per name (a study's ``display_role``); default all designs.

    Returns
    -------
    dict
        Name (as text) → hex colour: :data:`REFERENCE_COLOUR` for references, the
        :data:`DESIGN_COLOURS` in turn (repeating after six) for the others.

    Examples
    --------
    >>> colours_for(["monitor", "lamp", "laser"], ["reference", "design", "design"])
    {'monitor': '#2b3a55', 'lamp': '#d9633b', 'laser': '#2a9d8f'}
    """
    out, k = {}, 0
    roles = list(roles) if roles is not None else ["design"] * len(names)
    for name, role in zip(names, roles):
        if role == "reference":
            out[str(name)] = REFERENCE_COLOUR
        else:
            out[str(name)] = DESIGN_COLOURS[k % len(DESIGN_COLOURS)]
            k += 1
    return out


def _roles(array: xr.DataArray) -> list:
    if "display_role" in array.coords:
        return [str(v) for v in array.coords["display_role"].values]
    return ["design"] * array.sizes["display"]


def _closed(points: np.ndarray) -> np.ndarray:
    points = points[np.isfinite(points).all(axis=1)]
    return np.vstack([points, points[:1]]) if len(points) else points


# -- chromaticity diagram ------------------------------------------------------------------------------

def chromaticity_diagram(gamut_polygon: xr.DataArray, primary_xy: xr.DataArray | None = None,
                         white_xy: xr.DataArray | None = None, references=("bt709", "bt2020")) -> Figure:
    """CIE 1931 xy diagram: spectrum locus, reference outlines and each display's gamut polygon.

    ``gamut_polygon`` has dims (``display``, ``vertex``, ``chromaticity``), NaN padded, as in a
    study result; ``primary_xy`` (display, primary, chromaticity) marks the primaries;
    ``references`` names the reference gamuts outlined (a study's ``reference_gamut`` values: every
    gamut its coverage table lists). Outlines with the same primaries (Display P3 and DCI-P3, which
    differ only in their white) are drawn once and named together.

    Parameters
    ----------
    gamut_polygon : xarray.DataArray (display, vertex, chromaticity)
        Gamut hull of each display in CIE 1931 xy (unitless), NaN padded; a ``display_role``
        coordinate colours the reference (:func:`colours_for`).
    primary_xy : xarray.DataArray (display, primary, chromaticity), optional
        CIE 1931 xy of each primary (unitless), NaN padded; marked as dots.
    white_xy : xarray.DataArray (display, chromaticity), optional
        CIE 1931 xy of each display white (unitless); marked as crosses.
    references : sequence of str
        Reference gamuts outlined (keys of :data:`metasim.gamut.REFERENCE_GAMUTS`).

    Returns
    -------
    matplotlib.figure.Figure
        One axis; the spectrum locus of the CIE 1931 2° observer with wavelength ticks (nm).

    References
    ----------
    CIE 15:2004 §7.3 (CIE 1931 chromaticity diagram); reference primaries ITU-R BT.709-6,
    ITU-R BT.2020-2, SMPTE EG 432-1 (Display P3), SMPTE RP 431-2 (DCI-P3).

    Examples
    --------
    >>> import xarray as xr
    >>> polygon = xr.DataArray([[[0.68, 0.32], [0.265, 0.69], [0.15, 0.06]]],
    ...                        dims=("display", "vertex", "chromaticity"),
    ...                        coords={"display": ["candidate"], "chromaticity": ["x", "y"]})
    >>> fig = chromaticity_diagram(polygon)
    >>> fig.axes[0].get_xlabel(), [text.get_text() for text in fig.axes[0].get_legend().get_texts()]
    ('x (CIE 1931 chromaticity, unitless)', ['spectrum locus (CIE 1931 2°)', 'ITU-R BT.709', 'ITU-R BT.2020', 'candidate'])
    """
    from metasim.gamut import reference_xy, spectrum_locus
    from metasim.observers import standard_observer

    observer = standard_observer("cie1931_2")
    locus = spectrum_locus(observer)["polygon"].transpose("vertex", "chromaticity").values
    cmf = observer["cmf"].transpose("wavelength", "xyz")
    with rc_context(STYLE):
        fig, axes = _figure(9.0, 6.2)
        ax = axes[0, 0]
        ring = _closed(locus)
        ax.fill(ring[:, 0], ring[:, 1], color="#f4f1ea", zorder=0)
        ax.plot(ring[:, 0], ring[:, 1], color="#4a4a4a", lw=1.2, label="spectrum locus (CIE 1931 2°)")
        for nm in LOCUS_TICKS_NM:
            xyz = cmf.sel(wavelength=float(nm)).values
            x, y = xyz[0] / xyz.sum(), xyz[1] / xyz.sum()
            ax.plot([x], [y], marker="o", ms=2.5, color="#4a4a4a")
            # the label sits outside the locus, along the line from the white point through the tick
            dx, dy = x - D65_XY[0], y - D65_XY[1]
            norm = float(np.hypot(dx, dy)) or 1.0
            dx, dy = dx / norm, dy / norm
            ax.annotate(f"{nm}", (x, y), textcoords="offset points", xytext=(9 * dx, 9 * dy), fontsize=8,
                        color="#4a4a4a", ha="left" if dx > 0.3 else "right" if dx < -0.3 else "center",
                        va="bottom" if dy > 0.3 else "top" if dy < -0.3 else "center", annotation_clip=False)
        drawn = []  # outlines with the same primaries are drawn once, with both names
        for name in references:
            xy = _closed(reference_xy(name).transpose("primary", "chromaticity").values)
            style, label = REFERENCE_OUTLINES.get(name, ("--", name))
            for other in drawn:
                if other["xy"].shape == xy.shape and np.allclose(other["xy"], xy, atol=1e-4):
                    other["line"].set_label(f"{other['line'].get_label()} and {label} (same primaries)")
                    break
            else:
                line, = ax.plot(xy[:, 0], xy[:, 1], ls=style, color=OUTLINE_COLOUR, lw=1.1, label=label)
                drawn.append({"xy": xy, "line": line})
        names = [str(v) for v in gamut_polygon["display"].values]
        colours = colours_for(names, _roles(gamut_polygon))
        for name in names:
            poly = _closed(gamut_polygon.sel(display=name).transpose("vertex", "chromaticity").values)
            ax.plot(poly[:, 0], poly[:, 1], color=colours[name], lw=2.0, label=name)
            ax.fill(poly[:, 0], poly[:, 1], color=colours[name], alpha=0.07)
            if primary_xy is not None:
                pts = primary_xy.sel(display=name).transpose("primary", "chromaticity").values
                pts = pts[np.isfinite(pts).all(axis=1)]
                ax.scatter(pts[:, 0], pts[:, 1], s=28, color=colours[name], edgecolor="white", zorder=5)
        if white_xy is not None:
            w = white_xy.transpose("display", "chromaticity").values
            ax.scatter(w[:, 0], w[:, 1], marker="+", s=60, color="#222222", zorder=6, label="white points")
        ax.set_xlim(-0.06, 0.8)
        ax.set_ylim(-0.05, 0.9)
        ax.set_aspect("equal")
        ax.set_xlabel("x (CIE 1931 chromaticity, unitless)")
        ax.set_ylabel("y (CIE 1931 chromaticity, unitless)")
        ax.set_title("Chromaticity gamuts (CIE 1931 xy; locus labels in nm)")
        ax.legend(loc="upper left", bbox_to_anchor=(1.0, 1.0), frameon=False, fontsize="small")
    return fig


# -- spectra ---------------------------------------------------------------------------------------------

def _primary_colour(xy: np.ndarray) -> str:
    """Approximate display colour of a primary from its CIE 1931 xy (sRGB, scaled to full brightness)."""
    import colour

    if not np.isfinite(xy).all() or xy[1] <= 0:
        return "#555555"
    xyz = np.array([xy[0] / xy[1], 1.0, (1 - xy[0] - xy[1]) / xy[1]])
    rgb = np.clip(colour.XYZ_to_sRGB(xyz / xyz.max() * 0.6), 0, None)
    rgb = np.clip(rgb / max(rgb.max(), 1e-9), 0, 1) * 0.85
    return "#" + "".join(f"{int(round(c * 255)):02x}" for c in rgb)


#: a primary narrower than this (full width at half maximum, nm) counts as a line
NARROW_FWHM_NM = 5.0
#: lines taller than this many times the broadband curves of their panel are cut at the top
CLIP_RATIO = 4.0


def _fwhm(wl: np.ndarray, values: np.ndarray) -> float:
    """Full width at half maximum of a sampled curve, in nm (samples at or above half the peak)."""
    peak = float(np.max(values))
    if peak <= 0:
        return 0.0
    step = float(np.median(np.diff(wl))) if wl.size > 1 else 1.0
    return float(np.count_nonzero(values >= 0.5 * peak)) * step


def primary_spectra(spectra: xr.DataArray, primary_label: xr.DataArray | None = None,
                    primary_xy: xr.DataArray | None = None, descriptions: dict | None = None) -> Figure:
    """Spectral radiance of each display's primaries, one panel per display.

    ``spectra`` has dims ([``display``,] ``primary``, ``wavelength``); NaN rows (padding) are skipped.
    ``descriptions`` (display name → {primary label → text}, e.g. "laser line 639 nm",
    "backlight through a 610-710 nm filter") name what each primary is; the legend adds the peak
    wavelength read off the curve. Where narrow lines (FWHM < 5 nm) stand more than four times
    taller than the broadband curves of the same panel, the axis is scaled to the broadband curves
    and the lines are cut at the top with their peak radiance written beside them, so that both stay
    readable. Legends sit beside the panels, never over a curve.

    Parameters
    ----------
    spectra : xarray.DataArray ([display,] primary, wavelength)
        Spectral radiance of each primary, W sr-1 m-2 nm-1 (its ``units`` attribute labels the
        axis); without ``display`` one panel named by the ``name`` attribute.
    primary_label : xarray.DataArray (display, primary), optional
        Label of each primary (default: the ``primary`` coordinate).
    primary_xy : xarray.DataArray (display, primary, chromaticity), optional
        CIE 1931 xy of each primary (unitless): the curve colours (approximate sRGB); grey without.
    descriptions : dict, optional
        Display name → {primary label → words}.

    Returns
    -------
    matplotlib.figure.Figure
        One axis per display, wavelength in nm (shown up to 780 nm).

    Examples
    --------
    >>> from metasim.emitters import gaussian
    >>> fig = primary_spectra(gaussian([455, 535, 615], 30, name=["B", "G", "R"]))
    >>> fig.axes[0].get_xlabel(), fig.axes[0].get_legend().get_texts()[0].get_text()
    ('Wavelength (nm)', 'B (peak 455 nm)')
    """
    if "display" not in spectra.dims:
        spectra = spectra.expand_dims(display=[str(spectra.attrs.get("name", "display"))])
    names = [str(v) for v in spectra["display"].values]
    units = unit_text(spectra.attrs.get("units", "W sr-1 m-2 nm-1"))
    with rc_context(STYLE):
        fig, axes = _figure(9.4, 1.3 + 2.2 * len(names), len(names), 1, sharex=True)
        wl = spectra["wavelength"].values
        shown = wl <= 780.0
        clipped_any = False
        for ax, name in zip(axes[:, 0], names):
            block = spectra.sel(display=name).transpose("primary", "wavelength")
            said = (descriptions or {}).get(name, {})
            curves = []
            for i in range(block.sizes["primary"]):
                values = block.values[i]
                if not np.isfinite(values).all():
                    continue
                label = str(primary_label.sel(display=name).values[i]) if primary_label is not None else str(block.primary.values[i])
                xy = (primary_xy.sel(display=name).transpose("primary", "chromaticity").values[i]
                      if primary_xy is not None else np.array([np.nan, np.nan]))
                curves.append((label, values, xy, _fwhm(wl, values) < NARROW_FWHM_NM))
            broad = [float(np.max(v)) for _, v, _, narrow in curves if not narrow]
            tall = [float(np.max(v)) for _, v, _, narrow in curves if narrow]
            top = None
            if broad and tall and max(tall) > CLIP_RATIO * max(broad):
                top = 1.6 * max(broad)
            used = []
            for label, values, xy, narrow in curves:
                peak_nm = float(wl[int(np.argmax(values))])
                colour = _primary_colour(xy)
                style = "--" if colour in used else "-"  # two primaries of one hue: tell them apart
                used.append(colour)
                what = said.get(label)
                text = f"{label}: {what}" if what else f"{label}"
                if not (what and what.startswith("laser line")):
                    text += f", peak {peak_nm:.0f} nm" if what else f" (peak {peak_nm:.0f} nm)"
                ax.plot(wl, values, color=colour, ls=style, lw=1.5, label=textwrap.fill(text, 30, subsequent_indent="   "))
                if top is not None and float(np.max(values)) > top:
                    clipped_any = True
                    ax.annotate(f"{float(np.max(values)):.3g}", (peak_nm, top), xytext=(4, -2),
                                textcoords="offset points", ha="left", va="top", fontsize=8, color=colour)
                    ax.plot([peak_nm], [top], marker="^", ms=5, color=colour, clip_on=False)
            ax.set_title(name, loc="left")
            ax.set_ylabel(f"Radiance\n({units})")
            ax.set_ylim(0, top) if top is not None else ax.set_ylim(bottom=0)
            ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False, fontsize=8.5)
        axes[-1, 0].set_xlabel("Wavelength (nm)")
        axes[-1, 0].set_xlim(wl[0], wl[shown][-1] if shown.any() else wl[-1])
        title = "Primary spectra after white calibration"
        if clipped_any:
            title += "\n(narrow laser lines cut at the top of their panel, ▲; their peak radiance beside them)"
        fig.suptitle(title)
    return fig


# -- differences by age band ---------------------------------------------------------------------------

def band_members(age_years: np.ndarray, labels) -> list[np.ndarray]:
    """Boolean masks of observers in each age band, read from labels such as ``"20-29"``, ``"70-80"``.

    Bands follow :func:`metasim.metamerism.summarise`: band i covers [lo_i, lo_(i+1)), the last is
    closed at its upper end.

    Parameters
    ----------
    age_years : numpy.ndarray (observer)
        Observer ages, years.
    labels : sequence of str
        Age-band labels ``"lo-hi"`` in years, in increasing order (the engine's ``age_band``
        coordinate).

    Returns
    -------
    list of numpy.ndarray of bool (observer)
        One mask per band.

    Examples
    --------
    >>> import numpy as np
    >>> masks = band_members(np.array([25.0, 30.0, 39.9, 40.0]), ["20-29", "30-40"])
    >>> [mask.tolist() for mask in masks]
    [[True, False, False, False], [False, True, True, True]]
    """
    bounds = [tuple(float(v) for v in str(label).split("-")) for label in labels]
    masks = []
    for i, (lo, hi) in enumerate(bounds):
        if i + 1 < len(bounds):
            masks.append((age_years >= lo) & (age_years < bounds[i + 1][0]))
        else:
            masks.append((age_years >= lo) & (age_years <= hi))
    return masks


def delta_e_by_age(delta_e: xr.DataArray, age_bands=None, thresholds=(1.0, 2.0, 3.0)) -> Figure:
    """Box plots of CIE 2000 differences (all observer × stimulus pairs) per age band and design.

    ``delta_e`` has dims ([``design``,] ``observer``, ``stimulus``) with an ``age_years``
    coordinate; ``age_bands`` are labels as in the engine's ``age_band`` coordinate (default: the
    engine's default bands, the decades covering the ages). Boxes span the quartiles, whiskers the 5th-95th percentiles; the diamond is the mean.
    The box numbers come from :mod:`metasim.statistics` (observer weights when present).

    Parameters
    ----------
    delta_e : xarray.DataArray ([design,] observer, stimulus)
        CIE 2000 differences, ΔE00, with an ``age_years`` coordinate on ``observer`` (and a
        ``weight`` one for observer categories).
    age_bands : sequence of str, optional
        Age-band labels ``"lo-hi"`` (years); default the decades covering the ages.
    thresholds : sequence of float
        ΔE00 levels drawn as dotted lines (common practice: 1, 2, 3, no source).

    Returns
    -------
    matplotlib.figure.Figure
        One axis: a box per band and design (bands without observers left empty).

    References
    ----------
    CIE 142-2001 (CIEDE2000); box-plot statistics by :mod:`metasim.statistics.summaries`
    (Hyndman & Fan 1996 quantiles).

    Examples
    --------
    >>> import xarray as xr
    >>> delta_e = xr.DataArray([[0.4, 1.1], [0.9, 2.3], [1.5, 3.2]], dims=("observer", "stimulus"),
    ...                        coords={"age_years": ("observer", [24.0, 47.0, 71.0])})
    >>> fig = delta_e_by_age(delta_e, ["20-45", "45-70", "70-80"])
    >>> [tick.get_text() for tick in fig.axes[0].get_xticklabels()]
    ['20-45\\n(n=1)', '45-70\\n(n=1)', '70-80\\n(n=1)']
    """
    from metasim.statistics import observer_weights, quantiles, weighted_mean

    if "design" not in delta_e.dims:
        delta_e = delta_e.expand_dims(design=["design"])
    ages = np.asarray(delta_e.coords["age_years"].values, dtype=float)
    if age_bands is None:
        from metasim.metamerism.summary import age_band_labels, decade_age_bands

        age_bands = age_band_labels(decade_age_bands(ages))
    labels = [str(b) for b in age_bands]
    masks = band_members(ages, labels)
    designs = [str(v) for v in delta_e["design"].values]
    colours = colours_for(designs)
    width = 0.8 / len(designs)
    with rc_context(STYLE):
        fig, axes = _figure(9.6, 4.8)
        ax = axes[0, 0]
        weights = observer_weights(delta_e)
        for j, name in enumerate(designs):
            values = delta_e.sel(design=name).transpose("observer", "stimulus").values
            positions = np.arange(len(labels)) + (j - (len(designs) - 1) / 2) * width
            keep = [k for k, m in enumerate(masks) if m.any()]
            if not keep:
                continue
            stats = []
            for k in keep:
                pairs = values[masks[k]].ravel()
                w = None if weights is None else np.repeat(weights[masks[k]], values.shape[1])
                p5, q1, med, q3, p95 = quantiles(pairs, (0.05, 0.25, 0.5, 0.75, 0.95), w)
                stats.append({"whislo": p5, "q1": q1, "med": med, "q3": q3, "whishi": p95,
                              "mean": float(weighted_mean(pairs, w)), "fliers": []})
            box = ax.bxp(stats, positions=positions[keep], widths=width * 0.85, showfliers=False, patch_artist=True,
                         showmeans=True, meanprops={"marker": "D", "markerfacecolor": "white",
                                                    "markeredgecolor": colours[name], "markersize": 4})
            for patch in box["boxes"]:
                patch.set(facecolor=colours[name], alpha=0.55, edgecolor=colours[name])
            for part in ("whiskers", "caps", "medians"):
                for line in box[part]:
                    line.set(color=colours[name] if part != "medians" else "#1a1a1a", lw=1.2)
            ax.plot([], [], color=colours[name], lw=8, alpha=0.55, label=name)
        ax.plot([], [], ls="none", marker="D", markerfacecolor="white", markeredgecolor="#1a1a1a", markersize=4,
                 label="mean")
        ax.plot([], [], color="#1a1a1a", lw=1.2, label="median")
        for k, t in enumerate(thresholds):
            ax.axhline(t, color="#8a8a8a", lw=0.9, ls=(0, (2, 3)), zorder=0,
                       label=f"thresholds {', '.join(f'{v:g}' for v in thresholds)} {DELTA_E00}" if k == 0 else None)
            ax.annotate(f"{t:g}", (0.0, t), xycoords=("axes fraction", "data"), xytext=(3, 2),
                        textcoords="offset points", fontsize=8.5, color="#6a6a6a", va="bottom")
        counts = [int(m.sum()) for m in masks]
        ax.set_xticks(np.arange(len(labels)), [f"{lab}\n(n={c})" for lab, c in zip(labels, counts)])
        ax.set_xlabel("Viewer age band (years, whole years; the last band includes its upper end; n: observers)")
        ax.set_ylabel(DELTA_E_LABEL)
        ax.set_ylim(bottom=0)
        ax.set_title("Mismatch by viewer age, all stimuli pooled\n(box: quartiles, whiskers: 5th-95th percentile)")
        ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)
    return fig


# -- 95th percentile per stimulus --------------------------------------------------------------------

def p95_by_stimulus(by_stimulus: xr.DataArray, max_stimuli: int = 40) -> Figure:
    """Horizontal bars: the population's 95th-percentile CIE 2000 difference for each stimulus.

    ``by_stimulus`` has dims ([``design``,] ``statistic``, ``stimulus``), as the engine's
    ``delta_e_2000_by_stimulus``. Stimuli are sorted, largest at the top; with more than
    ``max_stimuli`` the largest are shown. Stimuli at zero for every design (black: nothing to
    see) get no empty row; the title says how many were left out. Within each stimulus the
    designs stand in legend order, top to bottom.

    Parameters
    ----------
    by_stimulus : xarray.DataArray ([design,] statistic, stimulus)
        Statistics of CIE 2000 differences over observers, ΔE00, with ``statistic`` holding
        ``"p95"``.
    max_stimuli : int
        Most stimuli shown (the largest).

    Returns
    -------
    matplotlib.figure.Figure
        One axis of horizontal bars.

    References
    ----------
    CIE 142-2001 (CIEDE2000).

    Examples
    --------
    >>> import xarray as xr
    >>> by_stimulus = xr.DataArray([[0.0, 1.2, 0.7]], dims=("statistic", "stimulus"),
    ...                            coords={"statistic": ["p95"], "stimulus": ["black", "skin", "sky"]})
    >>> fig = p95_by_stimulus(by_stimulus)
    >>> [tick.get_text() for tick in fig.axes[0].get_yticklabels()], fig.axes[0].get_title().splitlines()[1]
    (['sky', 'skin'], '(1 stimulus at 0 for every design not shown)')
    """
    if "design" not in by_stimulus.dims:
        by_stimulus = by_stimulus.expand_dims(design=["design"])
    p95 = by_stimulus.sel(statistic="p95").transpose("design", "stimulus")
    worst = np.nan_to_num(p95.max("design").values, nan=0.0)
    stimuli = [str(v) for v in p95["stimulus"].values]
    seen = np.flatnonzero(worst > 1e-9)
    zero = len(stimuli) - seen.size
    order = seen[np.argsort(worst[seen], kind="stable")]
    shown = order[-max_stimuli:]
    designs = [str(v) for v in p95["design"].values]
    colours = colours_for(designs)
    height = 0.8 / len(designs)
    with rc_context(STYLE):
        fig, axes = _figure(7.6, 1.6 + 0.24 * max(len(shown), 1) * max(1, len(designs) * 0.7))
        ax = axes[0, 0]
        y = np.arange(len(shown))
        for j, name in enumerate(designs):  # the first design on top within each stimulus, as in the legend
            ax.barh(y + ((len(designs) - 1) / 2 - j) * height, p95.sel(design=name).values[shown], height=height * 0.9,
                    color=colours[name], label=name)
        ax.set_yticks(y, [stimuli[i] for i in shown], fontsize=8.5)
        ax.set_ylim(-0.6, len(shown) - 0.4)
        ax.set_ylabel("Stimulus (sorted, largest at the top)")
        ax.set_xlabel(f"95th percentile over observers, {DELTA_E_LABEL}")
        title = "95th percentile of the CIE 2000 difference over observers, per stimulus"
        left_out = []
        if len(shown) < seen.size:
            left_out.append(f"the {len(shown)} largest of {len(stimuli)} stimuli")
        if zero:
            left_out.append(f"{zero} stimul{'us' if zero == 1 else 'i'} at 0 for every design not shown")
        if left_out:
            title += "\n(" + "; ".join(left_out) + ")"
        ax.set_title(title)
        ax.grid(axis="y", visible=False)
        ax.legend(loc="lower right", frameon=True, framealpha=0.9, edgecolor="none")
    return fig


# -- extra-primary gain --------------------------------------------------------------------------------

def extra_primary_gain(area_gain_share: xr.DataArray, volume_gain_share: xr.DataArray | None = None,
                       primary_peaks_nm: dict | None = None, own_extra_nm: dict | None = None) -> Figure:
    """Gamut gained by one extra laser primary at each candidate peak wavelength.

    Shares (0..1) with dims ([``design``,] ``peak_wavelength``) are drawn in percent of the base
    design's gamut; ``primary_peaks_nm`` (design name → peaks) marks the base primaries' peaks
    (dotted); ``own_extra_nm`` (design name → {label: peak}) marks the primaries a design has beyond
    its base (solid, labelled): where the curve peaks at such a line, the design already holds that
    gain.

    Parameters
    ----------
    area_gain_share : xarray.DataArray ([design,] peak_wavelength)
        Chromaticity-area gain (CIE 1931 xy), a share of the base area (unitless); ``peak_wavelength``
        in nm.
    volume_gain_share : xarray.DataArray ([design,] peak_wavelength), optional
        CIELAB volume gain, a share of the base volume (unitless); a second panel.
    primary_peaks_nm : dict, optional
        Design name → peak wavelengths (nm) of its base primaries.
    own_extra_nm : dict, optional
        Design name → {primary label → peak wavelength (nm)} of its primaries beyond the base.

    Returns
    -------
    matplotlib.figure.Figure
        One axis per panel, gains in %.

    References
    ----------
    CIE 15:2004 §7.3 (CIE 1931 xy), §8.2.1 (CIELAB).

    Examples
    --------
    >>> import xarray as xr
    >>> share = xr.DataArray([0.02, 0.11, 0.05], dims="peak_wavelength", coords={"peak_wavelength": [480.0, 500.0, 520.0]})
    >>> fig = extra_primary_gain(share, primary_peaks_nm={"design": [455.0, 535.0, 615.0]})
    >>> len(fig.axes), fig.axes[0].get_xlabel()
    (1, 'Candidate peak wavelength (nm)')
    """
    panels = [("area", area_gain_share, "Chromaticity area gain\n(% of base area, CIE 1931 xy)")]
    if volume_gain_share is not None:
        panels.append(("volume", volume_gain_share, "CIELAB volume gain\n(% of base volume)"))
    with rc_context(STYLE):
        fig, axes = _figure(8.4, 1.8 + 2.4 * len(panels), len(panels), 1, sharex=True)
        for row, (ax, (_, share, label)) in enumerate(zip(axes[:, 0], panels)):
            if "design" not in share.dims:
                share = share.expand_dims(design=["design"])
            designs = [str(v) for v in share["design"].values]
            colours = colours_for(designs)
            wl = share["peak_wavelength"].values
            for name in designs:
                ax.plot(wl, 100 * share.sel(design=name).values, color=colours[name], lw=1.8, label=name)
                for peak in (primary_peaks_nm or {}).get(name, []):
                    ax.axvline(peak, color=colours[name], lw=0.8, ls=(0, (1, 2)))
                for extra, peak in (own_extra_nm or {}).get(name, {}).items():
                    ax.axvline(peak, color=colours[name], lw=1.6, alpha=0.8)
                    if row == 0:  # the label above every curve (headroom below), on the side with more room
                        right = peak > wl[0] + 0.7 * (wl[-1] - wl[0])
                        ax.annotate(f"{extra} {peak:g} nm", (peak, 0.98), xycoords=("data", "axes fraction"),
                                    xytext=(-4 if right else 4, 0), textcoords="offset points",
                                    ha="right" if right else "left", va="top", fontsize=8.5, color=colours[name],
                                    bbox={"boxstyle": "square,pad=0.15", "fc": "white", "ec": "none", "alpha": 0.85})
            ax.set_ylabel(label)
            ax.set_ylim(bottom=0)
            if row == 0 and any((own_extra_nm or {}).values()):  # a band above the curves for the labels
                highest = float(np.nanmax(100 * share.values)) if np.isfinite(share.values).any() else 0.0
                ax.set_ylim(0, max(highest, ax.get_ylim()[1] * 0.8) / 0.8 if highest > 0 else 1.0)
        axes[0, 0].plot([], [], color="#555555", lw=0.8, ls=(0, (1, 2)), label="peaks of the base primaries")
        if any((own_extra_nm or {}).values()):
            axes[0, 0].plot([], [], color="#555555", lw=1.6, label="the design's own primary beyond its base")
        fig.legend(*axes[0, 0].get_legend_handles_labels(), loc="outside lower center", ncols=2, frameon=False)
        axes[0, 0].set_title("Gamut gained by one more laser primary, per candidate wavelength")
        axes[-1, 0].set_xlabel("Candidate peak wavelength (nm)")
    return fig


# -- observer populations ------------------------------------------------------------------------------

def observer_spread(population: xr.Dataset) -> Figure:
    """Ages of a population and the spread of its colour-matching functions (5th-95th percentile).

    Parameters
    ----------
    population : xarray.Dataset
        An observer population or categories (:func:`metasim.observer_population`,
        :func:`metasim.observer_categories`): ``cmf`` (observer, xyz, wavelength), unitless, with
        ``age_years`` (years) and, for categories, ``weight`` coordinates on ``observer``.

    Returns
    -------
    matplotlib.figure.Figure
        Left: an age histogram (categories: each one's share at its age); right: median and
        5th-95th percentile band of x̄, ȳ, z̄ over the observers against wavelength (nm).

    References
    ----------
    Asano, Fairchild & Blondé (2016) PLoS ONE 11, e0145671 (the population model); CIE 170-1:2006
    (the cone-fundamental-based functions it varies).

    Examples
    --------
    >>> import metasim
    >>> fig = observer_spread(metasim.observer_population(5, seed=1))
    >>> [ax.get_title() for ax in fig.axes]
    ['Ages', "Spread of the observers' functions"]
    """
    with rc_context(STYLE):
        fig, axes = _figure(9.0, 3.8, 1, 2)
        ages = np.asarray(population.coords["age_years"].values, dtype=float) if "age_years" in population.coords else None
        weights = np.asarray(population.coords["weight"].values, dtype=float) if "weight" in population.coords else None
        if ages is not None and weights is not None:  # categories: each one's share of the population at its age
            axes[0, 0].bar(ages, 100 * weights, width=0.9, color=REFERENCE_COLOUR, alpha=0.85)
            names = [str(v) for v in population["observer"].values]  # as the report's table of categories
            for name, age, share in zip(names, ages, weights):
                axes[0, 0].annotate(name, (age, 100 * share), xytext=(0, 2), textcoords="offset points",
                                    ha="center", va="bottom", fontsize=8)
            axes[0, 0].set_ylabel("Share of the population (%)")
            axes[0, 0].set_title("Categories by age (labels: category)")
        else:
            if ages is not None:
                axes[0, 0].hist(ages, bins=max(5, min(30, len(ages) // 10)), color=REFERENCE_COLOUR, alpha=0.8)
            axes[0, 0].yaxis.set_major_locator(MaxNLocator(integer=True))
            axes[0, 0].set_ylabel("Observers (count)")
            axes[0, 0].set_title("Ages")
        axes[0, 0].set_xlabel("Age (years)")
        cmf = population["cmf"].transpose("observer", "xyz", "wavelength")
        wl = cmf["wavelength"].values
        ax = axes[0, 1]
        for i, (name, colour) in enumerate(zip(("x̄", "ȳ", "z̄"), ("#b03a2e", "#2e8b57", "#2f5d9e"))):
            values = cmf.values[:, i]
            lo, mid, hi = np.percentile(values, [5, 50, 95], axis=0)
            ax.fill_between(wl, lo, hi, color=colour, alpha=0.25, lw=0)
            ax.plot(wl, mid, color=colour, lw=1.3, label=f"{name} (median, 5-95 % band)")
        ax.set_xlim(wl[0], min(wl[-1], 750.0))
        ax.set_xlabel("Wavelength (nm)")
        ax.set_ylabel("Colour-matching function (unitless)")
        ax.set_title("Spread of the observers' functions")
        ax.legend(frameon=False)
    return fig


__all__ = ["png_bytes", "save_png", "colours_for", "chromaticity_diagram", "primary_spectra", "delta_e_by_age",
           "band_members", "p95_by_stimulus", "extra_primary_gain", "observer_spread"]
