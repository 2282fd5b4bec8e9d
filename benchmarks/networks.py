"""Invented monitoring-well networks with planted mistakes, for benchmarking pointsift.

Every network is made up from a seed: no real well, place or survey is used.
The water-level surface is smooth and built from parts a hydrogeologist would
recognise,

* a regional plane (the general gradient of the water table),
* a valley: a parabolic trough across an axis, so levels rise towards the flanks,
* pumping cones: Gaussian-shaped depressions where a town or a well field
  pumps; the wells inside one are low *together* and are sound (kind ``cone``),
* small-scale correlated variation: a sum of random Fourier modes (random
  Fourier features of a Gaussian covariance, Rahimi & Recht, 2007), evaluated
  in vectorised chunks so a million points take about a second,
* measurement noise (independent, normal),

and values are recorded to the centimetre. Then a share of the wells gets one
planted mistake each (``ERROR_KINDS``), and the truth says which rows hold
which mistake.

"Local standard deviation" (used to size spikes and to keep subtle
transpositions out) has one definition here: for a well, the leave-one-out
residual is its clean value minus the least-squares plane through its 8
nearest wells' clean values, evaluated at the well; its local sd is
1.4826 x the median absolute leave-one-out residual among the well and its 24
nearest wells. It follows the spacing: small in a dense town, larger between
rural wells kilometres apart.

Run ``python benchmarks/networks.py dense --seed 1 --out dense.gpkg`` to
write one network (layer ``wells``) and its truth (``dense_truth.csv``).
"""

from __future__ import annotations

import argparse
import math
from dataclasses import dataclass, replace

import numpy as np
import pandas as pd
from scipy.spatial import cKDTree

__all__ = [
    "ERROR_KINDS",
    "NETWORK_KINDS",
    "FOOT_IN_METRES",
    "NetworkSpec",
    "spec_for",
    "make_network",
    "local_sd",
    "transpose_digits",
]

#: The international foot, exactly 0.3048 m (international yard and pound
#: agreement, 1959).
FOOT_IN_METRES = 0.3048

#: Planted mistakes, in the order they are dealt out.
ERROR_KINDS = (
    "decimal_slip",
    "feet_as_metres",
    "depth_as_level",
    "transposed_digits",
    "spike",
    "misplaced",
    "duplicate_conflict",
)

#: Network kinds known to :func:`make_network`.
NETWORK_KINDS = ("dense", "clustered", "sparse", "trended", "large")

#: Local metric frame: UTM zone 27 south, centred on its central meridian.
#: The point (0, 0) of every network is at about 21.0 W, 32.5 S, in the open
#: South Atlantic, chosen on purpose so nobody mistakes these wells for a
#: real place.
WORK_CRS = "EPSG:32727"
ORIGIN_EASTING = 500_000.0
ORIGIN_NORTHING = 6_400_000.0

#: Neighbours used by the local-sd definition and by the spacing of planted rows.
_NEIGHBOURS = 8
#: Wells pooled around a well for its local sd (the well itself and 24 nearest):
#: a median over only 9 is too noisy (it can fall to a third of the truth).
_POOL = 24
_CHUNK = 131_072


@dataclass(frozen=True)
class NetworkSpec:
    """Everything that shapes one kind of network (lengths in km, levels in m).

    Parameters
    ----------
    n : int
        Number of records, planted duplicate records included.
    width_km, height_km : float
        Extent of the network, centred on the local origin.
    towns : int
        Number of towns; each draws ``town_share`` of the wells around it and
        pumps a cone.
    town_share : float
        Share of wells in towns (the rest are spread uniformly: rural wells).
    town_sd_km : float
        Spread (standard deviation) of the wells of one town.
    free_cones : int
        Extra cones outside towns (well fields in the open country).
    cone_cluster : int
        Observation wells added around each free cone (normal, sd = cone_sd_km).
    cone_depth_m, cone_sd_km : float
        Depth at the centre and width of each Gaussian-shaped cone.
    base_level_m : float
        Level at the centre of the network before the valley and the cones.
    gradient_m_per_km : tuple of float
        Regional gradient (east, north).
    valley_m_per_km2 : float
        Curvature across the valley axis: levels rise by ``c * u**2`` at a
        distance ``u`` km from the axis.
    valley_axis_deg : float
        Direction of the valley axis, degrees counter-clockwise from east.
    wander_sd_m, wander_km : float
        Standard deviation and correlation length of the small-scale smooth
        variation (Gaussian covariance).
    noise_sd_m : float
        Measurement noise.
    error_share : float
        Share of records holding a planted mistake (split evenly over kinds).
    """

    n: int
    width_km: float
    height_km: float
    towns: int = 0
    town_share: float = 0.0
    town_sd_km: float = 2.5
    free_cones: int = 1
    cone_cluster: int = 0
    cone_depth_m: float = 15.0
    cone_sd_km: float = 0.8
    base_level_m: float = 380.0
    gradient_m_per_km: tuple[float, float] = (2.0, -1.0)
    valley_m_per_km2: float = 0.1
    valley_axis_deg: float = 20.0
    wander_sd_m: float = 1.2
    wander_km: float = 3.0
    noise_sd_m: float = 0.15
    error_share: float = 0.03


