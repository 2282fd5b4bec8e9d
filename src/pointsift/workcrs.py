"""Coordinate reference systems for the prepare step: checks and the work CRS.

The coordinates are checked against their CRS (impossible latitudes, degrees
in a projected layer, points far outside the area the CRS is meant for,
coordinates farther than any place on Earth), and the metric CRS distances
are computed in is chosen: the input's own projected CRS when its scale error
over the layer is small (pyproj's scale factors), otherwise a UTM zone or a
Lambert azimuthal equal-area projection centred on the points.
"""

from __future__ import annotations

import logging

import numpy as np
from pyproj import CRS, Proj, Transformer
from pyproj.exceptions import CRSError as PyprojCRSError
from pyproj.exceptions import ProjError

from .config import ScreenConfig, spell
from .errors import ConfigError, CRSError

__all__ = [
    "SCALE_TOLERANCE",
    "choose_work_crs",
    "scale_error",
    "resolve_input_crs",
    "check_geographic",
    "check_projected",
    "check_area_of_use",
    "work_crs_for",
    "is_engineering",
]

log = logging.getLogger(__name__)

#: Largest scale error accepted in the input's own projected CRS before a local
#: metric work CRS is chosen instead: 0.5 % (a 10 km distance off by 50 m). The
#: error is the largest |h - 1| or |k - 1| of pyproj's meridional and parallel
#: scale factors at the layer's points. A UTM zone stays within 0.1 % inside its
#: band (0.9996 on the central meridian, common practice); Web Mercator is off
#: by 18.6 % at 32.5 degrees S and 146 % at 66 degrees N.
SCALE_TOLERANCE = 0.005

#: Farthest a projected coordinate may lie from its CRS's origin (metres): no place
#: on Earth is more than about 2e7 m (half the equator) from any origin of a
#: sensible projection; 1e8 leaves room for false eastings and odd projections.
_FARTHEST_ON_EARTH_M = 1e8


def choose_work_crs(lon: np.ndarray, lat: np.ndarray) -> CRS:
    """Choose a local metric CRS for points given in longitude/latitude.

    A UTM zone (WGS 84) when every point lies within 4 degrees of longitude
    of the zone's central meridian and between 80S and 84N; otherwise a Lambert
    azimuthal equal-area projection centred on the points, whose distance
    errors stay small over a region.

    Parameters
    ----------
    lon, lat : ndarray
        Coordinates in degrees (finite values only).

    Returns
    -------
    pyproj.CRS
    """
    lon = np.asarray(lon, dtype=float)
    # points straddling the antimeridian: take the centre in 0..360, or the
    # median of -179 and 179 would put it on the far side of the globe
    shifted = np.mod(lon, 360.0)
    if np.ptp(shifted) < np.ptp(lon):
        lon = shifted
    lon_c = (float(np.median(lon)) + 180.0) % 360.0 - 180.0
    lat_c = float(np.median(lat))
    zone = int(np.floor((lon_c + 180.0) / 6.0)) % 60 + 1
    meridian = -183.0 + 6.0 * zone
    if lat.min() >= -80 and lat.max() <= 84 and np.abs(((lon - meridian + 180) % 360) - 180).max() <= 4.0:
        return CRS.from_epsg((32600 if lat_c >= 0 else 32700) + zone)
    return CRS.from_proj4(f"+proj=laea +lat_0={lat_c:.6f} +lon_0={lon_c:.6f} +x_0=0 +y_0=0 +datum=WGS84 +units=m +no_defs")


def resolve_input_crs(frame, crs_option: str | None, where: str) -> CRS:
    if crs_option is not None:
        try:
            given = CRS.from_user_input(crs_option)
        except PyprojCRSError as exc:
            # a mistyped option is a usage problem (exit 2), not a data problem
            raise ConfigError(f"{spell('crs', crs_option)} is not a CRS pyproj knows. Use a code such as EPSG:4326 or EPSG:32633.") from exc
        if frame.crs is not None and not CRS(frame.crs).equals(given, ignore_axis_order=True):
            raise CRSError(
                f"{where} declares {CRS(frame.crs).to_string()} but {spell('crs')} says {given.to_string()}. "
                f"Drop {spell('crs')} to use the layer's own CRS, or fix the layer."
            )
        return given
    if frame.crs is None:
        raise CRSError(
            f"{where} has no CRS, so distances cannot be computed. "
            f"Pass {spell('crs', 'EPSG:XXXX')} to say what the coordinates are (for example EPSG:4326 for longitude/latitude in degrees)."
        )
    return CRS(frame.crs)


