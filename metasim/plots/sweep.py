"""Figures of sweep results: curves for one varied parameter, a heat map for two, a rank plot otherwise."""

from __future__ import annotations

import numpy as np
import xarray as xr
from matplotlib import rc_context
from matplotlib.colors import LinearSegmentedColormap
from matplotlib.figure import Figure
from matplotlib.patches import Rectangle
from matplotlib.ticker import MaxNLocator

from metasim.plots.figures import DELTA_E_LABEL, DESIGN_COLOURS, REFERENCE_COLOUR, STYLE, _figure
from metasim.units import DELTA_E00

#: the threshold line of the sweep curves (ΔE00; common practice, no source)
THRESHOLD = 2.0

#: Sequential map of the sweep heat map, light (small mismatch) to dark (large): cream, ember, slate.
MISMATCH_CMAP = LinearSegmentedColormap.from_list("metasim_mismatch", ["#f4f1ea", "#e9b27d", "#d9633b", "#8e3b46",
                                                                      REFERENCE_COLOUR])
COLOUR_WORDS = {"R": "red", "G": "green", "B": "blue", "C": "cyan", "Y": "yellow", "M": "magenta", "O": "orange",
                "V": "violet", "DR": "deep red", "W": "white"}
EMITTER_WORDS = {"laser": "laser", "gaussian": "Gaussian primary", "quantum_dot": "quantum-dot primary"}


def sweep_spec(summary: xr.Dataset) -> dict:
    """The sweep spec recorded in a sweep result's attributes (a dict; empty when absent or unreadable).

    Parameters
    ----------
    summary : xarray.Dataset
        A sweep result (``STORE/sweep.nc``); its ``spec`` attribute holds the spec as a record or
        as JSON text.

    Returns
    -------
    dict
        The spec's keys and values; empty when there is no ``spec``, it is not JSON or not a record.

    Examples
    --------
    >>> import xarray as xr
    >>> sweep_spec(xr.Dataset(attrs={"spec": '{"sweep_name": "laser reds", "parameters": ["R_peak_nm"]}'}))
    {'sweep_name': 'laser reds', 'parameters': ['R_peak_nm']}
    >>> sweep_spec(xr.Dataset(attrs={"spec": "not JSON"}))
    {}
    """
    import json

    spec = summary.attrs.get("spec", {})
    if isinstance(spec, str):
        try:
            spec = json.loads(spec)
        except ValueError:
            spec = {}
    return spec if isinstance(spec, dict) else {}


def _design_kind(summary: xr.Dataset) -> str | None:
    import json

    parameters = sweep_spec(summary).get("design_parameters", "")
    try:
        parameters = json.loads(parameters) if isinstance(parameters, str) else parameters
    except ValueError:
        return None
    return parameters.get("kind") if isinstance(parameters, dict) else None


def sweep_parameters(summary: xr.Dataset) -> tuple[list[str], list[str]]:
    """The design parameters of a sweep summary: (varied, fixed) coordinate names, in the spec's order.

    A parameter is varied when it takes more than one value over ``design``.

    Parameters
    ----------
    summary : xarray.Dataset
        A sweep result: its coordinates over ``design`` alone are the design parameters; the
        recorded spec's ``parameters`` (:func:`sweep_spec`) give their order, others follow.

    Returns
    -------
    varied : list of str
        Coordinate names of the parameters that take more than one value.
    fixed : list of str
        Those that take one value.

    Examples
    --------
    >>> import xarray as xr
    >>> sweep = xr.Dataset(coords={"design": [0, 1], "R_peak_nm": ("design", [620.0, 640.0]),
    ...                            "fwhm_nm": ("design", [2.0, 2.0])})
    >>> sweep_parameters(sweep)
    (['R_peak_nm'], ['fwhm_nm'])
    """
    names = [str(c) for c in summary.coords if summary[c].dims == ("design",) and c != "design"]
    order = [str(c) for c in sweep_spec(summary).get("parameters", []) if str(c) in names]
    names = order + [c for c in names if c not in order]
    varied = [c for c in names if len(np.unique(summary[c].values)) > 1]
    return varied, [c for c in names if c not in varied]


