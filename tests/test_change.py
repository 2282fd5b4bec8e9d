"""Tests of the change screen (pointsift.methods.change) on invented changes."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.stats

from pointsift.graph import build_graph
from pointsift.methods.change import CHANGE_COLUMNS, change_screen, neighbour_change_summary


def _field(n=300, seed=0):
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 20_000, (n, 2))
    return rng, xy, build_graph(xy, k=10)


def test_regional_decline_flags_nothing_and_lone_jump_is_named():
    rng, xy, graph = _field()
    change = -3.0 - 0.0001 * xy[:, 0] + rng.normal(0, 0.3, len(xy))  # the whole basin fell, more to the east
    change[17] = 4.0
    out = change_screen(xy, change, graph, permutations=99)
    assert list(out.columns) == list(CHANGE_COLUMNS)
    assert abs(out.change_z[17]) > 10 and not out.change_coherent[17]
    others = out.drop(17)
    assert (others.change_z.abs() >= 3.5).mean() <= 0.01


def test_coherent_group_is_echoed():
    rng, xy, graph = _field(seed=1)
    change = rng.normal(-1.0, 0.2, len(xy))
    centre = np.hypot(*(xy - xy[40]).T) < 1500  # a new pumping centre lowers a group of wells
    change[centre] -= 5.0
    out = change_screen(xy, change, graph, permutations=99)
    flagged = centre & (out.change_z.abs() >= 3.5).to_numpy()
    assert centre.sum() >= 3
    assert out.change_coherent[flagged].all()


def test_neighbour_summary_against_scipy():
    rng, xy, graph = _field(n=60, seed=2)
    change = rng.normal(0, 1, 60)
    change[5] = np.nan
    median, sd, count = neighbour_change_summary(change, graph)
    row = 10
    nb = change[graph.indices[row][graph.mask[row]]]
    nb = nb[np.isfinite(nb)]
    assert count[row] == nb.size
    assert median[row] == pytest.approx(np.median(nb))
    # reference: scipy.stats.median_abs_deviation, scale="normal"
    assert sd[row] == pytest.approx(scipy.stats.median_abs_deviation(nb, scale="normal"))


def test_missing_changes_are_not_judged():
    rng, xy, graph = _field(n=80, seed=3)
    change = rng.normal(0, 1, 80)
    change[:5] = np.nan
    out = change_screen(xy, change, graph, permutations=99)
    assert out.change_z[:5].isna().all()
    assert out.change_z[5:].notna().all()