def check_geographic(x, y, reasons, ids, where):
    located = np.isfinite(x) & np.isfinite(y) & (reasons == "")
    if not located.any():
        return
    bad_lat = located & (np.abs(y) > 90)
    bad_lon = located & (np.abs(x) > 180)
    bad = bad_lat | bad_lon
    if not bad.any():
        return
    swapped = located & (np.abs(x) <= 90) & (np.abs(y) <= 180)
    share = bad.sum() / located.sum()
    sample = ", ".join(str(ids[r]) for r in np.flatnonzero(bad)[:5])
    if share > 0.5:
        hint = (
            f"Longitude and latitude look swapped: check the coordinate columns ({spell('x')} is longitude, {spell('y')} latitude)."
            if swapped[bad].mean() > 0.9
            else f"The coordinates look projected, not degrees: pass the right {spell('crs')} (for example the UTM zone's EPSG code)."
        )
        raise CRSError(
            f"{bad.sum()} of {located.sum()} points in {where} lie outside longitude -180..180 / latitude -90..90 "
            f"for a geographic CRS (first: {sample}). {hint}"
        )
    for row in np.flatnonzero(bad_lat):
        reasons[row] = f"latitude {y[row]:g} is impossible (beyond 90); check the coordinates (swapped longitude/latitude?)"
    for row in np.flatnonzero(bad_lon & ~bad_lat):
        reasons[row] = f"longitude {x[row]:g} is impossible (beyond 180); check the coordinates"


def _unit(crs: CRS) -> tuple[str, float]:
    """Name of the first axis' unit and metres per unit."""
    if not crs.axis_info:
        return "unknown unit", float("nan")
    axis = crs.axis_info[0]
    return axis.unit_name, float(axis.unit_conversion_factor or float("nan"))


def _is_metre(crs: CRS) -> bool:
    return _unit(crs)[0] in ("metre", "meter")


def is_engineering(crs: CRS) -> bool:
    return bool(getattr(crs, "is_engineering", False)) or (not crs.is_geographic and crs.geodetic_crs is None)


def _sample(located: np.ndarray, x: np.ndarray, y: np.ndarray, limit: int = 2000) -> np.ndarray:
    """Rows spread over the layer: an even stride plus the extremes of its extent."""
    rows = np.flatnonzero(located)
    if rows.size <= limit:
        return rows
    picked = rows[np.linspace(0, rows.size - 1, limit).astype(int)]
    extremes = rows[[np.argmin(x[rows]), np.argmax(x[rows]), np.argmin(y[rows]), np.argmax(y[rows])]]
    return np.unique(np.concatenate([picked, extremes]))


def scale_error(crs: CRS, x: np.ndarray, y: np.ndarray) -> float:
    """Largest scale error of a projected CRS at the given points.

    Parameters
    ----------
    crs : pyproj.CRS
        A projected CRS.
    x, y : ndarray
        Coordinates in ``crs``.

    Returns
    -------
    float
        The largest ``|h - 1|`` or ``|k - 1|`` of pyproj's meridional (h) and
        parallel (k) scale factors at the points (NaN when no point can be
        placed on the globe).

    Examples
    --------
    >>> round(scale_error(CRS.from_epsg(3857), np.array([0.0]), np.array([0.0])), 6)
    0.0
    """
    to_lonlat = Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True)
    lon, lat = to_lonlat.transform(np.asarray(x, dtype=float), np.asarray(y, dtype=float), errcheck=False)
    lon, lat = np.asarray(lon, dtype=float), np.asarray(lat, dtype=float)
    finite = np.isfinite(lon) & np.isfinite(lat)
    if not finite.any():
        return float("nan")
    factors = Proj(crs).get_factors(lon[finite], lat[finite], errcheck=False)
    error = np.fmax(np.abs(np.asarray(factors.meridional_scale) - 1.0), np.abs(np.asarray(factors.parallel_scale) - 1.0))
    return float(np.nanmax(error)) if np.isfinite(error).any() else float("nan")