def parameter_text(summary: xr.Dataset, name: str) -> tuple[str, str]:
    """Words and units of a design parameter, e.g. ``("red laser peak", "nm")`` (units "" when none).

    ``<label>_peak_nm``, ``[<label>_]fwhm_nm`` and ``<label>_relative_power`` (the coordinates of
    design grids and searches) are named from the primary's colour letter (:data:`COLOUR_WORDS`)
    and the emitter kind of the recorded spec (:data:`EMITTER_WORDS`); other parameters by their
    ``long_name``.

    Parameters
    ----------
    summary : xarray.Dataset
        A sweep result holding the parameter as a coordinate.
    name : str
        The parameter's coordinate name.

    Returns
    -------
    words : str
        The parameter in words.
    units : str
        Its ``units`` attribute (``"nm"`` for a name ending in ``_nm`` without one); ``""`` for none
        or unitless (``"1"``).

    Examples
    --------
    >>> import xarray as xr
    >>> sweep = xr.Dataset(coords={"R_peak_nm": ("design", [620.0, 640.0], {"units": "nm"}),
    ...                            "fwhm_nm": ("design", [2.0, 4.0]), "G_relative_power": ("design", [1.0, 1.5])},
    ...                    attrs={"spec": {"design_parameters": {"kind": "laser"}}})
    >>> parameter_text(sweep, "R_peak_nm"), parameter_text(sweep, "fwhm_nm")
    (('red laser peak', 'nm'), ('laser line width (FWHM)', 'nm'))
    >>> parameter_text(sweep, "G_relative_power")
    ('green laser relative power', '')
    >>> parameter_text(sweep.assign_attrs(spec={}), "R_peak_nm")  # no emitter kind recorded
    ('red primary peak', 'nm')
    """
    kind = _design_kind(summary)
    emitter = EMITTER_WORDS.get(kind, "primary")
    units = summary[name].attrs.get("units") if name in summary.coords else None
    if units is None and name.endswith("_nm"):
        units = "nm"
    width = "line width (FWHM)" if kind == "laser" else "FWHM"
    for suffix, what in (("_peak_nm", "peak"), ("_fwhm_nm", width), ("_relative_power", "relative power")):
        if name.endswith(suffix) and len(name) > len(suffix):
            label = name[: -len(suffix)]
            return f"{COLOUR_WORDS.get(label, label)} {emitter} {what}", ("" if not units or units == "1" else str(units))
    if name == "fwhm_nm":
        text = f"{emitter} {width}"
    else:
        text = str(summary[name].attrs.get("long_name", name.replace("_", " "))) if name in summary.coords else name
    return text, ("" if not units or units == "1" else str(units))


def edge_messages(summary: xr.Dataset) -> list[str]:
    """The sweep's warnings that its best design sits at the end of a swept range
    (:mod:`metasim.sweep.ranking`), the parameters named in words: "the best design has red laser peak
    = 650 nm, ..." instead of the coordinate's key.

    Parameters
    ----------
    summary : Dataset
        A sweep result (``STORE/sweep.nc``) with its ``edge_warnings`` attribute (none: no messages).

    Returns
    -------
    list of str
        One message per parameter whose best value sits at an end of its swept range.

    Examples
    --------
    >>> import xarray as xr
    >>> sweep = xr.Dataset(coords={"R_peak_nm": ("design", [610.0, 650.0], {"units": "nm"})},
    ...                    attrs={"edge_warnings": "the best design has R_peak_nm = 650 nm, the upper end"})
    >>> edge_messages(sweep)
    ['the best design has red primary peak = 650 nm, the upper end']
    """
    messages = [m for m in str(summary.attrs.get("edge_warnings", "")).split(" | ") if m]
    names = sorted((str(c) for c in summary.coords if summary[c].dims == ("design",)), key=len, reverse=True)
    for name in names:
        messages = [m.replace(f" {name} = ", f" {parameter_text(summary, name)[0]} = ") for m in messages]
    return messages


