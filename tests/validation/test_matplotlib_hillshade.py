"""No-shadow illumination vs matplotlib's ``LightSource.hillshade`` on matplotlib's real DEM.

Source: matplotlib (general-purpose library) [L]: ``matplotlib.colors.LightSource.hillshade``
(normal vectors from ``numpy.gradient``, intensity = normal · light direction, then a min–max
rescale to 0–1) on the sample file ``jacksboro_fault_dem.npz`` shipped with matplotlib (a USGS
elevation model around the Jacksboro fault, Tennessee; ``matplotlib.cbook.get_sample_data``).

The file's ``dx`` and ``dy`` are the cell size in *degrees* (0.000833… = 3 arc-seconds) and its
latitude range is 36.45–36.73° N.  A proper metric grid: the ground length of one cell, west–east
and south–north, at the DEM's mid-latitude on the WGS 84 ellipsoid, by ``pyproj.Geod.inv``
(≈ 74.5 m × 92.5 m).  Both methods get these spacings; row 0 is the north edge in both.

Check: our unclipped cosine of incidence (Horn 1981 normals) correlates with the hillshade at
r > 0.99 for several light directions (the rescale is linear, so it does not change r; Horn's
3 × 3 operator and matplotlib's central differences differ a little, hence not r = 1).
"""

import numpy as np
import pytest

mpl_colors = pytest.importorskip("matplotlib.colors")
cbook = pytest.importorskip("matplotlib.cbook")

from pyproj import Geod  # noqa: E402

from courseplan.physics.terrain import cos_incidence, slope_aspect_horn  # noqa: E402


@pytest.fixture(scope="module")
def jacksboro():
    d = cbook.get_sample_data("jacksboro_fault_dem.npz")
    z = np.asarray(d["elevation"], dtype=float)
    step_deg = float(d["dx"]), float(d["dy"])
    lat = 0.5 * (float(d["ymin"]) + float(d["ymax"]))
    lon = 0.5 * (float(d["xmin"]) + float(d["xmax"]))
    geod = Geod(ellps="WGS84")
    dx_m = geod.inv(lon, lat, lon + step_deg[0], lat)[2]
    dy_m = geod.inv(lon, lat, lon, lat + step_deg[1])[2]
    return z, dx_m, dy_m


def test_metric_cell_size_is_plausible(jacksboro):
    _, dx_m, dy_m = jacksboro
    # 3 arc-seconds: 92.5 m north–south; × cos(36.6°) ≈ 74.5 m west–east (hand arithmetic)
    assert dy_m == pytest.approx(92.5, abs=0.3)
    assert dx_m == pytest.approx(74.5, abs=0.3)


@pytest.mark.parametrize("az, alt", [(315, 45), (135, 30), (60, 50), (200, 65), (270, 40)])
def test_correlates_with_hillshade(jacksboro, az, alt):
    z, dx_m, dy_m = jacksboro
    hs = mpl_colors.LightSource(azdeg=az, altdeg=alt).hillshade(z, dx=dx_m, dy=dy_m)
    slope, aspect = slope_aspect_horn(z, dx_m, dy_m, dtype=np.float64)
    ours = cos_incidence(90.0 - alt, az, slope, aspect)
    r = np.corrcoef(hs.ravel(), ours.ravel())[0, 1]
    assert r > 0.99


def test_wrong_orientation_would_fail(jacksboro):
    # guard that the check can fail: a mirrored light direction correlates far worse
    z, dx_m, dy_m = jacksboro
    hs = mpl_colors.LightSource(azdeg=315, altdeg=45).hillshade(z, dx=dx_m, dy=dy_m)
    slope, aspect = slope_aspect_horn(z, dx_m, dy_m, dtype=np.float64)
    r = np.corrcoef(hs.ravel(), cos_incidence(45.0, 135.0, slope, aspect).ravel())[0, 1]
    assert r < 0.5