_SPECS = {
    # about 3.3 wells per km2, nearest wells ~300 m apart
    "dense": NetworkSpec(n=3000, width_km=30, height_km=30, free_cones=1, cone_depth_m=15, cone_sd_km=0.8,
                         base_level_m=370, gradient_m_per_km=(2.5, -1.0), valley_m_per_km2=0.12,
                         valley_axis_deg=20, wander_sd_m=1.2, wander_km=3.0),
    # one town of 1,000 wells (nearest ~100 m) among 2,000 rural wells (~600 m)
    "clustered": NetworkSpec(n=3000, width_km=50, height_km=50, towns=1, town_share=1 / 3, town_sd_km=2.5,
                             free_cones=0, cone_depth_m=12, cone_sd_km=0.5, base_level_m=350,
                             gradient_m_per_km=(1.5, 2.0), valley_m_per_km2=0.06, valley_axis_deg=65,
                             wander_sd_m=1.5, wander_km=4.0),
    # 300 wells over 120 x 120 km: nearest wells ~3.5 km apart, a curved surface,
    # and a well field watched by a dozen observation wells
    "sparse": NetworkSpec(n=300, width_km=120, height_km=120, free_cones=1, cone_cluster=12, cone_depth_m=25,
                          cone_sd_km=3.0, base_level_m=330, gradient_m_per_km=(1.2, -0.6),
                          valley_m_per_km2=0.015, valley_axis_deg=35, wander_sd_m=6.0, wander_km=15.0,
                          noise_sd_m=0.2),
    # a strong regional gradient, about 8 m per km
    "trended": NetworkSpec(n=2000, width_km=40, height_km=40, free_cones=1, cone_depth_m=15,
                           cone_sd_km=1.2, base_level_m=360, gradient_m_per_km=(7.0, 3.5), valley_m_per_km2=0.03,
                           valley_axis_deg=0, wander_sd_m=1.0, wander_km=3.0),
}


def spec_for(kind: str, n: int | None = None) -> NetworkSpec:
    """The :class:`NetworkSpec` of a network kind, optionally with another size.

    For ``"large"`` the extent grows with ``n`` (100 km square at 100,000
    wells, about 10 wells per km2) and the gradients shrink with it, so the
    levels stay between about 150 and 600 m. For the other kinds ``n``
    changes only the number of wells.

    Parameters
    ----------
    kind : str
        One of :data:`NETWORK_KINDS`.
    n : int, optional
        Number of records; the kind's own size when omitted.

    Returns
    -------
    NetworkSpec
    """
    if kind not in NETWORK_KINDS:
        raise ValueError(f"network kind {kind!r} is not known; choose one of {', '.join(NETWORK_KINDS)}.")
    if n is not None and (int(n) != n or n < 50):
        raise ValueError(f"n must be a whole number of at least 50 wells, got {n!r}.")
    if kind == "large":
        n = 100_000 if n is None else int(n)
        width = 100.0 * math.sqrt(n / 100_000)
        shrink = 100.0 / width
        return NetworkSpec(n=n, width_km=width, height_km=width, towns=max(1, round(5 * n / 100_000)),
                           town_share=0.3, town_sd_km=2.5, free_cones=0, cone_depth_m=12, cone_sd_km=0.5,
                           base_level_m=370, gradient_m_per_km=(1.5 * shrink, 0.8 * shrink),
                           valley_m_per_km2=0.01 * shrink**2, valley_axis_deg=30, wander_sd_m=1.5,
                           wander_km=4.0)
    spec = _SPECS[kind]
    return spec if n is None else replace(spec, n=int(n))


