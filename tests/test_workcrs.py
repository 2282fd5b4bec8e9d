"""CRS checks and the choice of work CRS (pointsift.workcrs); prepare's own tests cover their use."""

import numpy as np
import pytest
from pyproj import CRS

from pointsift.workcrs import SCALE_TOLERANCE, is_engineering, scale_error


@pytest.mark.parametrize("lat", [0.0, -32.5, 45.0, 66.0])
def test_web_mercator_scale_error_is_sec_latitude_minus_one(lat):
    # Reference: Mercator scale factor k = h = sec(latitude) on the sphere (Snyder 1987,
    # Map Projections - A Working Manual, USGS PP 1395, eq. 7-3; from memory), the
    # formulas EPSG:3857 applies to ellipsoidal coordinates.
    crs = CRS.from_epsg(3857)
    from pyproj import Transformer

    x, y = Transformer.from_crs("EPSG:4326", crs, always_xy=True).transform(10.0, lat)
    assert scale_error(crs, np.array([x]), np.array([y])) == pytest.approx(1 / np.cos(np.radians(lat)) - 1, abs=1e-9)


def test_utm_scale_error_on_the_central_meridian_is_its_scale_factor():
    # Reference: UTM's central scale factor 0.9996 (common practice; the EPSG definition)
    crs = CRS.from_epsg(32633)
    assert scale_error(crs, np.array([500_000.0]), np.array([0.0])) == pytest.approx(0.0004, abs=1e-9)
    assert 0.0004 < SCALE_TOLERANCE


def test_engineering_crs_is_recognised():
    site = CRS.from_wkt(
        'ENGCRS["Site grid",EDATUM["Site datum"],CS[Cartesian,2],'
        'AXIS["easting (x)",east,ORDER[1],LENGTHUNIT["metre",1]],AXIS["northing (y)",north,ORDER[2],LENGTHUNIT["metre",1]]]'
    )
    assert is_engineering(site)
    assert not is_engineering(CRS.from_epsg(32633)) and not is_engineering(CRS.from_epsg(4326))
