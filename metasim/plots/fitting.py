"""Figures of an observer fit (:func:`metasim.fit_observer` results).

:func:`fit_parameters` shows every subject's estimates against the population spread the prior
came from; :func:`fit_residuals` the match errors of the mean observer against those of the fitted
observers, per stimulus and per subject.
"""

from __future__ import annotations

import numpy as np
import xarray as xr
from matplotlib import rc_context
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch
from matplotlib.ticker import MaxNLocator

from metasim.plots.figures import DESIGN_COLOURS, OUTLINE_COLOUR, REFERENCE_COLOUR, STYLE, _figure
from metasim.units import DELTA_E00, format_share

FITTED_COLOUR = DESIGN_COLOURS[1]
MEAN_COLOUR = DESIGN_COLOURS[0]
#: Up to this many subjects each gets its own row with ±2 SE bars; above it, a histogram.
MAX_SUBJECT_ROWS = 30


def _label(ds: xr.Dataset, name: str) -> str:
    """``"l_shift_nm"`` → ``"L-cone shift (nm)"`` (the words the report uses for parameter keys)."""
    units = str(ds["parameter_units"].sel(parameter=name).values) if "parameter_units" in ds.coords else ""
    words = name.removesuffix("_pct").removesuffix("_nm").removesuffix("_years").replace("_", " ")
    text = f" {words} ".replace(" l ", " L-cone ").replace(" m ", " M-cone ").replace(" s ", " S-cone ").strip()
    return f"{text} ({units})" if units and units != "1" else f"{text} (unitless)"


