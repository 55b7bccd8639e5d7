"""Terrain geometry: Horn slope/aspect on planes, incidence on tilted planes, cast shadows of walls.

Every expected value is hand arithmetic on tiny synthetic grids (row 0 = north edge).
"""

import math

import numpy as np
import pytest

from courseplan.errors import InputError
from courseplan.physics.terrain import (
    ShadowCaster,
    cast_shadow,
    cos_incidence,
    horn_gradient,
    normal_from_gradient,
    slope_aspect_horn,
    sun_vector,
    surface_normal,
)


def plane(n_rows, n_cols, dx, dy, east, north, z0=1000.0):
    """Z = z0 + east·x + north·y on cell centres (x east, y north, row 0 north)."""
    rows, cols = np.mgrid[0:n_rows, 0:n_cols].astype(float)
    x = (cols + 0.5) * dx
    y = (n_rows - rows - 0.5) * dy
    return z0 + east * x + north * y


# --- Horn (1981) slope and aspect -------------------------------------------------------------

@pytest.mark.parametrize("east, north, aspect", [
    (0.0, -0.5, 0.0),     # falls towards north → faces north
    (-0.5, 0.0, 90.0),    # falls towards east
    (0.0, 0.5, 180.0),    # falls towards south
    (0.5, 0.0, 270.0),    # falls towards west
    (-0.3, -0.3, 45.0),
])
def test_horn_plane_slope_and_aspect(east, north, aspect):
    z = plane(6, 7, 2.0, 3.0, east, north)
    slope, asp = slope_aspect_horn(z, 2.0, 3.0, dtype=np.float64)
    expected_slope = math.degrees(math.atan(math.hypot(east, north)))
    np.testing.assert_allclose(slope, expected_slope, atol=1e-9)  # edges too: linear extrapolation
    np.testing.assert_allclose(asp, aspect, atol=1e-9)


def test_horn_uses_the_real_cell_size():
    # the same array read as 1 m and as 4 m cells: 4× smaller gradient
    z = plane(5, 5, 1.0, 1.0, 0.8, 0.0)
    gx1, _ = horn_gradient(z, 1.0, 1.0)
    gx4, _ = horn_gradient(z, 4.0, 1.0)
    np.testing.assert_allclose(gx1, 0.8, rtol=1e-4)   # float32 on elevations near 1000 m
    np.testing.assert_allclose(gx4, 0.2, rtol=1e-4)


def test_horn_weights_on_a_hand_example():
    # neighbourhood a..i = 1 2 3 / 4 5 6 / 7 8 9 with 1 m cells:
    # ∂z/∂x = ((3+12+9) − (1+8+7))/8 = 1 ; ∂z/∂y (north) = ((1+4+3) − (7+16+9))/8 = −3
    z = np.arange(1.0, 10.0).reshape(3, 3)
    gx, gy = horn_gradient(z, 1.0, 1.0, dtype=np.float64)
    assert gx[1, 1] == pytest.approx(1.0)
    assert gy[1, 1] == pytest.approx(-3.0)
    slope, aspect = slope_aspect_horn(z, 1.0, 1.0, dtype=np.float64)
    assert slope[1, 1] == pytest.approx(math.degrees(math.atan(math.sqrt(10.0))))
    # downhill = −∇z = (−1, +3): mostly north, a little west
    assert aspect[1, 1] == pytest.approx(math.degrees(math.atan2(-1.0, 3.0)) % 360.0)


def test_nodata_stays_nodata_and_neighbours_keep_an_estimate():
    z = plane(5, 5, 1.0, 1.0, 0.0, 0.5)
    z[2, 2] = np.nan
    slope, aspect = slope_aspect_horn(z, 1.0, 1.0, dtype=np.float64)
    assert np.isnan(slope[2, 2]) and np.isnan(aspect[2, 2])
    assert np.isfinite(slope[1, 2]) and np.isfinite(slope[2, 1])
    assert np.isnan(slope).sum() == 1


def test_flat_aspect_is_zero_and_tiny_grid_rejected():
    slope, aspect = slope_aspect_horn(np.full((3, 3), 5.0), 1.0, 1.0)
    assert np.all(slope == 0) and np.all(aspect == 0)
    with pytest.raises(InputError):
        slope_aspect_horn(np.zeros((1, 5)), 1.0, 1.0)
    with pytest.raises(InputError):
        slope_aspect_horn(np.zeros((3, 3)), 0.0, 1.0)