def parameter_label(summary: xr.Dataset, name: str) -> str:
    """Axis label of a design parameter with its units, e.g. ``"red laser peak (nm)"``.

    Parameters
    ----------
    summary : xarray.Dataset
        A sweep result holding the parameter as a coordinate.
    name : str
        The parameter's coordinate name.

    Returns
    -------
    str
        :func:`parameter_text` words, the units in brackets when there are any.

    Examples
    --------
    >>> import xarray as xr
    >>> sweep = xr.Dataset(coords={"G_peak_nm": ("design", [520.0, 532.0], {"units": "nm"}),
    ...                            "drive": ("design", ["min_norm", "max_white"], {"long_name": "drive strategy"})})
    >>> parameter_label(sweep, "G_peak_nm"), parameter_label(sweep, "drive")
    ('green primary peak (nm)', 'drive strategy')
    """
    text, units = parameter_text(summary, name)
    return f"{text} ({units})" if units else text


def parameter_value(summary: xr.Dataset, name: str, index: int) -> str:
    """One design's value of a parameter with its units, e.g. ``"640 nm"``.

    Parameters
    ----------
    summary : xarray.Dataset
        A sweep result holding the parameter as a coordinate over ``design``.
    name : str
        The parameter's coordinate name.
    index : int
        Position of the design along ``design`` (not its label).

    Returns
    -------
    str
        Numbers in the shortest form (``%g``) followed by the units, text as it is.

    Examples
    --------
    >>> import xarray as xr
    >>> sweep = xr.Dataset(coords={"R_peak_nm": ("design", [620.0, 640.0], {"units": "nm"})})
    >>> parameter_value(sweep, "R_peak_nm", 1)
    '640 nm'
    """
    units = parameter_text(summary, name)[1]
    return _tick(summary[name].values[index]) + (f" {units}" if units else "")


def _as_float(values) -> np.ndarray | None:
    try:
        out = np.asarray(values, dtype=float)
    except (TypeError, ValueError):
        return None
    return out if np.isfinite(out).all() else None


def design_number(ds: xr.Dataset, index: int) -> int:
    """The number readers see for the design at position ``index``: numbered from 1, like ranks.

    Sweep and search files keep each design's 0-based ``design`` index (the chunks of a sweep store
    and its resuming rely on it); reports, figures and the command line show that index + 1 and say
    so where a reader may look the design up in the file.

    Parameters
    ----------
    ds : xarray.Dataset
        A sweep or search result (dim ``design``).
    index : int
        Position along ``design``.

    Returns
    -------
    int
        The design's number, from 1.

    Examples
    --------
    >>> sweep = xr.Dataset(coords={"design": ("design", [0, 1, 2])})
    >>> design_number(sweep, 0), design_number(sweep, 2)
    (1, 3)
    """
    return int(ds["design"].values[int(index)]) + 1


def _tick(value) -> str:
    return f"{value:g}" if isinstance(value, (float, np.floating, int, np.integer)) else str(value)


def _best_index(p95: np.ndarray) -> int:
    return int(np.nanargmin(p95)) if np.isfinite(p95).any() else 0


def _sweep_curves(summary: xr.Dataset, name: str, p95: np.ndarray, median: np.ndarray) -> Figure:
    raw = summary[name].values
    x = _as_float(raw)
    categorical = x is None
    if categorical:
        categories = list(dict.fromkeys(map(str, raw)))
        x = np.array([categories.index(str(v)) for v in raw], dtype=float)
    order = np.argsort(x, kind="stable")
    coverage = None
    if "gamut_coverage" in summary and "bt2020" in summary["gamut_coverage"]["reference_gamut"].values:
        coverage = 100 * summary["gamut_coverage"].sel(reference_gamut="bt2020").transpose("design").values
    best = _best_index(p95)
    with rc_context(STYLE):
        fig, axes = _figure(9.6, 4.4 if coverage is None else 6.4, 1 if coverage is None else 2, 1, sharex=True,
                            gridspec_kw=None if coverage is None else {"height_ratios": [2.2, 1]})
        ax = axes[0, 0]
        ax.plot(x[order], p95[order], color=DESIGN_COLOURS[0], lw=1.8, marker="o", ms=4.5, label="95th percentile")
        ax.plot(x[order], median[order], color=DESIGN_COLOURS[1], lw=1.5, marker="s", ms=4, ls="--", label="median")
        ax.scatter([x[best]], [p95[best]], s=160, marker="*", color=REFERENCE_COLOUR, zorder=6,
                   label=f"best: design {design_number(summary, best)} ({parameter_value(summary, name, best)})")
        ax.axhline(THRESHOLD, color="#8a8a8a", lw=0.9, ls=(0, (2, 3)), zorder=0,
                   label=f"{THRESHOLD:g} {DELTA_E00} (common practice threshold)")
        ax.set_ylabel(f"Over all observer × stimulus pairs,\n{DELTA_E_LABEL.replace('CIE 2000 colour', 'CIE 2000')}")
        ax.set_ylim(bottom=0)
        ax.set_title("Mismatch of each design against the reference")
        ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)  # beside the data, never over it
        if coverage is not None:
            ax2 = axes[1, 0]
            ax2.plot(x[order], coverage[order], color=REFERENCE_COLOUR, lw=1.6, marker="o", ms=4,
                     label="BT.2020 xy area\ncovered")
            ax2.set_ylabel("BT.2020 covered\n(% of xy area, CIE 1931)")
            ax2.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)
        bottom = axes[-1, 0]
        if categorical:
            bottom.set_xticks(np.arange(len(categories)), categories)
        bottom.set_xlabel(parameter_label(summary, name))
    return fig


