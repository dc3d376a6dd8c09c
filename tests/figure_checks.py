"""Checks every figure test shares: each axis a reader reads has a label, and a numeric axis names its
unit in brackets (the unit vocabulary of :mod:`metasim.units`). Read off the matplotlib objects."""

import re

#: unit words a numeric axis label may give in brackets (metasim.units and the figures' own forms)
UNITS = ("nm", "%", "ΔE00", "ΔE*ab", "ΔE_ITP", "years", "count", "unitless", "cd/m²", "W sr⁻¹ m⁻² nm⁻¹",
         "CIELAB units³", "lm/W", "percentage points", "1/unit", "Δu'v'")
BRACKETS = re.compile(r"\(([^()]*)\)")


def _numeric(labels) -> bool:
    texts = [t.replace("−", "-").replace(",", "").strip() for t in labels if t.strip()]
    if not texts:
        return False
    try:
        [float(t) for t in texts]
    except ValueError:
        return False
    return True


def _has_unit(label: str) -> bool:
    return any(any(unit in inside for unit in UNITS) for inside in BRACKETS.findall(label.replace("\n", " ")))


def axis_problems(fig) -> list[str]:
    """Every axis of ``fig`` that shows tick labels but has no label (a numeric one: no unit in brackets).

    An axis without a label of its own passes when an axis it shares ticks with (``sharex``) or one
    with the same tick labels carries it (the subjects of a panel row, say)."""
    fig.canvas.draw()
    problems, seen = [], {}
    axes = [ax for ax in fig.axes if ax.get_visible()]
    for ax in axes:
        for name, axis in (("x", ax.xaxis), ("y", ax.yaxis)):
            ticks = tuple(t.get_text() for t in axis.get_ticklabels() if t.get_visible() and t.get_text())
            if not ticks:
                continue
            seen.setdefault(ticks, []).append((ax, name, axis.get_label_text()))
    for ticks, places in seen.items():
        labels = [text for _, _, text in places if text.strip()]
        for ax, name, text in places:
            siblings = ax.get_shared_x_axes().get_siblings(ax) if name == "x" else ax.get_shared_y_axes().get_siblings(ax)
            shared = [(s.get_xlabel() if name == "x" else s.get_ylabel()) for s in siblings]
            candidates = [text] + [t for t in shared if t] + labels
            label = next((c for c in candidates if c.strip()), "")
            where = f"{ax.get_title() or ax.get_label() or 'axes'}: {name} axis"
            if not label:
                problems.append(f"{where} has no label")
            elif _numeric(ticks) and not _has_unit(label):
                problems.append(f"{where} label {label!r} names no unit in brackets")
    return problems


def assert_axes_labelled(fig) -> None:
    problems = axis_problems(fig)
    assert not problems, problems
