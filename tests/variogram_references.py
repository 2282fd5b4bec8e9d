"""References shared by the variogram test files: gstat's meuse variogram, the meuse data, simulated fields."""

from __future__ import annotations

import numpy as np
import skgstat
from scipy.spatial.distance import cdist

from pointsift.methods.variogram_fit import variogram_model

# gstat R package, tests/variogram.Rout.save (r-spatial/gstat, commit
# 9b299a2045d1d01d4626a628248b49275529b2a2): variogram(log(zinc) ~ 1, ~x+y, meuse),
# default cutoff and width; columns np, dist, gamma.
GSTAT_MEUSE_LOG_ZINC = [
    (57, 79.29244, 0.1234479),
    (299, 163.97367, 0.2162185),
    (419, 267.36483, 0.3027859),
    (457, 372.73542, 0.4121448),
    (547, 478.47670, 0.4634128),
    (533, 585.34058, 0.5646933),
    (574, 693.14526, 0.5689683),
    (564, 796.18365, 0.6186769),
    (589, 903.14650, 0.6471479),
    (543, 1011.29177, 0.6915705),
    (500, 1117.86235, 0.7033984),
    (477, 1221.32810, 0.6038770),
    (452, 1329.16407, 0.6517158),
    (457, 1437.25620, 0.5665318),
    (415, 1543.20248, 0.5748227),
]
MEUSE_WIDTH = 106.4415  # gstat's default class width for meuse (cutoff diagonal/3 over 15 classes)


def load_meuse():
    """log(zinc) of the meuse data shipped by scikit-gstat (skgstat.data.meuse)."""
    xy, z = skgstat.data.meuse("zinc")["sample"]
    return xy.astype(float), np.log(z.ravel().astype(float))


def simulate_field(n, model, nugget, psill, a, realisations, seed):
    """Gaussian random field at n random points by Cholesky factorisation of the known covariance.

    Covariance C(h) = psill * (1 - structure(h)) plus nugget on the diagonal (iid error).
    """
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 100, (n, 2))
    d = cdist(xy, xy)
    cov = psill - (variogram_model(model, d, 0.0, psill, a))
    cov[np.diag_indices(n)] = psill + nugget
    chol = np.linalg.cholesky(cov + 1e-10 * np.eye(n))
    z = chol @ rng.standard_normal((n, realisations))
    return xy, z, cov
