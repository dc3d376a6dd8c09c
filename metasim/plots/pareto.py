"""The Pareto-front figure of a sweep or search result: every design, the front highlighted."""

from __future__ import annotations

import numpy as np
import xarray as xr
from matplotlib import rc_context
from matplotlib.figure import Figure

from metasim.plots.figures import DESIGN_COLOURS, OUTLINE_COLOUR, REFERENCE_COLOUR, STYLE, _figure
from metasim.sweep.pareto import objective_values, pareto_objectives

#: Axis words of the named objectives (metasim.sweep.pareto.OBJECTIVES); a share is shown in %.
OBJECTIVE_AXES = {
    "p95_mismatch": ("95th percentile CIE 2000 difference\n(ΔE00; all observer × stimulus pairs)", 1.0),
    "median_mismatch": ("median CIE 2000 difference\n(ΔE00; all observer × stimulus pairs)", 1.0),
    "white_p95": ("95th percentile CIE 2000 difference\nof the white (ΔE00)", 1.0),
    "bt2020_coverage": ("BT.2020 xy area covered (%)", 100.0),
    "p3_coverage": ("Display P3 xy area covered (%)", 100.0),
    "bt709_coverage": ("BT.709 xy area covered (%)", 100.0),
    "gamut_area": ("CIE 1931 xy gamut area (unitless)", 1.0),
    "lab_volume": ("CIELAB volume (CIELAB units³)", 1.0),
    "white_efficacy": ("luminous efficacy of the white (lm/W)", 1.0),
}


def objective_axis(name: str, sense: str, long_name: str = "") -> tuple[str, float]:
    """Axis label (with which way is better) and display scale of an objective.

    Parameters
    ----------
    name : str
        Objective name (:data:`metasim.sweep.pareto.OBJECTIVES`) or a ``design`` variable.
    sense : {"min", "max"}
        Whether smaller or larger is better.
    long_name : str
        Words for an objective not in :data:`OBJECTIVE_AXES` (default: the name, ``_`` as spaces).

    Returns
    -------
    label : str
        The axis words with their unit, then ``"lower is better"`` or ``"higher is better"``.
    scale : float
        Factor from the stored value to the axis (100 for shares shown in %, else 1).

    Examples
    --------
    >>> objective_axis("bt2020_coverage", "max")
    ('BT.2020 xy area covered (%)\\nhigher is better', 100.0)
    >>> objective_axis("cost_index", "min")
    ('cost index\\nlower is better', 1.0)
    """
    text, scale = OBJECTIVE_AXES.get(name, (long_name or name.replace("_", " "), 1.0))
    return f"{text}\n{'lower' if sense == 'min' else 'higher'} is better", scale


