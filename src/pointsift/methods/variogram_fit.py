"""Variogram models and their weighted least-squares fits, with the rules for trusting a fit.

Sources
-------
- Weighted least squares: Cressie, N. (1985), Fitting variogram models by
  weighted least squares, *Math. Geol.* 17, 563-586: minimise
  ``sum_k N(h_k) {gamma_hat(h_k) / gamma(h_k; theta) - 1}^2``, i.e. weights
  ``N(h_k) / gamma(h_k; theta)^2``.
- Models (nugget ``c0``, partial sill ``c``, range parameter ``a``), Cressie
  (1993) section 2.3.1 and Webster, R. and Oliver, M. A. (2007),
  *Geostatistics for Environmental Scientists*, 2nd ed., ch. 5 (from memory):
  spherical ``c0 + c (1.5 h/a - 0.5 (h/a)^3)`` for ``h <= a``, else
  ``c0 + c`` (practical range ``a``); exponential ``c0 + c (1 - exp(-h/a))``
  (practical range ``3a``, where 95 % of the sill is reached); Gaussian
  ``c0 + c (1 - exp(-(h/a)^2))`` (practical range ``sqrt(3) a``).

The empirical values fitted come from :mod:`pointsift.methods.variogram_empirical`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import least_squares

from ..errors import ConfigError, InputError

__all__ = [
    "MODELS",
    "MIN_CLASS_PAIRS",
    "ANISOTROPY_RATIO",
    "VariogramFit",
    "variogram_model",
    "practical_range",
    "fit_variogram",
    "anisotropy_hint",
]

#: Variogram models that can be fitted.
MODELS: tuple[str, ...] = ("spherical", "exponential", "gaussian")
#: A lag class needs this many pairs to count towards a trustworthy fit
#: (Journel, A. G. and Huijbregts, C. J. (1978), *Mining Geostatistics*:
#: at least 30 to 50 pairs per lag; from memory).
MIN_CLASS_PAIRS = 30
#: Fewer well-filled classes than this and a fit is not trusted (ours).
MIN_FIT_CLASSES = 5
#: Ratio of largest to smallest directional practical range that hints at
#: anisotropy (ours: a clear difference, beyond the scatter of directional fits).
ANISOTROPY_RATIO = 1.5
#: Nugget share of the sill above which the neighbourhood tells little (ours).
MAX_NUGGET_SHARE = 0.8
#: Least pair-weighted R^2 of a fit to be trusted (ours).
MIN_R_SQUARED = 0.5

_PRACTICAL_FACTOR = {"spherical": 1.0, "exponential": 3.0, "gaussian": math.sqrt(3.0)}


# --------------------------------------------------------------------------- models and fits

def variogram_model(model: str, h, nugget: float, partial_sill: float, range_parameter: float) -> np.ndarray:
    """Semivariance of a model with nugget at separations ``h`` (0 at ``h == 0``).

    Examples
    --------
    >>> variogram_model("spherical", [0.0, 5.0, 10.0, 20.0], 1.0, 2.0, 10.0).tolist()
    [0.0, 2.375, 3.0, 3.0]
    """
    h = np.asarray(h, dtype=float)
    return np.where(h > 0, nugget + partial_sill * _structure(model, h, range_parameter), 0.0)


def _structure(model: str, h: np.ndarray, a: float) -> np.ndarray:
    """Model shape from 0 (h = 0) to 1 (sill), without the nugget."""
    r = np.abs(h) / a
    if model == "spherical":
        return np.where(r < 1.0, 1.5 * r - 0.5 * r**3, 1.0)
    if model == "exponential":
        return 1.0 - np.exp(-r)
    if model == "gaussian":
        return 1.0 - np.exp(-(r**2))
    raise ConfigError(f"model {model!r} is not known; choose one of {', '.join(MODELS)}.")


def practical_range(model: str, range_parameter: float) -> float:
    """Distance at which the model reaches (about 95 % of) its sill.

    Spherical: ``a``; exponential: ``3a``; Gaussian: ``sqrt(3) a``.
    """
    if model not in _PRACTICAL_FACTOR:
        raise ConfigError(f"model {model!r} is not known; choose one of {', '.join(MODELS)}.")
    return _PRACTICAL_FACTOR[model] * float(range_parameter)


@dataclass(frozen=True)
class VariogramFit:
    """A variogram model fitted by Cressie (1985) weighted least squares.

    Attributes
    ----------
    model : str
        ``spherical``, ``exponential`` or ``gaussian``.
    nugget, partial_sill : float
        In squared value units; the sill is their sum.
    range_parameter : float
        The ``a`` of the model formula.
    practical_range : float
        Distance where the sill is (about 95 %) reached; equals ``a`` for the
        spherical model, ``3a`` exponential, ``sqrt(3) a`` Gaussian.
    converged : bool
        The optimiser reported success.
    weighted_criterion : float
        ``sum N_k (gamma_hat_k / gamma_k - 1)^2`` at the optimum.
    rmse : float
        Root mean square of ``gamma_hat - gamma`` over the classes used.
    r_squared : float
        Pair-weighted coefficient of determination of the fit.
    classes_used, pairs_used : int
    lag_span : tuple of float
        Mean distance of the first and last class used; ``cutoff`` is the
        last class's upper edge when known.
    trustworthy : bool
        All checks in ``reasons`` passed.
    reasons : tuple of str
        One sentence per check, passed or failed, failures first.
    candidates : dict
        Weighted criterion of each model tried (``model='auto'``).
    estimator : str
        Estimator whose values were fitted.
    direction : str
    """

    model: str
    nugget: float
    partial_sill: float
    range_parameter: float
    practical_range: float
    converged: bool
    weighted_criterion: float
    rmse: float
    r_squared: float
    classes_used: int
    pairs_used: int
    lag_span: tuple[float, float]
    cutoff: float
    trustworthy: bool
    reasons: tuple[str, ...]
    candidates: dict = field(default_factory=dict)
    estimator: str = "matheron"
    direction: str = "all"

    @property
    def sill(self) -> float:
        """Nugget plus partial sill."""
        return self.nugget + self.partial_sill

    def gamma(self, h) -> np.ndarray:
        """Model semivariance at ``h`` (0 at ``h == 0``)."""
        return variogram_model(self.model, h, self.nugget, self.partial_sill, self.range_parameter)

    def as_record(self) -> dict:
        """Plain values for ``run_info`` (None where a number is undefined)."""
        return _plain({
            "direction": self.direction,
            "estimator": self.estimator,
            "model": self.model,
            "nugget": float(self.nugget),
            "partial_sill": float(self.partial_sill),
            "sill": float(self.sill),
            "range_parameter": float(self.range_parameter),
            "practical_range": float(self.practical_range),
            "range_note": "practical_range is where about 95% of the sill is reached "
                          "(spherical: a, exponential: 3a, gaussian: sqrt(3)a); range_parameter is a.",
            "converged": bool(self.converged),
            "weighted_criterion": float(self.weighted_criterion),
            "rmse": float(self.rmse),
            "r_squared": float(self.r_squared),
            "classes_used": int(self.classes_used),
            "pairs_used": int(self.pairs_used),
            "lag_span": [float(self.lag_span[0]), float(self.lag_span[1])],
            "cutoff": float(self.cutoff),
            "trustworthy": bool(self.trustworthy),
            "reasons": list(self.reasons),
            "candidates": {k: float(v) for k, v in self.candidates.items()},
        })


def _plain(value):
    """Nested record with non-finite floats replaced by None (strict JSON has no NaN)."""
    if isinstance(value, dict):
        return {k: _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, (float, np.floating)):
        return float(value) if math.isfinite(value) else None
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, np.integer):
        return int(value)
    return value


def _structure_slope(model: str, h: np.ndarray, a: float) -> np.ndarray:
    """Derivative of :func:`_structure` with respect to the range parameter ``a``."""
    r = np.abs(h) / a
    dr_da = -r / a
    if model == "spherical":
        return np.where(r < 1.0, (1.5 - 1.5 * r**2) * dr_da, 0.0)
    if model == "exponential":
        return np.exp(-r) * dr_da
    return 2.0 * r * np.exp(-(r**2)) * dr_da


def _fit_one(model: str, h: np.ndarray, g: np.ndarray, n: np.ndarray, h_max: float, start=None):
    """Best WLS fit of one model over a few starts; returns (params, criterion, converged).

    ``start`` (nugget, partial sill, range parameter) is tried first; the
    grid of starts is used when it is absent or does not converge.
    """
    # Work in units of the largest lag and the largest gamma for conditioning.
    gs = float(np.max(g)) if np.max(g) > 0 else 1.0
    hs = h_max
    hh, gg = h / hs, g / gs
    w = np.sqrt(n.astype(float))

    def model_values(theta):
        return np.maximum(theta[0] + theta[1] * _structure(model, hh, theta[2]), 1e-12)

    def residual(theta):
        return w * (gg / model_values(theta) - 1.0)

    def jacobian(theta):
        factor = -w * gg / model_values(theta) ** 2
        return np.column_stack([
            factor,
            factor * _structure(model, hh, theta[2]),
            factor * theta[1] * _structure_slope(model, hh, theta[2]),
        ])

    first = float(gg[0])
    top = float(np.max(gg))
    factor = _PRACTICAL_FACTOR[model]
    grid = [np.array([nugget0, max(top - nugget0, 1e-3), practical0 / factor])
            for nugget0 in (0.0, 0.5 * first) for practical0 in (0.2, 0.5, 1.0)]
    lower, upper = np.array([0.0, 0.0, 1e-4]), np.array([np.inf, np.inf, 20.0])
    starts = grid
    if start is not None and np.all(np.isfinite(start)):
        x0 = np.asarray(start, dtype=float) / np.array([gs, gs, hs])
        starts = [np.clip(x0, lower + np.array([0.0, 1e-6, 0.0]), upper * 0.99)]

    def run(candidates, best):
        for x0 in candidates:
            try:
                res = least_squares(residual, x0, jac=jacobian, bounds=(lower, upper),
                                    method="trf", x_scale="jac", max_nfev=200, ftol=1e-6, xtol=1e-6)
            except (ValueError, FloatingPointError):
                continue
            crit = float(np.sum(res.fun**2))
            ok = bool(res.success) and bool(np.all(np.isfinite(res.x)))
            key = (not ok, crit)
            if best is None or key < best[0]:
                best = (key, res.x.copy(), crit, ok)
        return best

    best = run(starts, None)
    if starts is not grid and (best is None or not best[3]):
        best = run(grid, best)
    if best is None:
        return np.array([np.nan, np.nan, np.nan]), float("inf"), False
    theta = best[1] * np.array([gs, gs, hs])
    return theta, best[2], best[3]


def fit_variogram(
    distance,
    gamma,
    pairs,
    *,
    model: str = "auto",
    cutoff: float | None = None,
    min_class_pairs: int = MIN_CLASS_PAIRS,
    estimator: str = "matheron",
    direction: str = "all",
    start=None,
) -> VariogramFit:
    """Fit a spherical, exponential or Gaussian model with nugget by Cressie (1985) WLS.

    Parameters
    ----------
    distance, gamma, pairs : array_like
        Mean distance, semivariance and pair count of each lag class; empty
        classes (0 pairs or NaN) are skipped.
    model : {"auto", "spherical", "exponential", "gaussian"}
        ``"auto"`` fits all three and keeps the lowest weighted criterion.
    cutoff : float, optional
        Upper edge of the last class (default: the largest mean distance).
    min_class_pairs : int
        Pairs a class needs to count as well filled in the checks.
    estimator, direction : str
        Labels kept in the result.
    start : tuple of float, optional
        Starting (nugget, partial sill, range parameter), tried before the
        default grid of starts (which is used if it does not converge).

    Returns
    -------
    VariogramFit
        With ``trustworthy`` and the ``reasons`` for it: enough well-filled
        classes, converged, spatial structure (partial sill > 0, nugget share
        at most 0.8), practical range within the lag span, pair-weighted
        R^2 at least 0.5.
    """
    h = np.asarray(distance, dtype=float)
    g = np.asarray(gamma, dtype=float)
    n = np.asarray(pairs, dtype=float)
    if not (h.shape == g.shape == n.shape):
        raise InputError(f"distance, gamma and pairs must have one entry per class; got {h.shape}, {g.shape}, {n.shape}.")
    if model != "auto" and model not in MODELS:
        raise ConfigError(f"model {model!r} is not known; choose one of auto, {', '.join(MODELS)}.")
    ok = np.isfinite(h) & np.isfinite(g) & (n > 0) & (h > 0)
    h, g, n = h[ok], g[ok], n[ok]
    cutoff = float(cutoff) if cutoff is not None else (float(h.max()) if h.size else float("nan"))
    nan = float("nan")
    if h.size < 3 or not np.max(g) > 0:
        reason = (f"only {h.size} non-empty lag classes; a model needs at least 3 (use more points or wider classes)"
                  if h.size < 3 else "all semivariances are 0: the values do not vary")
        return VariogramFit(model if model != "auto" else "none", nan, nan, nan, nan, False, nan, nan, nan,
                            int(h.size), int(n.sum()), (nan, nan), cutoff, False, (f"not trustworthy: {reason}.",),
                            {}, estimator, direction)
    h_max = float(max(h.max(), cutoff if math.isfinite(cutoff) else 0.0))
    tried = MODELS if model == "auto" else (model,)
    fits = {m: _fit_one(m, h, g, n, h_max, start) for m in tried}
    candidates = {m: f[1] for m, f in fits.items()}
    chosen = min(tried, key=lambda m: (not fits[m][2], fits[m][1]))
    theta, crit, converged = fits[chosen]
    c0, c, a = (float(v) for v in theta)
    model_g = c0 + c * _structure(chosen, h, a)
    rmse = float(np.sqrt(np.mean((g - model_g) ** 2)))
    mean_g = float(np.average(g, weights=n))
    ss_tot = float(np.sum(n * (g - mean_g) ** 2))
    r2 = 1.0 - float(np.sum(n * (g - model_g) ** 2)) / ss_tot if ss_tot > 0 else nan
    prange = practical_range(chosen, a)

    failed, passed = [], []
    full = int(np.sum(n >= min_class_pairs))
    (passed if full >= MIN_FIT_CLASSES else failed).append(
        f"{full} lag classes have at least {min_class_pairs} pairs (needs {MIN_FIT_CLASSES})")
    (passed if converged else failed).append(
        "the weighted least-squares fit converged" if converged else "the weighted least-squares fit did not converge")
    sill = c0 + c
    share = c0 / sill if sill > 0 else 1.0
    (passed if c > 0 and share <= MAX_NUGGET_SHARE else failed).append(
        f"nugget is {share:.0%} of the sill (at most {MAX_NUGGET_SHARE:.0%} leaves spatial structure)")
    in_span = math.isfinite(prange) and h[0] <= prange <= cutoff
    (passed if in_span else failed).append(
        f"practical range {prange:.4g} {'lies' if in_span else 'does not lie'} within the lag span "
        f"[{h[0]:.4g}, {cutoff:.4g}]")
    (passed if math.isfinite(r2) and r2 >= MIN_R_SQUARED else failed).append(
        f"pair-weighted R^2 of the fit is {r2:.2f} (needs {MIN_R_SQUARED})")
    trustworthy = not failed
    reasons = tuple([f"failed: {r}" for r in failed] + [f"ok: {r}" for r in passed])
    return VariogramFit(chosen, c0, c, a, prange, converged, crit, rmse, r2, int(h.size), int(n.sum()),
                        (float(h[0]), float(h[-1])), cutoff, trustworthy, reasons, candidates, estimator, direction)


def anisotropy_hint(fits, ratio: float = ANISOTROPY_RATIO) -> dict:
    """Hint of anisotropy from directional fits whose ranges differ clearly.

    Parameters
    ----------
    fits : dict of str -> VariogramFit
        Directional fits keyed by direction label.
    ratio : float
        Largest over smallest practical range that counts as a clear difference.

    Returns
    -------
    dict
        ``hint`` (bool), ``ratio``, ``major_direction``, ``minor_direction``,
        ``ranges`` (per usable direction), ``text``. Only trustworthy fits
        are compared.
    """
    usable = {d: f.practical_range for d, f in fits.items() if f.trustworthy}
    out = {"hint": False, "ratio": None, "major_direction": None, "minor_direction": None,
           "ranges": {d: float(r) for d, r in usable.items()}, "threshold": float(ratio)}
    if len(usable) < 2:
        out["text"] = (f"{len(usable)} direction{'' if len(usable) == 1 else 's'} with a trustworthy fit; anisotropy cannot be judged.")
        return out
    major = max(usable, key=usable.get)
    minor = min(usable, key=usable.get)
    r = usable[major] / usable[minor]
    out.update(ratio=float(r), major_direction=major, minor_direction=minor, hint=bool(r >= ratio))
    if r >= ratio:
        out["text"] = (f"values stay alike {r:.1f} times farther along azimuth {major} "
                       f"({usable[major]:.4g}) than along {minor} ({usable[minor]:.4g}): likely anisotropic.")
    else:
        out["text"] = f"directional ranges differ by a factor {r:.2f} (< {ratio:g}): no clear anisotropy."
    return out