@dataclass(frozen=True)
class _Field:
    """The smooth level surface (m), evaluated at local coordinates in km."""

    spec: NetworkSpec
    valley_point: np.ndarray  # a point on the valley axis, km
    cone_centres: np.ndarray  # (c, 2), km
    cone_depths: np.ndarray  # (c,)
    cone_sds: np.ndarray  # (c,)
    frequencies: np.ndarray  # (2, m), radians per km
    phases: np.ndarray  # (m,)

    def cone_drawdown(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        drawdown = np.zeros_like(x)
        for centre, depth, sd in zip(self.cone_centres, self.cone_depths, self.cone_sds):
            r2 = (x - centre[0]) ** 2 + (y - centre[1]) ** 2
            drawdown += depth * np.exp(-r2 / (2 * sd**2))
        return drawdown

    def wander(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        m = self.phases.size
        amplitude = self.spec.wander_sd_m * math.sqrt(2.0 / m)
        out = np.empty_like(x)
        for start in range(0, x.size, _CHUNK):
            stop = start + _CHUNK
            angle = np.outer(x[start:stop], self.frequencies[0]) + np.outer(y[start:stop], self.frequencies[1])
            angle += self.phases
            out[start:stop] = np.cos(angle).sum(axis=1) * amplitude
        return out

    def __call__(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        spec = self.spec
        axis = math.radians(spec.valley_axis_deg)
        across = -(x - self.valley_point[0]) * math.sin(axis) + (y - self.valley_point[1]) * math.cos(axis)
        gx, gy = spec.gradient_m_per_km
        return (
            spec.base_level_m
            + gx * x
            + gy * y
            + spec.valley_m_per_km2 * across**2
            - self.cone_drawdown(x, y)
            + self.wander(x, y)
        )


def _uniform(rng: np.random.Generator, count: int, spec: NetworkSpec) -> np.ndarray:
    return np.column_stack(
        [rng.uniform(-spec.width_km / 2, spec.width_km / 2, count),
         rng.uniform(-spec.height_km / 2, spec.height_km / 2, count)]
    )


def _inside(xy: np.ndarray, spec: NetworkSpec) -> np.ndarray:
    return (np.abs(xy[:, 0]) <= spec.width_km / 2) & (np.abs(xy[:, 1]) <= spec.height_km / 2)


def _around(rng: np.random.Generator, centre: np.ndarray, sd: float, count: int, spec: NetworkSpec) -> np.ndarray:
    """``count`` points normally spread around ``centre``, redrawn until inside the extent."""
    kept = np.empty((0, 2))
    while kept.shape[0] < count:
        draw = centre + rng.normal(0.0, sd, size=(2 * count + 8, 2))
        kept = np.vstack([kept, draw[_inside(draw, spec)]])
    return kept[:count]


def _plane_loo_residuals(tree: cKDTree, xy: np.ndarray, values: np.ndarray, rows: np.ndarray) -> np.ndarray:
    """Leave-one-out residual of a least-squares plane through the 8 nearest wells."""
    _, neighbours = tree.query(xy[rows], k=_NEIGHBOURS + 1, workers=-1)
    # drop the row itself by id (never "the first neighbour"), keep the 8 nearest others
    is_self = neighbours == rows[:, None]
    order = np.argsort(is_self, axis=1, kind="stable")
    neighbours = np.take_along_axis(neighbours, order, axis=1)[:, :_NEIGHBOURS]
    d = xy[neighbours] - xy[rows][:, None, :]
    scale = np.maximum(np.abs(d).max(axis=(1, 2)), 1e-9)[:, None, None]
    design = np.concatenate([np.ones(d.shape[:2] + (1,)), d / scale], axis=2)
    gram = np.einsum("nki,nkj->nij", design, design) + 1e-9 * np.eye(3)
    rhs = np.einsum("nki,nk->ni", design, values[neighbours])
    coef = np.linalg.solve(gram, rhs[..., None])[..., 0]
    return values[rows] - coef[:, 0]


def local_sd(xy: np.ndarray, values: np.ndarray, rows: np.ndarray | None = None,
             tree: cKDTree | None = None) -> np.ndarray:
    """Local standard deviation of ``values`` at ``rows`` (see the module docstring).

    Parameters
    ----------
    xy : ndarray, shape (n, 2)
        Coordinates in a metric frame (any unit; the result is in value units).
    values : ndarray, shape (n,)
        Values without planted mistakes.
    rows : ndarray of int, optional
        Rows to evaluate; all rows when omitted.
    tree : scipy.spatial.cKDTree, optional
        A tree over ``xy``, to avoid building it again.

    Returns
    -------
    ndarray
        1.4826 x median |leave-one-out plane residual| over the well and its
        24 nearest wells.
    """
    xy = np.asarray(xy, dtype=float)
    values = np.asarray(values, dtype=float)
    tree = cKDTree(xy) if tree is None else tree
    rows = np.arange(xy.shape[0]) if rows is None else np.asarray(rows, dtype=np.int64)
    _, group = tree.query(xy[rows], k=min(_POOL + 1, xy.shape[0]), workers=-1)
    needed, inverse = np.unique(group, return_inverse=True)
    residual = _plane_loo_residuals(tree, xy, values, needed)
    return 1.4826 * np.median(np.abs(residual[inverse.reshape(group.shape)]), axis=1)


def transpose_digits(value: float, rng: np.random.Generator, min_change: float) -> tuple[float, str] | None:
    """Swap two adjacent significant digits of ``value`` written to the centimetre.

    Pairs are tried in random order; a pair of equal digits, a swap that puts
    a zero in front, or a swap changing the value by less than ``min_change``
    is skipped. Returns the new value and a description, or None when no pair
    qualifies.
    """
    text = f"{value:.2f}"
    sign = "-" if text.startswith("-") else ""
    digits = text.lstrip("-").replace(".", "")
    point = len(digits) - 2
    for i in rng.permutation(len(digits) - 1):
        a, b = digits[i], digits[i + 1]
        if a == b or (i == 0 and b == "0"):
            continue
        swapped = digits[:i] + b + a + digits[i + 2:]
        new = float(f"{sign}{swapped[:point]}.{swapped[point:]}")
        if abs(new - value) >= min_change:
            return new, f"digits {i + 1}-{i + 2} swapped: {text} -> {new:.2f}"
    return None


def _spaced_rows(rng: np.random.Generator, tree: cKDTree, xy: np.ndarray, eligible: np.ndarray,
                 wanted: int) -> np.ndarray:
    """Up to ``wanted`` eligible rows, no two among each other's 8 nearest wells."""
    candidates = rng.permutation(np.flatnonzero(eligible))[: 4 * wanted + 16]
    _, neighbours = tree.query(xy[candidates], k=_NEIGHBOURS + 1)
    taken = np.zeros(xy.shape[0], dtype=bool)
    blocked = np.zeros(xy.shape[0], dtype=bool)
    chosen = []
    for row, near in zip(candidates.tolist(), neighbours):
        if blocked[row] or taken[near].any():
            continue
        chosen.append(row)
        taken[row] = True
        blocked[near] = True
        if len(chosen) == wanted:
            break
    return np.asarray(chosen, dtype=np.int64)


def _to_geographic(xy_km: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    from pyproj import Transformer

    to_lonlat = Transformer.from_crs(WORK_CRS, "EPSG:4326", always_xy=True)
    return to_lonlat.transform(xy_km[:, 0] * 1000 + ORIGIN_EASTING, xy_km[:, 1] * 1000 + ORIGIN_NORTHING)


def make_network(kind: str, n: int | None = None, seed: int = 0, *, errors_per_kind: int | None = None,
                 geographic: bool = True, value: str = "level_m", id: str = "well_id",
                 spec: NetworkSpec | None = None):
    """Make an invented well network with planted mistakes, and its truth.

    Parameters
    ----------
    kind : str
        One of :data:`NETWORK_KINDS`: ``"dense"`` (3,000 wells), ``"clustered"``
        (a town and rural wells), ``"sparse"`` (300 wells over 120 km),
        ``"trended"`` (a strong gradient), ``"large"`` (100,000 by default).
    n : int, optional
        Number of records (rows), planted duplicates included.
    seed : int
        Seed of every random draw: the same arguments give the same network.
    errors_per_kind : int, optional
        Planted mistakes of each kind; by default ``spec.error_share`` of the
        records split evenly over :data:`ERROR_KINDS` (at least 2 each).
    geographic : bool
        Coordinates in EPSG:4326 (lon/lat, default) or in the metric frame
        :data:`WORK_CRS`.
    value, id : str
        Names of the level column and the well identifier column.
    spec : NetworkSpec, optional
        Shape the network with this spec instead of the kind's own (``kind``
        still picks the random stream; ``n`` is then ignored).

    Returns
    -------
    wells : geopandas.GeoDataFrame
        Columns ``id`` (text), ``value`` (float, m above datum), geometry.
        Row order is shuffled; a duplicate record shares its well's id and spot.
    truth : pandas.DataFrame
        One row per record, in the same order: ``row``, ``kind`` (``sound``,
        ``cone`` or an error kind), ``is_error``, ``well_id``,
        ``clean_level_m`` (the value before the mistake), ``planted_level_m``,
        ``local_sd_m`` (at planted rows), ``true_x``/``true_y`` (where the well
        really is, in the output CRS), ``detail``. ``truth.attrs`` holds the
        spec, the seed and the count of planned mistakes that were skipped.

    Notes
    -----
    * Mistakes go to wells outside the pumping cones, no two among each
      other's 8 nearest wells.
    * ``decimal_slip``: x10 or /10. ``feet_as_metres``: level / 0.3048.
      ``depth_as_level``: a depth to water (5-60 m) instead of the level.
      ``transposed_digits``: two adjacent significant digits swapped; swaps
      changing the value by less than 2 local sd are skipped (another pair is
      tried; a well with none is left sound and counted in
      ``attrs["skipped"]``). ``spike``: +-4 to 8 local sd. ``misplaced``: the
      well's coordinates moved 2-10 km (inside the extent), value kept; moves
      landing where the surface is within 3 local sd of the value are redrawn
      (up to 64 tries, then skipped). ``duplicate_conflict``: an extra record
      at the well's spot, with its id, whose value differs by
      max(2 m, 6-12 local sd); the extra record is the wrong one, the original
      stays ``sound``.
    * A well is ``cone`` when it lies within 2 cone widths of a cone centre
      (drawdown at least 13.5 % of the cone depth) and holds no mistake.
    """
    import geopandas as gpd
    import shapely

    spec = spec_for(kind, n) if spec is None else spec
    rng = np.random.default_rng([seed, NETWORK_KINDS.index(kind)])
    n_kinds = len(ERROR_KINDS)
    if errors_per_kind is None:
        per_kind = max(2, round(spec.n * spec.error_share / n_kinds))
    else:
        per_kind = int(errors_per_kind)
    if per_kind * n_kinds > spec.n // 4:
        raise ValueError(f"{per_kind} mistakes of each kind is too many for {spec.n} wells; use fewer.")
    n_base = spec.n - per_kind

    # --- where the wells are (km) ---
    town_centres = _uniform(rng, spec.towns, replace(spec, width_km=0.6 * spec.width_km,
                                                     height_km=0.6 * spec.height_km))
    cone_cluster = spec.cone_cluster * spec.free_cones
    n_town = round(n_base * spec.town_share) if spec.towns else 0
    parts = [_uniform(rng, n_base - n_town - cone_cluster, spec)]
    for t, centre in enumerate(town_centres):
        count = n_town // spec.towns + (t < n_town % spec.towns)
        parts.append(_around(rng, centre, spec.town_sd_km, count, spec))
    # each town pumps from a well field within one town spread of its centre
    town_cones = town_centres + rng.normal(0.0, 0.5 * spec.town_sd_km, size=town_centres.shape)
    free_cones = _uniform(rng, spec.free_cones, replace(spec, width_km=0.6 * spec.width_km,
                                                        height_km=0.6 * spec.height_km))
    for centre in free_cones:
        if spec.cone_cluster:
            parts.append(_around(rng, centre, spec.cone_sd_km, spec.cone_cluster, spec))
    xy = np.vstack(parts)

    cones = np.vstack([town_cones, free_cones])
    n_modes = 64
    field = _Field(
        spec=spec,
        valley_point=rng.uniform(-0.15, 0.15, 2) * [spec.width_km, spec.height_km],
        cone_centres=cones,
        cone_depths=spec.cone_depth_m * rng.uniform(0.8, 1.2, len(cones)),
        cone_sds=spec.cone_sd_km * rng.uniform(0.8, 1.2, len(cones)),
        frequencies=rng.normal(0.0, 1.0 / spec.wander_km, size=(2, n_modes)),
        phases=rng.uniform(0.0, 2 * np.pi, n_modes),
    )
    clean = np.round(field(xy[:, 0], xy[:, 1]) + rng.normal(0.0, spec.noise_sd_m, n_base), 2)

    # --- pumping-cone wells ---
    dist_to_cone = np.full(n_base, np.inf)
    for centre, sd in zip(field.cone_centres, field.cone_sds):
        dist_to_cone = np.minimum(dist_to_cone, np.hypot(*(xy - centre).T) / sd)
    in_cone = dist_to_cone <= 2.0

    # --- plant mistakes ---
    tree = cKDTree(xy)
    planted_rows = _spaced_rows(rng, tree, xy, ~in_cone, per_kind * n_kinds)
    if planted_rows.size < per_kind * n_kinds:
        raise ValueError(f"could not place {per_kind} mistakes of each kind among {n_base} wells apart "
                         "from each other; use fewer.")
    kind_names = np.array(("sound", "cone") + ERROR_KINDS)
    kinds = np.where(in_cone, 1, 0).astype(np.int8)
    values = clean.copy()
    where = xy.copy()
    detail = np.full(n_base, "", dtype=object)
    sd = np.full(n_base, np.nan)
    sd[planted_rows] = local_sd(xy, clean, planted_rows, tree)
    skipped = dict.fromkeys(ERROR_KINDS, 0)
    duplicate_of, duplicate_values = [], []
    for kind_index, error in enumerate(ERROR_KINDS):
        rows = planted_rows[kind_index * per_kind:(kind_index + 1) * per_kind]
        if error == "decimal_slip":
            factor = rng.choice([10.0, 0.1], rows.size)
            values[rows] = np.round(clean[rows] * factor, 2)
            detail[rows] = np.where(factor > 1, "x10", "/10")
        elif error == "feet_as_metres":
            values[rows] = np.round(clean[rows] / FOOT_IN_METRES, 2)
            detail[rows] = "level in feet, entered as metres"
        elif error == "depth_as_level":
            values[rows] = np.round(rng.uniform(5.0, 60.0, rows.size), 2)
            detail[rows] = "depth to water entered as level"
        elif error == "transposed_digits":
            done = []
            for row in rows.tolist():
                swap = transpose_digits(clean[row], rng, 2.0 * sd[row])
                if swap is None:
                    skipped[error] += 1
                    continue
                values[row], detail[row] = swap
                done.append(row)
            rows = np.asarray(done, dtype=np.int64)
        elif error == "spike":
            size = rng.uniform(4.0, 8.0, rows.size) * rng.choice([-1.0, 1.0], rows.size)
            values[rows] = np.round(clean[rows] + size * sd[rows], 2)
            detail[rows] = [f"{s:+.1f} local sd" for s in size]
        elif error == "misplaced":
            # one try per well and round, only for wells still without a spot,
            # so the local sd is computed at few places
            new_xy = np.full((rows.size, 2), np.nan)
            moved = np.full(rows.size, np.nan)
            for _ in range(64):
                todo = np.flatnonzero(np.isnan(moved))
                if todo.size == 0:
                    break
                angle = rng.uniform(0, 2 * np.pi, todo.size)
                step = rng.uniform(2.0, 10.0, todo.size)
                spot = xy[rows[todo]] + np.column_stack([np.cos(angle), np.sin(angle)]) * step[:, None]
                _, nearest = tree.query(spot)
                nearest = np.minimum(nearest, n_base - 1)
                ok = _inside(spot, spec)
                sd_there = local_sd(xy, clean, nearest, tree)
                ok &= np.abs(field(spot[:, 0], spot[:, 1]) - clean[rows[todo]]) >= 3.0 * sd_there
                new_xy[todo[ok]] = spot[ok]
                moved[todo[ok]] = step[ok]
            found = ~np.isnan(moved)
            skipped[error] += int((~found).sum())
            rows = rows[found]
            where[rows] = new_xy[found]
            detail[rows] = [f"moved {s:.1f} km" for s in moved[found]]
        elif error == "duplicate_conflict":
            gap = np.maximum(2.0, rng.uniform(6.0, 12.0, rows.size) * sd[rows])
            sign = rng.choice([-1.0, 1.0], rows.size)
            duplicate_of = rows
            duplicate_values = np.round(clean[rows] + sign * gap, 2)
            rows = rows[:0]  # the originals stay sound
        kinds[rows] = 2 + kind_index

    # --- assemble: duplicates appended, then rows shuffled ---
    ids = ("W" + pd.Series(np.arange(1, n_base + 1)).astype(str).str.zfill(6)).to_numpy(dtype=object)
    dup = np.asarray(duplicate_of, dtype=np.int64)
    gap_detail = [f"conflicts with its twin by {v - clean[r]:+.2f} m" for r, v in zip(dup, duplicate_values)]
    all_kinds = np.concatenate([kinds, np.full(dup.size, 2 + ERROR_KINDS.index("duplicate_conflict"), np.int8)])
    all_values = np.concatenate([values, duplicate_values])
    all_clean = np.concatenate([clean, clean[dup]])
    all_where = np.vstack([where, xy[dup]])
    all_true = np.vstack([xy, xy[dup]])
    all_ids = np.concatenate([ids, ids[dup]])
    all_sd = np.concatenate([sd, sd[dup]])
    all_detail = np.concatenate([detail, np.asarray(gap_detail, dtype=object)])
    order = rng.permutation(all_values.size)

    if geographic:
        x, y = _to_geographic(all_where[order])
        tx, ty = _to_geographic(all_true[order])
        crs = "EPSG:4326"
    else:
        x, y = (all_where[order] * 1000 + [ORIGIN_EASTING, ORIGIN_NORTHING]).T
        tx, ty = (all_true[order] * 1000 + [ORIGIN_EASTING, ORIGIN_NORTHING]).T
        crs = WORK_CRS
    wells = gpd.GeoDataFrame(
        {id: pd.array(all_ids[order], dtype="str"), value: all_values[order]},
        geometry=shapely.points(x, y),
        crs=crs,
    )
    truth_kind = all_kinds[order]
    is_error = truth_kind >= 2
    truth = pd.DataFrame({
        "row": np.arange(order.size),
        "kind": pd.array(kind_names[truth_kind], dtype="str"),
        "is_error": is_error,
        "well_id": pd.array(all_ids[order], dtype="str"),
        "clean_level_m": all_clean[order],
        "planted_level_m": all_values[order],
        "local_sd_m": np.where(is_error, all_sd[order], np.nan),
        "true_x": tx,
        "true_y": ty,
        "detail": pd.array(all_detail[order], dtype="str"),
    })
    truth.attrs = {"network": kind, "seed": seed, "spec": spec, "skipped": skipped,
                   "errors_per_kind": per_kind, "cone_centres_km": field.cone_centres.tolist(),
                   "town_centres_km": town_centres.tolist(),
                   "cone_sds_km": field.cone_sds.tolist()}
    return wells, truth


def main(argv: list[str] | None = None) -> int:
    """Write one network to a GeoPackage (layer ``wells``) and its truth to CSV."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("kind", choices=NETWORK_KINDS)
    parser.add_argument("--n", type=int, default=None, help="number of records")
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--projected", action="store_true", help=f"write in {WORK_CRS} instead of lon/lat")
    parser.add_argument("--out", required=True, help="output GeoPackage; the truth goes beside it")
    args = parser.parse_args(argv)
    wells, truth = make_network(args.kind, args.n, args.seed, geographic=not args.projected)
    wells.to_file(args.out, layer="wells", driver="GPKG")
    truth_path = args.out.rsplit(".", 1)[0] + "_truth.csv"
    truth.to_csv(truth_path, index=False)
    counts = truth["kind"].value_counts().to_dict()
    print(f"{len(wells)} records -> {args.out}; truth -> {truth_path}; {counts}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