# --- cosine of incidence on a tilted plane (analytic) ------------------------------------------

@pytest.mark.parametrize("zen, az, slope, aspect, theta", [
    (40.0, 180.0, 25.0, 180.0, 15.0),     # slope faces the sun: θ = Z − β
    (40.0, 180.0, 25.0, 0.0, 65.0),       # faces away: θ = Z + β
    (0.0, 123.0, 30.0, 77.0, 30.0),       # sun at the zenith: θ = β
    (60.0, 90.0, 0.0, 0.0, 60.0),         # horizontal: θ = Z
])
def test_incidence_on_tilted_plane(zen, az, slope, aspect, theta):
    assert math.degrees(math.acos(cos_incidence(zen, az, slope, aspect))) == pytest.approx(theta, abs=1e-9)


def test_incidence_perpendicular_azimuth_is_cos_z_cos_beta():
    assert cos_incidence(50.0, 90.0, 20.0, 180.0) == pytest.approx(
        math.cos(math.radians(50)) * math.cos(math.radians(20)), abs=1e-12)


def test_normals_agree_with_incidence_formula():
    rng = np.random.default_rng(1)
    slope, aspect = rng.uniform(0, 60, 50), rng.uniform(0, 360, 50)
    zen, az = 35.0, 210.0
    n = surface_normal(slope, aspect)
    s = sun_vector(zen, az)
    np.testing.assert_allclose(sum(a * b for a, b in zip(n, s, strict=True)),
                               cos_incidence(zen, az, slope, aspect), atol=1e-6)
    g = np.tan(np.radians(slope))
    n2 = normal_from_gradient(-g * np.sin(np.radians(aspect)), -g * np.cos(np.radians(aspect)))
    for a, b in zip(n, n2, strict=True):
        np.testing.assert_allclose(a, b, atol=1e-6)


# --- cast shadows: a wall on flat ground, shadow length h / tan(elevation) ---------------------
#
# Elevations are samples at cell centres.  A cell whose centre lies at horizontal distance d
# down-sun of the wall's centre is shadowed when d < L = h / tan(e).  So with n shadowed cells in a
# line across the wall, n·Δ < L ≤ (n + 1)·Δ: the shadow tip lies within one cell of n·Δ (in fact
# within half a cell of (n + ½)·Δ).

def wall_ns(n_rows, n_cols, col, h):
    z = np.zeros((n_rows, n_cols))
    z[:, col] = h
    return z


def assert_bracketed(n_cells, length_m, cell_m):
    n = np.asarray(n_cells, dtype=float)
    eps = 1e-9 * max(length_m, 1.0)
    assert np.all(n * cell_m < length_m + eps), (n, length_m)
    assert np.all((n + 1) * cell_m >= length_m - eps), (n, length_m)
    assert np.all(np.abs(n * cell_m - length_m) <= cell_m + eps)   # within one cell


@pytest.mark.parametrize("elev", [15.0, 30.0, 45.0, 60.0])
@pytest.mark.parametrize("dx", [1.0, 2.5])
def test_wall_shadow_length_sun_from_west(elev, dx):
    h = 12.0
    z = wall_ns(8, 120, 10, h)
    shade = cast_shadow(z, dx, 1.0, 270.0, elev)
    length_m = h / math.tan(math.radians(elev))        # h / tan(elevation)
    assert_bracketed(shade[:, 11:].sum(axis=1), length_m, dx)   # shadowed cells east of the wall
    assert not shade[:, :11].any()                      # nothing on the sunny side or the wall top


@pytest.mark.parametrize("az", [60.0, 90.0, 120.0, 240.0, 270.0, 300.0])
def test_wall_shadow_oblique_sun(az):
    # N–S wall, sun at an oblique azimuth: the shadow's extent across the wall is (h / tan e)·|sin A|
    h, elev, dx = 10.0, 25.0, 1.5
    z = wall_ns(40, 160, 80, h)
    shade = cast_shadow(z, dx, 1.0, az, elev)
    across = h / math.tan(math.radians(elev)) * abs(math.sin(math.radians(az)))
    side = slice(0, 80) if math.sin(math.radians(az)) > 0 else slice(81, 160)  # down-sun side
    rows = slice(15, 25)   # away from the grid's north/south edges, where rays enter the grid
    assert_bracketed(shade[rows, side].sum(axis=1), across, dx)