def fit_parameters(ds: xr.Dataset) -> Figure:
    """Estimates (±2 standard errors, or their histogram) against the prior mean ± 1 and 2 SD, per parameter.

    Parameters
    ----------
    ds : xarray.Dataset
        An observer fit (:func:`metasim.fit_observer`): ``estimate``, ``standard_error`` and
        ``identified`` (bool) over (observer, parameter), ``prior_mean`` and ``prior_sd`` over
        ``parameter``, in each parameter's units (coordinate ``parameter_units``: nm, %, years).

    Returns
    -------
    matplotlib.figure.Figure
        One axis per parameter: up to :data:`MAX_SUBJECT_ROWS` subjects one row each with ± 2
        standard errors (grey: not identified), more as a histogram against the prior density.

    Examples
    --------
    >>> import xarray as xr
    >>> parameters = {"parameter": ["l_shift_nm", "lens_pct"], "observer": ["s1", "s2"]}
    >>> fit = xr.Dataset({"estimate": (("observer", "parameter"), [[1.2, 5.0], [-0.8, -12.0]]),
    ...                   "standard_error": (("observer", "parameter"), [[0.5, 9.0], [0.6, 8.0]]),
    ...                   "identified": (("observer", "parameter"), [[True, False], [True, True]]),
    ...                   "prior_mean": ("parameter", [0.0, 0.0]), "prior_sd": ("parameter", [1.5, 18.7])},
    ...                  coords={**parameters, "parameter_units": ("parameter", ["nm", "%"])})
    >>> [ax.get_xlabel() for ax in fit_parameters(fit).axes if ax.get_visible()]
    ['L-cone shift (nm)', 'lens (%)']
    """
    names = [str(v) for v in ds["parameter"].values]
    n = ds.sizes["observer"]
    cols = 3 if len(names) == 9 else 4
    rows = int(np.ceil(len(names) / cols))
    with rc_context(STYLE):
        fig, axes = _figure(11.0, 2.9 * rows + (0.012 * min(n, MAX_SUBJECT_ROWS) * rows), rows, cols)
        for ax in axes.ravel()[len(names):]:
            ax.set_visible(False)
        for ax, name in zip(axes.ravel(), names):
            mean = float(ds["prior_mean"].sel(parameter=name))
            sd = float(ds["prior_sd"].sel(parameter=name))
            est = ds["estimate"].sel(parameter=name).values
            se = ds["standard_error"].sel(parameter=name).values
            ok = ds["identified"].sel(parameter=name).values.astype(bool)
            for k, alpha in ((2, 0.10), (1, 0.16)):
                ax.axvspan(mean - k * sd, mean + k * sd, color=REFERENCE_COLOUR, alpha=alpha, lw=0)
            ax.axvline(mean, color=REFERENCE_COLOUR, lw=0.8)
            if n <= MAX_SUBJECT_ROWS:
                y = np.arange(n)
                for mask, colour in ((ok, FITTED_COLOUR), (~ok, OUTLINE_COLOUR)):
                    if mask.any():
                        ax.errorbar(est[mask], y[mask], xerr=2 * se[mask], fmt="o", ms=3.5, color=colour, lw=1)
                ax.set_ylim(n - 0.5, -0.5)
                ax.set_yticks(y if n <= 12 else y[::max(1, n // 6)])
                ax.set_yticklabels([str(v) for v in ds["observer"].values[ax.get_yticks().astype(int)]], fontsize=8)
                ax.grid(False, axis="y")
                if ax.get_subplotspec().is_first_col():
                    ax.set_ylabel("Subject")
            else:
                bins = np.linspace(mean - 3.5 * sd, mean + 3.5 * sd, 36)
                ax.hist(np.clip(est, bins[0], bins[-1]), bins=bins, density=True, color=FITTED_COLOUR, alpha=0.75)
                x = np.linspace(bins[0], bins[-1], 200)
                ax.plot(x, np.exp(-0.5 * ((x - mean) / sd) ** 2) / (sd * np.sqrt(2 * np.pi)), color=REFERENCE_COLOUR,
                        lw=1.2)
                ax.set_yticks([])
                ax.set_ylabel("Density (1/unit)")
                ax.set_title(f"median SE {np.median(se):.3g}, identified {format_share(ok.mean())}", fontsize=9)
            ax.set_xlabel(_label(ds, name))
        handles = [Patch(color=REFERENCE_COLOUR, alpha=0.3, label="population mean ± 1, ± 2 SD")]
        if n <= MAX_SUBJECT_ROWS:
            handles += [Line2D([], [], color=FITTED_COLOUR, marker="o", ms=4, label="estimate ± 2 SE, identified"),
                        Line2D([], [], color=OUTLINE_COLOUR, marker="o", ms=4, label="not identified")]
        else:
            handles += [Patch(color=FITTED_COLOUR, alpha=0.75, label="estimates"),
                        Line2D([], [], color=REFERENCE_COLOUR, label="population density")]
        fig.legend(handles=handles, loc="outside lower center", ncols=len(handles), frameon=False)
        fig.suptitle("Estimates against the population spread used as the prior")
    return fig


def fit_residuals(ds: xr.Dataset) -> Figure:
    """Match errors of the mean observer and the fitted observers: per stimulus and per subject.

    Parameters
    ----------
    ds : xarray.Dataset
        An observer fit (:func:`metasim.fit_observer`): ``match_error`` and
        ``match_error_mean_observer`` over (observer, matching_stimulus, matching_repeat), in
        ΔE00 when the attribute ``matching_data`` is ``"matching session"``, else CIE 1976 Δu'v'
        (unitless); a ``test_wavelength`` coordinate (nm) puts the stimuli on a wavelength axis.

    Returns
    -------
    matplotlib.figure.Figure
        Left: median and 10-90 % band per stimulus; right: histogram of each subject's median error.

    References
    ----------
    CIE 142-2001 (CIEDE2000); CIE 15:2004 §7.3 (CIE 1976 u'v').

    Examples
    --------
    >>> import numpy as np, xarray as xr
    >>> dims = ("observer", "matching_stimulus", "matching_repeat")
    >>> fit = xr.Dataset({"match_error": (dims, np.full((2, 3, 1), 0.004)),
    ...                   "match_error_mean_observer": (dims, np.full((2, 3, 1), 0.011))},
    ...                  coords={"matching_stimulus": ["yellow", "cyan", "white"]})
    >>> [ax.get_xlabel() for ax in fit_residuals(fit).axes]
    ['Reference', "Median match error per subject (CIE 1976 Δu'v', unitless)"]
    """
    session = ds.attrs.get("matching_data") == "matching session"
    unit = f"CIE 2000, {DELTA_E00}" if session else "CIE 1976 Δu'v', unitless"
    fitted = ds["match_error"].transpose("observer", "matching_stimulus", "matching_repeat").values
    mean = ds["match_error_mean_observer"].transpose("observer", "matching_stimulus", "matching_repeat").values
    with rc_context(STYLE):
        fig, axes = _figure(11.0, 3.9, 1, 2, gridspec_kw={"width_ratios": [1.6, 1]})
        ax = axes[0, 0]
        if "test_wavelength" in ds.coords:
            x = ds["test_wavelength"].values
            ax.set_xlabel("Test wavelength (nm)")
        else:
            x = np.arange(ds.sizes["matching_stimulus"])
            labels = [str(v) for v in ds["matching_stimulus"].values]
            ax.set_xticks(x)
            ax.set_xticklabels(labels, rotation=60 if len(labels) > 6 else 0, ha="right" if len(labels) > 6 else "center",
                               fontsize=8)
            ax.set_xlabel("Reference")
        for values, colour, text in ((mean, MEAN_COLOUR, "mean observer"), (fitted, FITTED_COLOUR, "fitted observers")):
            flat = values.transpose(1, 0, 2).reshape(values.shape[1], -1)
            with np.errstate(all="ignore"):
                lo, mid, hi = (np.nanpercentile(flat, q, axis=1) if np.isfinite(flat).any() else np.full(len(x), np.nan)
                               for q in (10, 50, 90))
            ax.fill_between(x, lo, hi, color=colour, alpha=0.18, lw=0, step="mid" if session else None)
            ax.plot(x, mid, color=colour, lw=1.6, marker="o" if session else None, ms=3.5, label=f"{text}: median, 10-90 %")
        ax.set_ylabel(f"Match error ({unit})")
        ax.set_title("Per stimulus, over subjects and repeats")
        ax.legend(frameon=False)
        ax = axes[0, 1]
        with np.errstate(all="ignore"):
            typical = [np.nanmedian(v.reshape(len(v), -1), axis=1) for v in (mean, fitted)]
        top = np.nanmax(np.concatenate(typical)) if np.isfinite(np.concatenate(typical)).any() else 1.0
        bins = np.linspace(0.0, top * 1.02 or 1.0, 25)
        for values, colour, text in zip(typical, (MEAN_COLOUR, FITTED_COLOUR), ("mean observer", "fitted observer")):
            ax.hist(values[np.isfinite(values)], bins=bins, color=colour, alpha=0.6, label=text)
        ax.set_xlabel(f"Median match error per subject ({unit})")
        ax.set_ylabel("Subjects (count)")
        ax.yaxis.set_major_locator(MaxNLocator(integer=True))
        ax.set_title("Per subject, before and after")
        ax.legend(frameon=False)
    return fig


__all__ = ["fit_parameters", "fit_residuals"]
