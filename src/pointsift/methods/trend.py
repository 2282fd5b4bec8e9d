"""Regional trend: median polish on a cell grid and a robust polynomial trend surface.

Median polish (Tukey 1977, *Exploratory Data Analysis*, ch. 11; Mosteller and
Tukey 1977, *Data Analysis and Regression*, ch. 9) fits an additive table
``value[i, j] = overall + row[i] + column[j] + residual[i, j]`` by sweeping
out medians alternately from rows and columns. After each row sweep the median
of the column effects is moved into the overall value, and after each column
sweep the median of the row effects, so at convergence the row and column
medians of the residuals are zero and the effects have median zero. Empty
cells (NaN) are left out of every median. Iteration stops when the sum of
absolute residuals changes by less than ``tol`` times itself, or after
``max_iter`` full sweeps (both as R's ``stats::medpolish``). Rows are swept
first by default.

For points, a square grid of cells is laid over the usable points (rows run
south to north, columns west to east; cell edges at whole multiples of the
cell size). Each cell holds the median of its points; empty cells are NaN.
The polish gives each point the fit ``overall + row[its row] + column[its
column]`` and the residual ``value - fit``. The default cell size makes the
bounding box hold about ``n / target_per_cell`` cells, rounded to 1, 2, 2.5
or 5 times a power of ten.

The robust trend surface is a polynomial in the coordinates, order 1
(``1, x, y``) or 2 (adds ``x^2, xy, y^2``), with coordinates centred on their
means and divided by one common scale (the larger standard deviation of x and
y), fitted by iteratively reweighted least squares (Huber 1981, *Robust
Statistics*; Holland and Welsch 1977). The start is ordinary least squares;
each step estimates the residual scale as ``median(|r|) / 0.6745``, sets the
weights from Huber's function (``t = 1.345``) or Tukey's bisquare
(``c = 4.685``), and solves the weighted least squares problem, until the sum
of ``rho(r / scale)`` changes by less than ``tol`` times itself (the scheme and
defaults of ``statsmodels`` ``RLM.fit``, whose ``tol`` is absolute).

Both report the share of variance the trend explains,
``1 - var(residual) / var(value)`` (``n - 1`` denominators), and a robust
share ``1 - (MAD(residual) / MAD(value))**2`` that a few wild values cannot
dominate.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np

from ..errors import ConfigError, InputError
from .robust import NORMAL_Q75 as _MAD_TO_SIGMA

__all__ = [
    "MedianPolish",
    "PolishSurface",
    "TrendSurface",
    "median_polish",
    "median_polish_surface",
    "trend_surface",
    "surface_design",
    "regional_trend",
    "WEIGHT_FUNCTIONS",
]

#: Robust weight functions and their default tuning constants (95 % Gaussian efficiency).
WEIGHT_FUNCTIONS = {"huber": 1.345, "bisquare": 4.685}
_NICE = np.array([1.0, 2.0, 2.5, 5.0, 10.0])


# --------------------------------------------------------------------------- median polish


@dataclass(frozen=True)
class MedianPolish:
    """Result of a median polish of a two-way table.

    Attributes
    ----------
    overall : float
    row_effects : ndarray, shape (rows,)
    column_effects : ndarray, shape (columns,)
    residuals : ndarray, shape (rows, columns)
        NaN where the table was empty.
    iterations : int
        Full sweeps (rows and columns) done.
    converged : bool
    """

    overall: float
    row_effects: np.ndarray
    column_effects: np.ndarray
    residuals: np.ndarray
    iterations: int
    converged: bool

    @property
    def fitted(self) -> np.ndarray:
        """``overall + row + column`` for every cell."""
        return self.overall + self.row_effects[:, None] + self.column_effects[None, :]


def _nanmedian(a: np.ndarray, axis=None):
    # All-NaN rows or columns (empty grid bands) contribute a zero effect.
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        med = np.nanmedian(a, axis=axis)
    return np.nan_to_num(med, nan=0.0)


def median_polish(table, *, max_iter: int = 10, tol: float = 0.01, sweep_first: str = "rows") -> MedianPolish:
    """Tukey's median polish of a two-way table.

    Parameters
    ----------
    table : array_like of float, shape (rows, columns)
        NaN marks empty cells.
    max_iter : int
        Most full sweeps.
    tol : float
        Stop when the sum of absolute residuals changes by less than
        ``tol`` times itself.
    sweep_first : {"rows", "columns"}
        Which medians are swept out first.

    Returns
    -------
    MedianPolish

    Examples
    --------
    >>> fit = median_polish([[1.0, 2.0], [3.0, 5.0]])
    >>> float(fit.overall), fit.row_effects.tolist(), fit.column_effects.tolist()
    (2.75, [-1.25, 1.25], [-0.75, 0.75])
    """
    z = np.array(table, dtype=float)
    if z.ndim != 2 or z.size == 0:
        raise InputError(f"median_polish needs a non-empty two-way table; got shape {z.shape}.")
    if sweep_first not in ("rows", "columns"):
        raise ConfigError(f"sweep_first {sweep_first!r} is not known; choose one of rows, columns.")
    if not (isinstance(max_iter, (int, np.integer)) and max_iter >= 1):
        raise ConfigError(f"max_iter must be a whole number of at least 1, got {max_iter!r}.")
    transpose = sweep_first == "columns"
    if transpose:
        z = z.T
    rows = np.zeros(z.shape[0])
    cols = np.zeros(z.shape[1])
    overall = 0.0
    old = 0.0
    converged = False
    iterations = 0
    for iterations in range(1, max_iter + 1):
        row_delta = _nanmedian(z, axis=1)
        z -= row_delta[:, None]
        rows += row_delta
        delta = float(_nanmedian(cols))
        cols -= delta
        overall += delta
        col_delta = _nanmedian(z, axis=0)
        z -= col_delta[None, :]
        cols += col_delta
        delta = float(_nanmedian(rows))
        rows -= delta
        overall += delta
        new = float(np.nansum(np.abs(z)))
        if new == 0 or abs(new - old) < tol * new:
            converged = True
            break
        old = new
    if transpose:
        z, rows, cols = z.T, cols, rows
    return MedianPolish(overall, rows, cols, z, iterations, converged)


def _nice(width: float) -> float:
    exponent = math.floor(math.log10(width))
    mantissa = width / 10.0**exponent
    return float(_NICE[np.argmin(np.abs(np.log(_NICE / mantissa)))] * 10.0**exponent)


def _usable(x, y, values):
    x = np.asarray(x, dtype=float).ravel()
    y = np.asarray(y, dtype=float).ravel()
    v = np.asarray(values, dtype=float).ravel()
    if not (x.shape == y.shape == v.shape):
        raise InputError(f"x, y and values must have one entry per point; got {x.size}, {y.size} and {v.size}.")
    usable = np.isfinite(x) & np.isfinite(y) & np.isfinite(v)
    return x, y, v, usable


def _shares(values: np.ndarray, residual: np.ndarray) -> tuple[float, float]:
    if values.size < 2:
        return math.nan, math.nan
    var_v = float(np.var(values, ddof=1))
    share = 1.0 - float(np.var(residual, ddof=1)) / var_v if var_v > 0 else math.nan
    mad_v = float(np.median(np.abs(values - np.median(values))))
    mad_r = float(np.median(np.abs(residual - np.median(residual))))
    robust = 1.0 - (mad_r / mad_v) ** 2 if mad_v > 0 else math.nan
    return share, robust


@dataclass(frozen=True)
class PolishSurface:
    """Median polish of point values aggregated to a cell grid.

    Attributes
    ----------
    polish : MedianPolish
        Polish of the cell table (rows south to north, columns west to east).
    cell_size : float
        Cell side in metres.
    x_edges, y_edges : ndarray
        Column and row edges (metres).
    cells : ndarray, shape (rows, columns)
        Median of the points in each cell, NaN where empty.
    cell_row, cell_column : ndarray of int, shape (n,)
        Cell of each point, ``-1`` where the point is unusable.
    fitted, residual : ndarray of float, shape (n,)
        ``overall + row + column`` of the point's cell and ``value - fitted``;
        NaN where unusable.
    variance_explained, robust_variance_explained : float
        See the module docstring.
    """

    polish: MedianPolish
    cell_size: float
    x_edges: np.ndarray
    y_edges: np.ndarray
    cells: np.ndarray
    cell_row: np.ndarray
    cell_column: np.ndarray
    fitted: np.ndarray
    residual: np.ndarray
    variance_explained: float
    robust_variance_explained: float


def median_polish_surface(
    x,
    y,
    values,
    cell_size: float | None = None,
    *,
    target_per_cell: int = 4,
    max_iter: int = 10,
    tol: float = 0.01,
    sweep_first: str = "rows",
) -> PolishSurface:
    """Median polish trend over irregular points: points to cells, polish, back to points.

    Parameters
    ----------
    x, y : array_like of float, shape (n,)
        Coordinates in metres (work CRS); non-finite marks an unusable point.
    values : array_like of float, shape (n,)
    cell_size : float, optional
        Cell side in metres; from the point density when omitted.
    target_per_cell : int
        Average points per cell of the bounding box aimed at by the default size.
    max_iter, tol, sweep_first
        As for :func:`median_polish`.

    Returns
    -------
    PolishSurface

    Raises
    ------
    InputError
        When fewer than 2 points are usable or the grid would exceed 10**6 cells.
    ConfigError
        For a bad ``cell_size`` or ``target_per_cell``.
    """
    x, y, v, usable = _usable(x, y, values)
    if usable.sum() < 2:
        raise InputError(f"Median polish needs at least 2 usable points; got {int(usable.sum())}.")
    if cell_size is not None and not (isinstance(cell_size, (int, float)) and math.isfinite(cell_size) and cell_size > 0):
        raise ConfigError(f"cell_size must be a positive length in metres, got {cell_size!r}.")
    if not (isinstance(target_per_cell, (int, np.integer)) and target_per_cell >= 1):
        raise ConfigError(f"target_per_cell must be a whole number of at least 1, got {target_per_cell!r}.")
    xu, yu, vu = x[usable], y[usable], v[usable]
    if cell_size is None:
        dx, dy = float(np.ptp(xu)), float(np.ptp(yu))
        side = max(dx, dy)
        if side == 0:
            cell_size = 1.0
        else:
            # Area of the bounding box, with a degenerate (linear) layout treated as one cell wide.
            area = max(dx, side / 1000.0) * max(dy, side / 1000.0)
            cell_size = _nice(math.sqrt(area * target_per_cell / xu.size))
    x0 = math.floor(xu.min() / cell_size) * cell_size
    y0 = math.floor(yu.min() / cell_size) * cell_size
    col = np.floor((xu - x0) / cell_size).astype(np.int64)
    row = np.floor((yu - y0) / cell_size).astype(np.int64)
    n_rows, n_cols = int(row.max()) + 1, int(col.max()) + 1
    if n_rows * n_cols > 1_000_000:
        raise InputError(
            f"cell_size {cell_size:g} m gives a grid of {n_rows} x {n_cols} cells; pass a larger cell_size."
        )
    flat = row * n_cols + col
    order = np.lexsort((vu, flat))
    sf, sv = flat[order], vu[order]
    counts = np.bincount(sf, minlength=n_rows * n_cols)
    starts = np.r_[0, np.cumsum(counts)[:-1]]
    has = counts > 0
    h = starts[has] + (counts[has] - 1) * 0.5
    lo, hi = np.floor(h).astype(np.intp), np.ceil(h).astype(np.intp)
    cells = np.full(n_rows * n_cols, np.nan)
    cells[has] = (sv[lo] + sv[hi]) / 2.0
    cells = cells.reshape(n_rows, n_cols)
    polish = median_polish(cells, max_iter=max_iter, tol=tol, sweep_first=sweep_first)
    fitted = np.full(x.size, np.nan)
    fitted[usable] = polish.overall + polish.row_effects[row] + polish.column_effects[col]
    residual = v - fitted
    share, robust = _shares(vu, residual[usable])
    cell_row = np.full(x.size, -1, dtype=np.int64)
    cell_column = np.full(x.size, -1, dtype=np.int64)
    cell_row[usable], cell_column[usable] = row, col
    return PolishSurface(
        polish=polish,
        cell_size=float(cell_size),
        x_edges=x0 + cell_size * np.arange(n_cols + 1),
        y_edges=y0 + cell_size * np.arange(n_rows + 1),
        cells=cells,
        cell_row=cell_row,
        cell_column=cell_column,
        fitted=fitted,
        residual=residual,
        variance_explained=share,
        robust_variance_explained=robust,
    )


# --------------------------------------------------------------------------- trend surface


_TERMS = {1: ("1", "x", "y"), 2: ("1", "x", "y", "x^2", "xy", "y^2")}


def surface_design(x, y, order: int, centre: tuple[float, float], scale: float) -> np.ndarray:
    """Design matrix of a polynomial trend surface in centred, scaled coordinates.

    Parameters
    ----------
    x, y : array_like of float
    order : {1, 2}
    centre : (float, float)
        Subtracted from x and y.
    scale : float
        Divides both centred coordinates.

    Returns
    -------
    ndarray, shape (n, 3) or (n, 6)
        Columns ``1, x, y`` (and ``x^2, xy, y^2`` for order 2).
    """
    if order not in _TERMS:
        raise ConfigError(f"Trend surface order {order!r} is not supported; choose 1 or 2.")
    u = (np.asarray(x, dtype=float) - centre[0]) / scale
    w = (np.asarray(y, dtype=float) - centre[1]) / scale
    columns = [np.ones_like(u), u, w]
    if order == 2:
        columns += [u * u, u * w, w * w]
    return np.column_stack(columns)


def _weights(r: np.ndarray, kind: str, c: float) -> np.ndarray:
    a = np.abs(r)
    if kind == "huber":
        return np.where(a <= c, 1.0, c / np.maximum(a, 1e-300))
    return np.where(a < c, (1.0 - (r / c) ** 2) ** 2, 0.0)


def _rho(r: np.ndarray, kind: str, c: float) -> np.ndarray:
    a = np.abs(r)
    if kind == "huber":
        return np.where(a <= c, 0.5 * r * r, c * a - 0.5 * c * c)
    return np.where(a <= c, c * c / 6.0 * (1.0 - (1.0 - (r / c) ** 2) ** 3), c * c / 6.0)


@dataclass(frozen=True)
class TrendSurface:
    """A robust polynomial trend surface fitted to point values.

    Attributes
    ----------
    order : int
    weight_function : str
        ``"huber"`` or ``"bisquare"``.
    tuning : float
        Tuning constant of the weight function.
    terms : tuple of str
        Names of the coefficients.
    coefficients : ndarray
        In centred, scaled coordinates (see :func:`surface_design`).
    centre : (float, float)
    scale : float
        Coordinate scale (metres).
    residual_scale : float
        Final robust scale of the residuals, ``median(|r|) / 0.6745``.
    weights, fitted, residual : ndarray, shape (n,)
        Final IRLS weights, fitted values, ``value - fitted``; NaN where unusable.
    iterations : int
    converged : bool
    variance_explained, robust_variance_explained : float
    """

    order: int
    weight_function: str
    tuning: float
    terms: tuple[str, ...]
    coefficients: np.ndarray
    centre: tuple[float, float]
    scale: float
    residual_scale: float
    weights: np.ndarray
    fitted: np.ndarray
    residual: np.ndarray
    iterations: int
    converged: bool
    variance_explained: float
    robust_variance_explained: float

    def predict(self, x, y) -> np.ndarray:
        """The trend at other points (same CRS)."""
        return surface_design(x, y, self.order, self.centre, self.scale) @ self.coefficients


def _wls(X: np.ndarray, v: np.ndarray, w: np.ndarray) -> np.ndarray:
    # Normal equations: with centred, scaled coordinates the 3x3 / 6x6 system is well
    # conditioned, and forming it is far cheaper than a QR of the n x p matrix.
    weighted = X * w[:, None]
    try:
        return np.linalg.solve(weighted.T @ X, weighted.T @ v)
    except np.linalg.LinAlgError:
        sw = np.sqrt(w)
        coef, *_ = np.linalg.lstsq(X * sw[:, None], v * sw, rcond=None)
        return coef


def trend_surface(
    x,
    y,
    values,
    order: int = 1,
    weight_function: str = "huber",
    *,
    tuning: float | None = None,
    max_iter: int = 50,
    tol: float = 1e-8,
) -> TrendSurface:
    """Fit a robust polynomial trend surface by iteratively reweighted least squares.

    Parameters
    ----------
    x, y : array_like of float, shape (n,)
        Coordinates in metres (work CRS); non-finite marks an unusable point.
    values : array_like of float, shape (n,)
    order : {1, 2}
        Plane or quadratic surface.
    weight_function : {"huber", "bisquare"}
    tuning : float, optional
        Tuning constant (default 1.345 for Huber, 4.685 for bisquare).
    max_iter : int
        Most reweighting steps.
    tol : float
        Stop when the summed ``rho`` changes by less than this fraction of itself.

    Returns
    -------
    TrendSurface

    Raises
    ------
    InputError
        When there are too few usable points or their coordinates do not
        spread in two dimensions.
    ConfigError
        For an unknown order or weight function.
    """
    if order not in _TERMS:
        raise ConfigError(f"Trend surface order {order!r} is not supported; choose 1 or 2.")
    if weight_function not in WEIGHT_FUNCTIONS:
        raise ConfigError(
            f"weight_function {weight_function!r} is not known; choose one of {', '.join(WEIGHT_FUNCTIONS)}."
        )
    c = float(WEIGHT_FUNCTIONS[weight_function] if tuning is None else tuning)
    if not c > 0:
        raise ConfigError(f"tuning must be positive, got {tuning!r}.")
    x, y, v, usable = _usable(x, y, values)
    xu, yu, vu = x[usable], y[usable], v[usable]
    n_terms = len(_TERMS[order])
    if xu.size <= n_terms:
        raise InputError(
            f"An order-{order} trend surface needs more than {n_terms} usable points; got {xu.size}."
        )
    centre = (float(xu.mean()), float(yu.mean()))
    scale = float(max(xu.std(), yu.std()))
    if not scale > 0:
        raise InputError("All usable points share one location; a trend surface cannot be fitted.")
    X = surface_design(xu, yu, order, centre, scale)
    if np.linalg.matrix_rank(X) < n_terms:
        raise InputError(
            f"The points do not spread enough (e.g. they lie on one line) to fit an order-{order} surface; "
            "use order 1 or median polish."
        )
    weights = np.ones_like(vu)
    coef = _wls(X, vu, weights)
    resid = vu - X @ coef
    res_scale = float(np.median(np.abs(resid)) / _MAD_TO_SIGMA)
    deviance = math.inf
    converged = False
    iterations = 0
    for iterations in range(1, max_iter + 1):
        if res_scale == 0:
            # A perfect fit of at least half the points: nothing left to reweight.
            converged = True
            break
        weights = _weights(resid / res_scale, weight_function, c)
        coef = _wls(X, vu, weights)
        resid = vu - X @ coef
        res_scale = float(np.median(np.abs(resid)) / _MAD_TO_SIGMA)
        new = float(_rho(resid / res_scale, weight_function, c).sum()) if res_scale > 0 else 0.0
        # Relative change: the sum of rho over a million points never settles to an absolute 1e-8.
        if abs(new - deviance) <= tol * max(abs(new), 1.0):
            converged = True
            break
        deviance = new
    fitted = np.full(x.size, np.nan)
    fitted[usable] = X @ coef
    residual = v - fitted
    w_all = np.full(x.size, np.nan)
    w_all[usable] = weights
    share, robust = _shares(vu, resid)
    return TrendSurface(
        order=order,
        weight_function=weight_function,
        tuning=c,
        terms=_TERMS[order],
        coefficients=coef,
        centre=centre,
        scale=scale,
        residual_scale=res_scale,
        weights=w_all,
        fitted=fitted,
        residual=residual,
        iterations=iterations,
        converged=converged,
        variance_explained=share,
        robust_variance_explained=robust,
    )


def regional_trend(x, y, values, mode: str = "auto", *, sample: int | None = None, seed: int = 0):
    """The regional trend the screen and ``describe`` take out, by one rule.

    Parameters
    ----------
    x, y, values : array_like
        Coordinates (metres) and values; non-finite values are left out.
    mode : {"auto", "none", "surface1", "surface2", "polish"}
        ``auto`` is a robust quadratic surface (bisquare IRLS), or a plane
        under 30 usable points; ``polish`` is median polish on a cell grid.
    sample : int, optional
        Fit a surface on at most this many points (seeded sample) and
        evaluate it everywhere: a surface of at most six terms is fixed as
        well by 20,000 points as by a million.
    seed : int
        Seed of that sample.

    Returns
    -------
    fit : TrendSurface, PolishSurface or None
        None when no trend was fitted.
    residual : ndarray
        Values minus the trend (the values themselves when no trend).
    info : dict
        ``method``, ``variance_explained`` and any note, for the run record.
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    v = np.asarray(values, dtype=float)
    usable = np.isfinite(x) & np.isfinite(y) & np.isfinite(v)
    n = int(usable.sum())
    if mode == "none":
        return None, v, {"method": "none"}
    if n < 10:
        return None, v, {"method": "none", "note": f"trend not fitted: only {n} usable points (10 needed)"}
    try:
        if mode == "polish":
            fit = median_polish_surface(x, y, v)
            return fit, fit.residual, {
                "method": f"median polish on {fit.cell_size:g} m cells",
                "variance_explained": float(fit.variance_explained),
                "robust_variance_explained": float(fit.robust_variance_explained),
            }
        order = 1 if mode == "surface1" or (mode == "auto" and n < 30) else 2
        note = {}
        if sample is not None and n > sample:
            rows = np.random.default_rng(seed).choice(np.flatnonzero(usable), sample, replace=False)
            in_sample = np.zeros(v.size, dtype=bool)
            in_sample[rows] = True
            fit = trend_surface(x, y, np.where(in_sample, v, np.nan), order=order, weight_function="bisquare")
            residual = v - fit.predict(x, y)
            note = {"fitted_on_sample": int(sample)}
        else:
            fit = trend_surface(x, y, v, order=order, weight_function="bisquare")
            residual = fit.residual
        return fit, residual, {
            "method": f"robust trend surface, order {order} (bisquare IRLS)",
            "variance_explained": float(fit.variance_explained),
            "robust_variance_explained": float(fit.robust_variance_explained),
            **note,
        }
    except InputError as exc:
        return None, v, {"method": "none", "note": f"trend not fitted: {exc}"}