@pytest.mark.parametrize("az", [0.0, 180.0, 20.0, 160.0])
def test_wall_shadow_east_west_wall(az):
    h, elev, dy = 8.0, 35.0, 2.0
    z = np.zeros((100, 12))
    z[50, :] = h
    shade = cast_shadow(z, 1.0, dy, az, elev)
    along = h / math.tan(math.radians(elev)) * abs(math.cos(math.radians(az)))
    side = slice(51, 100) if math.cos(math.radians(az)) > 0 else slice(0, 50)  # sun north → shadow south
    assert_bracketed(shade[side, 4:8].sum(axis=0), along, dy)


@pytest.mark.parametrize("az", [10.0, 45.0, 150.0, 210.0, 225.0, 333.0])
def test_pillar_shadow_points_away_from_the_sun(az):
    # a single tall cell: the farthest shadowed cell lies down-sun at L = h / tan e, within one
    # sweep step along the ray (Δ / max(|sin A|, |cos A|) ≤ √2 cells); sideways, the discrete ray
    # stays within half a cell of a straight line, so within one cell of the line through the pillar
    h, elev = 20.0, 30.0
    z = np.zeros((81, 81))
    z[40, 40] = h
    shade = cast_shadow(z, 1.0, 1.0, az, elev)
    rows, cols = np.nonzero(shade)
    east, north = cols - 40.0, 40.0 - rows
    dist = np.hypot(east, north)
    tip = np.argmax(dist)
    length = h / math.tan(math.radians(elev))
    a = math.radians(az)
    step = 1.0 / max(abs(math.sin(a)), abs(math.cos(a)))
    ideal = (-length * math.sin(a), -length * math.cos(a))           # down-sun, L away
    assert length - step - 0.5 <= dist[tip] <= length + 0.5
    assert math.hypot(east[tip] - ideal[0], north[tip] - ideal[1]) <= step + 1.0
    # every shadowed cell lies in the down-sun half-plane, close to the ray
    along = -(east * math.sin(a) + north * math.cos(a))
    sideways = np.abs(east * math.cos(a) - north * math.sin(a))
    assert np.all(along > 0) and np.all(sideways <= 1.0)


def test_sun_below_horizon_shades_everything_but_nodata():
    z = np.zeros((4, 4))
    z[0, 0] = np.nan
    s = cast_shadow(z, 1.0, 1.0, 180.0, -2.0)
    assert s.sum() == 15 and not s[0, 0]


def test_flat_ground_and_slope_towards_the_sun_are_lit():
    assert not cast_shadow(np.zeros((20, 20)), 1.0, 1.0, 135.0, 5.0).any()
    z = plane(30, 30, 1.0, 1.0, 0.0, 0.5)  # falls towards the south (faces the sun), sun from the south
    assert not cast_shadow(z, 1.0, 1.0, 180.0, 10.0).any()


def test_slope_steeper_than_the_sun_facing_away_is_shadowed():
    # falls towards the north at 45°, sun from the south at 30°: every cell but the first line
    # down-sun of the crest is hidden by the cells up-sun of it
    z = plane(20, 5, 1.0, 1.0, 0.0, -1.0)
    s = cast_shadow(z, 1.0, 1.0, 180.0, 30.0)
    assert not s[-1].any() and s[:-1].all()


def test_nodata_neither_casts_nor_receives():
    z = wall_ns(5, 40, 10, np.nan)   # a "wall" of nodata: transparent
    assert not cast_shadow(z, 1.0, 1.0, 270.0, 20.0).any()


def test_caster_reuses_buffers_and_checks_out():
    z = wall_ns(10, 30, 5, 5.0)
    sc = ShadowCaster(z, 1.0, 1.0)
    out = np.zeros(z.shape, dtype=bool)
    assert sc.shadow(270.0, 45.0, out=out) is out
    assert_bracketed(out[:, 6:].sum(axis=1), 5.0, 1.0)    # 5 m / tan 45° = 5 m
    for az in (10.0, 100.0, 190.0, 280.0):                # both sweep axes, all four directions
        sc.shadow(az, 45.0, out=out)
    with pytest.raises(ValueError):
        sc.shadow(270.0, 45.0, out=np.zeros((2, 2), dtype=bool))