def _sweep_heat_map(summary: xr.Dataset, names: list[str], p95: np.ndarray) -> Figure:
    (xn, yn) = names
    xs = list(dict.fromkeys(sorted(summary[xn].values.tolist(), key=lambda v: (str(type(v)), v))))
    ys = list(dict.fromkeys(sorted(summary[yn].values.tolist(), key=lambda v: (str(type(v)), v))))
    grid = np.full((len(ys), len(xs)), np.nan)
    for xv, yv, value in zip(summary[xn].values.tolist(), summary[yn].values.tolist(), p95):
        i, j = ys.index(yv), xs.index(xv)
        grid[i, j] = value if not np.isfinite(grid[i, j]) else min(grid[i, j], value)  # repeats: the better one
    best = _best_index(p95)
    bx, by = xs.index(summary[xn].values.tolist()[best]), ys.index(summary[yn].values.tolist()[best])
    with rc_context(STYLE):
        fig, axes = _figure(min(10.0, 4.6 + 0.55 * len(xs)), min(8.0, 2.4 + 0.45 * len(ys)))
        ax = axes[0, 0]
        image = ax.imshow(np.ma.masked_invalid(grid), origin="lower", aspect="auto", cmap=MISMATCH_CMAP,
                          vmin=0.0, vmax=float(np.nanmax(p95)) if np.isfinite(p95).any() else 1.0)
        ax.grid(False)
        if grid.size <= 150:
            top = float(np.nanmax(grid)) if np.isfinite(grid).any() else 1.0
            for i in range(len(ys)):
                for j in range(len(xs)):
                    if np.isfinite(grid[i, j]):
                        ax.text(j, i, f"{grid[i, j]:.2f}", ha="center", va="center", fontsize=8,
                                color="white" if grid[i, j] > 0.55 * top else "#1f2328")
        ax.add_patch(Rectangle((bx - 0.5, by - 0.5), 1.0, 1.0, fill=False, edgecolor=DESIGN_COLOURS[1], lw=3.0,
                               zorder=5, label=f"best: design {design_number(summary, best)} "
                                               f"(95th percentile {p95[best]:.2f})"))
        step_x, step_y = max(1, len(xs) // 12), max(1, len(ys) // 12)
        ax.set_xticks(np.arange(len(xs))[::step_x], [_tick(v) for v in xs][::step_x])
        ax.set_yticks(np.arange(len(ys))[::step_y], [_tick(v) for v in ys][::step_y])
        ax.set_xlabel(parameter_label(summary, xn))
        ax.set_ylabel(parameter_label(summary, yn))
        ax.set_title("95th percentile CIE 2000 difference per design")
        bar = fig.colorbar(image, ax=ax)
        bar.set_label(f"95th percentile CIE 2000 difference\n({DELTA_E00})")
        ax.legend(loc="upper left", bbox_to_anchor=(0.0, -0.16), frameon=False)
    return fig


def _sweep_rank(summary: xr.Dataset, varied: list[str], p95: np.ndarray, median: np.ndarray) -> Figure:
    order = np.argsort(np.where(np.isfinite(p95), p95, np.inf), kind="stable")
    rank = np.arange(1, len(order) + 1)
    best = order[0]
    with rc_context(STYLE):
        fig, axes = _figure(7.6, 4.4)
        ax = axes[0, 0]
        many = len(order) > 60
        ax.plot(rank, p95[order], color=DESIGN_COLOURS[0], lw=1.4, marker=None if many else "o", ms=4,
                label="95th percentile")
        ax.plot(rank, median[order], color=DESIGN_COLOURS[1], lw=1.0, ls="--", marker=None if many else "s", ms=3,
                label="median (same design)")
        values = "\n".join(f"{parameter_text(summary, c)[0]} {parameter_value(summary, c, best)}" for c in varied[:5])
        ax.scatter([1], [p95[best]], s=160, marker="*", color=REFERENCE_COLOUR, zorder=6,
                   label=f"best: design {design_number(summary, best)}" + (f"\n{values}" if values else ""))
        ax.set_xlabel("Rank of the design (unitless; 1 = smallest 95th percentile)")
        ax.set_ylabel(f"Over all observer × stimulus pairs,\n{DELTA_E_LABEL.replace('CIE 2000 colour', 'CIE 2000')}")
        ax.set_ylim(bottom=0)
        ax.set_xlim(0.5, len(order) + 0.5)
        ax.xaxis.set_major_locator(MaxNLocator(integer=True))
        title = f"All {len(order)} designs, sorted"
        if len(varied) > 2:
            title += f" ({len(varied)} parameters varied)"
        ax.set_title(title)
        ax.legend(loc="upper left", frameon=False)
    return fig


def sweep_figure(summary: xr.Dataset) -> Figure:
    """The per-design mismatch of a sweep (:mod:`metasim.sweep`) against its varied parameters.

    One varied parameter: the 95th percentile and median CIE 2000 difference (all observer ×
    stimulus pairs) against the parameter, with BT.2020 coverage in a second panel when present.
    Two: a heat map of the 95th percentile over both. None or more than two: every design's 95th
    percentile, sorted (rank plot). The design with the smallest 95th percentile is starred.

    Parameters
    ----------
    summary : xarray.Dataset
        A sweep result: ``delta_e_2000_overall`` (design, statistic) in ΔE00 with ``"p95"`` and
        ``"median"``, the design parameters as coordinates over ``design`` (:func:`sweep_parameters`),
        and optionally ``gamut_coverage`` (design, reference_gamut), a share, for the BT.2020 panel.

    Returns
    -------
    matplotlib.figure.Figure
        Curves (one varied parameter), a heat map (two) or a rank plot (otherwise).

    References
    ----------
    CIE 142-2001 (CIEDE2000); ITU-R BT.2020-2 (the coverage reference).

    Examples
    --------
    >>> import xarray as xr
    >>> sweep = xr.Dataset({"delta_e_2000_overall": (("design", "statistic"), [[0.9, 2.4], [0.7, 1.8], [0.8, 2.1]])},
    ...                    coords={"design": [0, 1, 2], "statistic": ["median", "p95"],
    ...                            "R_peak_nm": ("design", [620.0, 630.0, 640.0], {"units": "nm"})})
    >>> fig = sweep_figure(sweep)
    >>> fig.axes[0].get_title(), fig.axes[-1].get_xlabel()
    ('Mismatch of each design against the reference', 'red primary peak (nm)')
    """
    stats = summary["delta_e_2000_overall"].transpose("design", "statistic")
    p95 = np.asarray(stats.sel(statistic="p95").values, dtype=float)
    median = np.asarray(stats.sel(statistic="median").values, dtype=float)
    varied, _ = sweep_parameters(summary)
    if len(varied) == 1:
        return _sweep_curves(summary, varied[0], p95, median)
    if len(varied) == 2:
        return _sweep_heat_map(summary, varied, p95)
    return _sweep_rank(summary, varied, p95, median)


__all__ = ["MISMATCH_CMAP", "sweep_spec", "sweep_parameters", "parameter_text", "edge_messages", "parameter_label",
           "parameter_value", "design_number", "sweep_figure"]
