"""Nested wells: completions at one spot are separate wells; a site is one neighbour."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd

from pointsift import ScreenConfig, screen_frame
from pointsift.methods.nested import find_stations, vertical_gradients

from conftest import build_wells


def _with_site(n=150, seed=8):
    wells = build_wells(n, seed=seed, noise=0.1)
    wells["site"] = wells["well_id"]
    wells["depth"] = 30.0
    spot = wells.iloc[[25]].copy()
    rows = []
    # two more completions at well 25's spot, 80 m and 150 m deep, heads 6 m and 12 m lower (a downward gradient)
    for suffix, depth, drop in (("-B", 80.0, 6.0), ("-C", 150.0, 12.0)):
        extra = spot.copy()
        extra["well_id"] = extra["well_id"] + suffix
        extra["depth"] = depth
        extra["level_m"] = extra["level_m"] - drop
        rows.append(extra)
    site = wells.loc[25, "site"]
    wells = pd.concat([wells, *rows], ignore_index=True)
    wells.loc[wells.index[-2:], "site"] = site
    return gpd.GeoDataFrame(wells, geometry="geometry", crs=build_wells(2).crs), site


def test_find_stations_splits_by_depth_id_and_unit():
    groups = np.array([0, 0, 0, 1, 1, -1])
    usable = np.ones(6, bool)
    s = find_stations(groups, usable, depth=np.array([20.0, 21.0, 100.0, 50.0, 50.0, 10.0]),
                      aquifer=np.array(["a", "a", "a", "a", "b", "a"], dtype=object))
    # rows 0 and 1: same depth within 10 %, same unit -> one completion entered twice
    assert s.duplicate.tolist() == [0, 0, -1, -1, -1, -1]
    assert s.nested.tolist() == [True, True, True, True, True, False]
    with_site = find_stations(np.array([0, 0, -1]), np.ones(3, bool), ids=np.array(["A", "B", "C"], dtype=object),
                              site=np.array(["S", "S", "S"], dtype=object))
    # site members with their own ids are completions, even without depths; C joins by the site name
    assert with_site.duplicate.tolist() == [-1, -1, -1] and with_site.nested.all()
    assert len(set(with_site.station.tolist())) == 1


def test_three_completions_no_conflict_and_one_neighbour():
    wells, site = _with_site()
    result = screen_frame(wells, ScreenConfig(value="level_m", id="well_id", site="site", well_depth="depth",
                                              permutations=99))
    out = result.frame
    members = np.flatnonzero((wells["site"] == site).to_numpy())
    assert members.size == 3
    assert out["coincident_role"].iloc[members].fillna("").eq("").all()
    assert not out["screen_reasons"].iloc[members].str.contains("coincident record").any()
    assert out["screen_status"].iloc[members[0]] == "ok"  # the shallow completion, like its neighbours
    # every other well holds at most one member of the site among its neighbours
    idx = result.graph.indices
    per_row = np.isin(idx, members).sum(axis=1)
    assert per_row.max() == 1 and per_row.sum() > 0
    # members are never each other's neighbours
    assert not np.isin(idx[members], members).any()
    # the member kept is the one closest in depth (the 30 m completion for 30 m wells)
    assert set(idx[np.isin(idx, members)].tolist()) == {members[0]}
    assert result.run_info["context"]["nested_stations"] == 1


def test_without_context_the_same_spot_still_conflicts():
    wells, _ = _with_site()
    out = screen_frame(wells, ScreenConfig(value="level_m", id="well_id", permutations=99)).frame
    assert out["coincident_role"].isin(["contradicted", "undecided", "supported"]).any()


def test_vertical_gradient_check_flags_the_odd_pair():
    # ten sites of two completions 50 m apart, head drops of 0.04 to 0.06 m per m, one with a rise of 0.5 m per m
    n_sites = 10
    station = np.repeat(np.arange(n_sites), 2)
    depth = np.tile([20.0, 70.0], n_sites)
    heads = np.where(depth == 20.0, 100.0, 100.0 + 50.0 * np.repeat(np.linspace(-0.06, -0.04, n_sites), 2))
    heads[19] = 125.0  # the deep completion of the last site stands 25 m higher: gradient +0.5
    from pointsift.methods.nested import Stations

    s = Stations(station, np.arange(2 * n_sites), np.full(2 * n_sites, -1), np.ones(2 * n_sites, bool))
    ids = np.array([f"W{i}" for i in range(2 * n_sites)], dtype=object)
    flagged, text, record = vertical_gradients(s, depth, heads, ids, units="m")
    assert flagged.tolist() == [i in (18, 19) for i in range(2 * n_sites)]
    assert "W19" in text[18] and "vertical gradient" in text[19]
    assert record["pairs"] == n_sites


def _loop_reference(coincident, usable, ids, site, depth, aquifer, tolerance=0.1):
    """Completion labels by plain loops over stations (the rule of the module docstring), independent of the module."""
    n = coincident.size
    parent = list(range(n))

    def find(i):
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    for labels in (np.where(coincident >= 0, coincident.astype(object), ""), site):
        first = {}
        for r in range(n):
            if usable[r] and labels[r] != "":
                if labels[r] in first:
                    parent[find(r)] = find(first[labels[r]])
                else:
                    first[labels[r]] = r
    roots = [find(r) if usable[r] else None for r in range(n)]
    members = {}
    for r in range(n):
        if roots[r] is not None:
            members.setdefault(roots[r], []).append(r)
    stations = sorted((m for m in members.values() if len(m) > 1), key=min)
    completion, offset = [-1] * n, 0
    for rows in stations:
        known = sorted((r for r in rows if np.isfinite(depth[r])), key=lambda r: (depth[r], r))
        cluster, current = {r: -1 for r in rows}, 0
        for j, r in enumerate(known):
            if j and not depth[r] - depth[known[j - 1]] <= tolerance * max(depth[r], 1e-12):
                current += 1
            cluster[r] = current
        named = any(site[r] != "" for r in rows)
        keys = {}
        for r in rows:
            key = (aquifer[r], ids[r] if named else "", cluster[r])
            completion[r] = offset + keys.setdefault(key, len(keys))
        offset += len(keys)
    return completion


def test_completions_equal_a_loop_over_stations():
    rng = np.random.default_rng(5)
    for trial in range(60):
        n = int(rng.integers(2, 120))
        coincident = np.where(rng.random(n) < 0.5, rng.integers(0, max(1, n // 4), n), -1)
        usable = rng.random(n) < 0.9
        site = np.where(rng.random(n) < 0.3, rng.choice(["a", "b", "c"], n), "").astype(object)
        depth = np.where(rng.random(n) < 0.6, rng.choice([10.0, 10.5, 20.0, 50.0, 100.0, 101.0], n), np.nan)
        aquifer = np.where(rng.random(n) < 0.5, rng.choice(["u", "l"], n), "").astype(object)
        ids = rng.choice(["x", "y", "z"], n).astype(object)
        got = find_stations(coincident, usable, ids=ids, site=site, depth=depth, aquifer=aquifer)
        assert got.completion.tolist() == _loop_reference(coincident, usable, ids, site, depth, aquifer), trial
