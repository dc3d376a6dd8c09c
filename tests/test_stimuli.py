"""Stimulus sets hold distinct colours; repeats in a user's set are named in a warning."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.spatial.distance import pdist

from metasim.cli.study import build_stimuli
from metasim.errors import DuplicateStimulusWarning
from metasim.metamerism import (
    cie_13_3_samples,
    combine,
    distinct,
    duplicate_colours,
    neutral_ramp,
    primaries_and_secondaries,
    rgb_cube_grid,
    rgb_set,
    xyz_set,
)
from metasim.metamerism.stimuli import _colour_values, check_stimuli


def _closest_pair(stimuli) -> float:
    """Smallest largest-value difference between two stimuli of the set (scipy's Chebyshev distance)."""
    values = _colour_values(stimuli, check_stimuli(stimuli))
    return float(pdist(values, metric="chebyshev").min()) if values.shape[0] > 1 else np.inf


BUILT_IN = {
    "ramp 2": lambda: neutral_ramp(2), "ramp 11": lambda: neutral_ramp(11),
    "primaries": primaries_and_secondaries, "primaries 0.5": lambda: primaries_and_secondaries(level=0.5),
    "cube 2": lambda: rgb_cube_grid(2), "cube 5": lambda: rgb_cube_grid(5), "cie13.3": cie_13_3_samples,
    "default list": lambda: build_stimuli("ramp:6,primaries,cube:3"),
    "long list": lambda: build_stimuli("cube:5,ramp:11,primaries,ramp:3,cube:3"),
    "repeated set": lambda: build_stimuli("primaries,primaries"),
    "cie13.3 twice": lambda: build_stimuli("cie13.3,cie13.3"),
}


@pytest.mark.parametrize("name", sorted(BUILT_IN))
def test_built_in_sets_hold_distinct_colours(name):
    with warnings.catch_warnings():
        warnings.simplefilter("error", DuplicateStimulusWarning)  # built-in sets never warn
        stimuli = BUILT_IN[name]()
    assert _closest_pair(stimuli) > 1e-9  # no two stimuli with the same colour (scipy pdist, Chebyshev)
    labels = [str(v) for v in stimuli.stimulus.values]
    assert len(set(labels)) == len(labels)


def test_default_list_counts_each_colour_once():
    stimuli = build_stimuli("ramp:6,primaries,cube:3")
    parts = np.concatenate([neutral_ramp(6)["signal"].values, primaries_and_secondaries()["signal"].values,
                            rgb_cube_grid(3)["signal"].values])
    assert stimuli.sizes["stimulus"] == len(np.unique(parts, axis=0)) == 31  # numpy.unique of the raw signals
    # the first label of each colour is kept: the ramp's white and black, the primaries' names
    labels = list(stimuli.stimulus.values)
    assert {"white", "grey 0.000", "red", "cyan"} <= set(labels)
    assert "rgb 1.00 1.00 1.00" not in labels and "rgb 1.00 0.00 0.00" not in labels
    assert "'red' = 'rgb 1.00 0.00 0.00'" in stimuli.attrs["merged_stimuli"]


def test_user_set_with_repeats_warns_naming_them():
    with pytest.warns(DuplicateStimulusWarning, match=r"'paper' = 'paper again'.*'ink' = 'ink, re-measured'"):
        stimuli = rgb_set([[0.9, 0.9, 0.85], [0.1, 0.1, 0.2], [0.9, 0.9, 0.85], [0.1, 0.1, 0.2 + 5e-10]],
                          ["paper", "ink", "paper again", "ink, re-measured"])
    assert stimuli.sizes["stimulus"] == 4  # kept as given
    assert duplicate_colours(stimuli) == [[0, 2], [1, 3]]
    merged = distinct(stimuli)
    assert list(merged.stimulus.values) == ["paper", "ink"]
    with pytest.warns(DuplicateStimulusWarning, match="'a' = 'b'"):
        xyz_set([[20.0, 21.0, 22.0], [20.0, 21.0, 22.0]], ["a", "b"])


def test_user_set_of_distinct_colours_gives_no_warning():
    with warnings.catch_warnings():
        warnings.simplefilter("error", DuplicateStimulusWarning)
        stimuli = rgb_set([[0.5, 0.5, 0.5], [0.5, 0.5, 0.5 + 1e-6]], ["grey", "grey, a little bluer"])
    assert duplicate_colours(stimuli) == []


def test_csv_repeats_warn_and_combined_sets_merge_them(tmp_path):
    path = tmp_path / "chart.csv"
    path.write_text("name,R,G,B\nchart white,1,1,1\nchart red,1,0,0\nchart red copy,1,0,0\n", encoding="utf-8")
    with pytest.warns(DuplicateStimulusWarning, match="'chart red' = 'chart red copy'"):
        stimuli = build_stimuli(f"primaries,{path}")
    # white and red are already in the primaries set: the chart's repeats merge into them
    assert list(stimuli.stimulus.values) == ["white", "red", "green", "blue", "cyan", "magenta", "yellow"]


def test_same_label_for_different_colours_is_renamed():
    stimuli = combine(primaries_and_secondaries(level=0.8), neutral_ramp(4))
    labels = list(stimuli.stimulus.values)
    assert labels.count("white") == 1 and "white (2)" in labels
    assert float(stimuli["signal"].sel(stimulus="white (2)").min()) == 1.0
    assert _closest_pair(stimuli) > 1e-9  # scipy pdist, Chebyshev