def _lonlat_work_crs(input_crs: CRS, x, y, where: str) -> CRS:
    try:
        to_lonlat = Transformer.from_crs(input_crs, CRS.from_epsg(4326), always_xy=True)
        lon, lat = to_lonlat.transform(x, y, errcheck=False)
    except ProjError as exc:
        raise CRSError(
            f"{where} uses {input_crs.name}, which pyproj cannot relate to longitude/latitude. "
            "Give the layer a CRS in metres or degrees, or reproject it first."
        ) from exc
    lon, lat = np.asarray(lon, dtype=float), np.asarray(lat, dtype=float)
    finite = np.isfinite(lon) & np.isfinite(lat)
    if not finite.any():
        raise CRSError(
            f"No point of {where} can be placed on the globe with {input_crs.to_string()}: the coordinates do "
            f"not fit that CRS. Check the coordinates and the CRS ({spell('crs')} for a file without one)."
        )
    return choose_work_crs(lon[finite], lat[finite])


def work_crs_for(input_crs: CRS, x: np.ndarray, y: np.ndarray, config: ScreenConfig, where: str, notes: list) -> CRS:
    """The metric CRS distances are computed in (see :data:`SCALE_TOLERANCE`); x, y: located points."""
    if is_engineering(input_crs):
        unit, _ = _unit(input_crs)
        if config.work_crs is not None:
            raise ConfigError(
                f"{spell('work_crs')} cannot be used with {where}: its CRS {input_crs.name!r} is a local engineering CRS "
                f"that is not tied to the globe. Leave {spell('work_crs')} out."
            )
        if not _is_metre(input_crs):
            raise CRSError(
                f"{where} uses the local engineering CRS {input_crs.name!r} in {unit}; distances are computed in "
                "metres and a local CRS cannot be reprojected. Convert the coordinates to metres (or to a CRS tied to the globe)."
            )
        notes.append(f"Distances computed in the local engineering CRS {input_crs.name!r} (metres on a plane), as given.")
        return input_crs
    if config.work_crs is not None:
        try:
            work_crs = CRS.from_user_input(config.work_crs)
        except PyprojCRSError as exc:
            raise ConfigError(f"{spell('work_crs', config.work_crs)} is not a CRS pyproj knows. Use a code such as EPSG:32633.") from exc
        if not work_crs.is_projected or not _is_metre(work_crs):
            raise ConfigError(f"{spell('work_crs', config.work_crs)} must be a projected CRS in metres (for example a UTM zone).")
        return work_crs
    if input_crs.is_projected and _is_metre(input_crs):
        rows = _sample(np.ones(x.size, dtype=bool), x, y)
        error = scale_error(input_crs, x[rows], y[rows])
        if not error > SCALE_TOLERANCE:
            return input_crs
        work_crs = _lonlat_work_crs(input_crs, x, y, where)
        notes.append(
            f"Distances computed in {work_crs.name} ({work_crs.to_string()}), chosen for these points: "
            f"lengths in the input CRS {input_crs.name} are off by up to {100 * error:.1f} % over the layer "
            f"(more than the {100 * SCALE_TOLERANCE:g} % accepted)."
        )
        return work_crs
    work_crs = _lonlat_work_crs(input_crs, x, y, where)
    notes.append(f"Distances computed in {work_crs.name} ({work_crs.to_string()}), chosen for these points.")
    return work_crs