def pareto_figure(values: np.ndarray, ranks: np.ndarray, objectives: list[dict], labels=None) -> Figure:
    """Every design in the plane of the first objective against each other one, the front highlighted.

    Parameters
    ----------
    values : numpy.ndarray (design, objective)
        Objective values as stored (shares 0..1, ΔE00, CIELAB units³, ...).
    ranks : numpy.ndarray of int (design)
        Pareto rank: 1 = front, 0 = not ranked (:func:`metasim.sweep.pareto.pareto_ranks`).
    objectives : list of dict
        ``{"name", "sense", "long_name"}`` per objective column (as recorded with ``pareto_rank``).
    labels : sequence of str, optional
        A short label per design; front designs are annotated with it when the front is small.

    Returns
    -------
    matplotlib.figure.Figure
        One axis per objective after the first (the first on every y axis; one axis for a single
        objective).

    References
    ----------
    Deb, Pratap, Agarwal & Meyarivan (2002) IEEE Trans. Evol. Comput. 6(2), 182-197 (Pareto ranks,
    non-dominated sorting).

    Examples
    --------
    >>> import numpy as np
    >>> objectives = [{"name": "p95_mismatch", "sense": "min"}, {"name": "bt2020_coverage", "sense": "max"}]
    >>> fig = pareto_figure(np.array([[1.2, 0.70], [1.6, 0.80], [1.7, 0.75]]), np.array([1, 1, 2]), objectives,
    ...                     ["a", "b", "c"])
    >>> fig.axes[0].get_xlabel()
    'BT.2020 xy area covered (%)\\nhigher is better'
    """
    k = values.shape[1]
    panels = max(1, k - 1)
    front = ranks == 1
    other = (ranks > 1)
    with rc_context(STYLE):
        fig, axes = _figure(min(5.2 * panels, 14.0), 4.8, 1, panels)
        y_label, y_scale = objective_axis(objectives[0]["name"], objectives[0]["sense"], objectives[0].get("long_name"))
        for p in range(panels):
            ax = axes[0, p]
            j = p + 1 if k > 1 else 0
            x_label, x_scale = objective_axis(objectives[j]["name"], objectives[j]["sense"],
                                              objectives[j].get("long_name"))
            x, y = values[:, j] * x_scale, values[:, 0] * y_scale
            ax.scatter(x[other], y[other], s=14, color=OUTLINE_COLOUR, alpha=0.45, lw=0,
                       label=f"other designs ({int(other.sum())})" if other.any() else None)
            ax.scatter(x[front], y[front], s=46, color=DESIGN_COLOURS[0], edgecolor=REFERENCE_COLOUR, lw=0.8,
                       zorder=5, label=f"Pareto front ({int(front.sum())} designs)")
            if k == 2 and front.sum() > 1:  # two objectives: the front is a staircase
                order = np.argsort(x[front])
                ax.step(x[front][order], y[front][order], where="post" if objectives[j]["sense"] == "max" else "pre",
                        color=DESIGN_COLOURS[0], lw=1.0, alpha=0.7, zorder=4)
            if labels is not None and 0 < front.sum() <= 12:
                for i in np.flatnonzero(front):
                    ax.annotate(str(labels[i]), (x[i], y[i]), xytext=(4, 4), textcoords="offset points",
                                fontsize=7.5, color=REFERENCE_COLOUR)
            ax.set_xlabel(x_label)
            if p == 0:
                ax.set_ylabel(y_label)
            if objectives[j]["sense"] == "max":
                ax.annotate("better →", (0.98, 0.02), xycoords="axes fraction", ha="right", fontsize=8,
                            color="#7a7a7a")
        fig.legend(*axes[0, 0].get_legend_handles_labels(), loc="outside lower center", ncols=2, frameon=False)
        fig.suptitle("Designs no other design beats on every objective (Pareto front)", fontsize=12)
    return fig


def result_pareto_figure(ds: xr.Dataset) -> Figure:
    """:func:`pareto_figure` of a result that carries ``pareto_rank`` (metasim.sweep.pareto).

    Parameters
    ----------
    ds : xarray.Dataset
        A sweep or search result over ``design`` with ``pareto_rank`` and the objective variables
        its ``objectives`` attribute names (:func:`metasim.sweep.pareto.pareto_front`).

    Returns
    -------
    matplotlib.figure.Figure
        As :func:`pareto_figure`, designs labelled with their ``design`` coordinate.

    Raises
    ------
    SweepError
        The recorded objectives name variables the result does not hold, or ``pareto_rank``
        records none.

    References
    ----------
    Deb, Pratap, Agarwal & Meyarivan (2002) IEEE Trans. Evol. Comput. 6(2), 182-197.

    Examples
    --------
    >>> import xarray as xr
    >>> from metasim.sweep.pareto import pareto_front
    >>> ds = xr.Dataset({"cost": ("design", [3.0, 1.0, 2.0]), "gain": ("design", [3.0, 1.0, 1.0])},
    ...                 coords={"design": [0, 1, 2]})
    >>> fig = result_pareto_figure(pareto_front(ds, {"cost": "min", "gain": "max"}))
    >>> fig.axes[0].get_ylabel(), fig.axes[0].get_xlabel()
    ('cost\\nlower is better', 'gain\\nhigher is better')
    """
    objectives = pareto_objectives(ds)
    values = objective_values(ds, {o["name"]: o["sense"] for o in objectives})[0]
    labels = [str(int(v) + 1) for v in ds["design"].values]  # numbered from 1, as reports number designs
    return pareto_figure(values, np.asarray(ds["pareto_rank"].values), objectives, labels)


__all__ = ["OBJECTIVE_AXES", "objective_axis", "pareto_figure", "result_pareto_figure"]
