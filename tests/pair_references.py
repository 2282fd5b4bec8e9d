"""Brute-force pair references shared by test_pairsearch.py and test_lagpairs.py.

Written independently of pointsift: plain Python double loops over all n^2
pairs and a full numpy distance matrix.
"""

import math

import numpy as np


def brute_pairs(xy, max_distance):
    """Every pair within max_distance by a double loop over all n^2 pairs, oriented by the stated rule.

    Reference written independently of the module: plain Python loops and
    ``math`` functions. Orientation rule (module docstring): head east of the
    tail, or due north when x is equal; coincident: lower row is the tail.
    """
    out = {}
    n = len(xy)
    for i in range(n):
        for j in range(i + 1, n):
            xi, yi = xy[i]
            xj, yj = xy[j]
            if not all(math.isfinite(v) for v in (xi, yi, xj, yj)):
                continue
            d = math.hypot(xj - xi, yj - yi)
            if d > max_distance:
                continue
            if xj > xi or (xj == xi and yj > yi):
                tail, head = i, j
            elif xj == xi and yj == yi:
                tail, head = i, j
            else:
                tail, head = j, i
            dx = xy[head][0] - xy[tail][0]
            dy = xy[head][1] - xy[tail][1]
            az = float("nan") if d == 0 else math.degrees(math.atan2(dx, dy)) % 180.0
            out[(tail, head)] = (d, az)
    return out


def brute_pairs_count(xy, r):
    """All i < j pairs within r from the full distance matrix (numpy reference)."""
    d = np.hypot(xy[:, None, 0] - xy[None, :, 0], xy[:, None, 1] - xy[None, :, 1])
    i, j = np.nonzero(np.triu(d <= r, k=1))
    return list(zip(i, j))


def lattice_with_duplicates():
    """Points on a 5 m lattice (distances hit 15, 25, 35 exactly, azimuths hit 45 exactly),
    with coincident duplicates and a row without coordinates."""
    rng = np.random.default_rng(7)
    grid = np.array([(x, y) for x in range(0, 50, 5) for y in range(0, 40, 5)], dtype=float)
    keep = rng.random(len(grid)) < 0.7
    pts = grid[keep]
    pts = np.vstack([pts, pts[:4], [[np.nan, 3.0]]])  # four exact duplicates, one unusable row
    return pts[rng.permutation(len(pts))]