def check_projected(x, y, reasons, crs: CRS) -> None:
    """Coordinates no place on Earth can have in a projected (or local) CRS."""
    unit, metres = _unit(crs)
    if not np.isfinite(metres):
        metres = 1.0
    located = np.isfinite(x) & np.isfinite(y) & (reasons == "")
    far = located & ((np.abs(x) * metres > _FARTHEST_ON_EARTH_M) | (np.abs(y) * metres > _FARTHEST_ON_EARTH_M))
    for row in np.flatnonzero(far):
        reasons[row] = (
            f"coordinates ({x[row]:.6g}, {y[row]:.6g}) are impossible in {crs.name} (farther from its origin "
            f"than any place on Earth, in {unit}); check the coordinates and the CRS"
        )


def check_area_of_use(x, y, reasons, crs: CRS, where: str, notes: list) -> None:
    """Points far outside the area the CRS is meant for (pyproj's area of use).

    "Far" is beyond the area's bounds by more than 2 degrees plus a quarter of
    the area's size (a UTM zone: 3.5 degrees of longitude). A few such points are unscreened with the reason; when most are,
    the layer's coordinates or CRS are wrong: degrees in a projected layer are
    an error, anything else a warning.
    """
    area = crs.area_of_use
    located = np.isfinite(x) & np.isfinite(y) & (reasons == "")
    if area is None or not located.any() or is_engineering(crs):
        return
    west, south, east, north = area.bounds
    if west > east:  # the area crosses the antimeridian
        east += 360.0
    if east - west >= 359 and north - south >= 170:
        return  # the whole globe: nothing is outside
    xl, yl = x[located], y[located]
    if not crs.is_geographic and np.all((np.abs(xl) <= 180) & (np.abs(yl) <= 90)):
        # projected numbers that, read as degrees, fall in the very area the CRS serves
        lon_d = np.where(xl < west, xl + 360, xl)
        if np.mean((lon_d >= west) & (lon_d <= east) & (yl >= south) & (yl <= north)) > 0.5:
            raise CRSError(
                f"The coordinates of {where} look like longitude/latitude in degrees (all within -180..180 and "
                f"-90..90, inside {area.name}), but its CRS is {crs.name} ({crs.to_string()}), in {_unit(crs)[0]}. "
                f"If they are degrees, set the layer's CRS to EPSG:4326 (or pass {spell('crs', 'EPSG:4326')} for a file without a CRS)."
            )
    try:
        to_lonlat = Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True)
        lon, lat = to_lonlat.transform(xl, yl, errcheck=False)
    except ProjError:
        return
    lon, lat = np.asarray(lon, dtype=float), np.asarray(lat, dtype=float)
    lon = np.where(lon < west - 180, lon + 360, lon)
    margin_x, margin_y = 2.0 + (east - west) / 4, 2.0 + (north - south) / 4
    outside = ~(np.isfinite(lon) & np.isfinite(lat)) | (lon < west - margin_x) | (lon > east + margin_x) | (lat < south - margin_y) | (lat > north + margin_y)
    if not outside.any():
        return
    rows = np.flatnonzero(located)[outside]
    degrees = not crs.is_geographic and bool(np.all((np.abs(x[rows]) <= 180) & (np.abs(y[rows]) <= 90)))
    if outside.mean() > 0.5:
        if degrees:
            raise CRSError(
                f"The coordinates of {where} look like longitude/latitude in degrees (all within -180..180 and "
                f"-90..90), but its CRS is {crs.name} ({crs.to_string()}), in {_unit(crs)[0]}. If they are degrees, "
                f"set the layer's CRS to EPSG:4326 (or pass {spell('crs', 'EPSG:4326')} for a file without a CRS)."
            )
        message = (
            f"{int(outside.sum())} of {int(located.sum())} points of {where} lie far outside the area "
            f"{crs.name} is meant for ({area.name}). Check the coordinates (swapped columns?) and the CRS."
        )
        log.warning(message)
        notes.append(message)
        return
    hint = " (degrees in a projected layer?)" if degrees else ""
    for row in rows:
        reasons[row] = (
            f"location ({x[row]:.6g}, {y[row]:.6g}) lies far outside the area {crs.name} is meant for "
            f"({area.name}){hint}; check its coordinates"
        )
