"""Campaign pairs of a repeated-campaign screen: which pairs to screen, and the change columns per reading.

Orchestration helpers of :mod:`pointsift.campaigns` (no I/O): each well's change
since its previous reading (within ``span`` campaigns) and over the longer
span, screened by :func:`pointsift.methods.change.change_screen`.
"""

from __future__ import annotations

import numpy as np

__all__ = ["plan_pairs", "change_tasks", "change_columns"]


def plan_pairs(matrix, span: int, min_neighbours: int):
    """Campaign pairs to screen: each well's change since its previous reading (within ``span`` campaigns) and over ``span``.

    Returns
    -------
    pairs : dict
        ``(a, b) -> (wells measured in both, their rows at b, their rows at a)``, rows at b sorted.
    consecutive : list of (a, b, wells whose previous reading is at a)
    spans : list of (a, b)
    """
    n_wells, n_campaigns = matrix.shape
    present = matrix >= 0
    last_seen = np.full(n_wells, -1, dtype=np.int64)
    pairs: dict = {}
    consecutive, spans = [], []

    def add(a, b):
        if (a, b) not in pairs:
            both = np.flatnonzero(present[:, a] & present[:, b])
            rows_b, rows_a = matrix[both, b], matrix[both, a]
            order = np.argsort(rows_b)
            pairs[(a, b)] = (both[order], rows_b[order], rows_a[order]) if both.size > min_neighbours else None
        return pairs[(a, b)] is not None

    for b in range(n_campaigns):
        here = np.flatnonzero(present[:, b])
        prev = last_seen[here]
        for a in np.unique(prev[(prev >= 0) & (b - prev <= span)]):
            if add(int(a), b):
                consecutive.append((int(a), b, here[prev == a]))
        if b - span >= 0 and add(b - span, b):
            spans.append((b - span, b))
        last_seen[here] = b
    return {k: v for k, v in pairs.items() if v is not None}, consecutive, spans


def change_tasks(pairs, values, xy, config, cache):
    keys = list(pairs)
    tasks = []
    for a, b in keys:
        _, rows_b, rows_a = pairs[(a, b)]
        tasks.append(("change", (xy[rows_b], values[rows_b] - values[rows_a], cache.get(rows_b), config.screen,
                                 config.change_permutations, config.screen.seed + b)))
    return keys, tasks


def change_columns(n, pairs, results: dict, consecutive, spans):
    """Per-row change columns and the ``changes`` layer records from the screened pairs."""
    cols = {k: np.full(n, np.nan) for k in ("change", "expected_change", "change_z", "nb_median", "nb_sd",
                                              "span_change", "span_expected", "span_z", "span_nb_median", "span_nb_sd")}
    cols["change_from"] = np.full(n, -1, dtype=np.int64)
    cols["span_from"] = np.full(n, -1, dtype=np.int64)
    cols["coherent"] = np.zeros(n, dtype=bool)
    cols["span_coherent"] = np.zeros(n, dtype=bool)
    cols["nb_count"] = np.zeros(n, dtype=np.int64)
    cols["moving_with"] = np.zeros(n, dtype=np.int64)
    cols["span_moving_with"] = np.zeros(n, dtype=np.int64)
    records = []
    for a, b, wells in consecutive:
        both, rows_b, _ = pairs[(a, b)]
        take = np.isin(both, wells)
        r, o = rows_b[take], results[(a, b)][take]
        for col, name in (("change", "change"), ("expected_change", "expected_change"), ("change_z", "change_z"),
                          ("nb_median", "neighbour_median_change"), ("nb_sd", "neighbour_change_sd"),
                          ("nb_count", "change_neighbour_count"), ("coherent", "change_coherent"),
                          ("moving_with", "neighbours_moving_with")):
            cols[col][r] = o[name].to_numpy()
        cols["change_from"][r] = a
        records.append(("consecutive", a, b, r, o))
    for a, b in spans:
        _, rows_b, _ = pairs[(a, b)]
        o = results[(a, b)]
        for col, name in (("span_change", "change"), ("span_expected", "expected_change"), ("span_z", "change_z"),
                          ("span_nb_median", "neighbour_median_change"), ("span_nb_sd", "neighbour_change_sd"),
                          ("span_coherent", "change_coherent"), ("span_moving_with", "neighbours_moving_with")):
            cols[col][rows_b] = o[name].to_numpy()
        cols["span_from"][rows_b] = a
        records.append(("span", a, b, rows_b, o))
    return cols, records
