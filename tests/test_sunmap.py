"""Sun and shade from a DEM (stage) and the solar window wrappers it rests on.

Tiny synthetic DEMs in WGS 84 / UTM 32N on the zone's central meridian (x = 500 000 m, 9° E), where
grid north is true north; expected values come from hand formulas on the window's own sun
positions (never from our outputs).
"""

import math

import numpy as np
import pytest
from affine import Affine

from courseplan.errors import CRSError, InputError, SettingsError
from courseplan.physics.solar import clear_sky_window, irradiation_on_slope_wh_m2, window_times
from courseplan.stages.sun import sun_from_dem

UTM32 = "EPSG:32632"
DAY = dict(date="2025-03-15", timezone="Europe/Zurich")


def grid(n_rows, n_cols, cell=1.0, x0=500_000.0, y0=5_150_000.0):
    return Affine(cell, 0, x0 - n_cols * cell / 2, 0, -cell, y0 + n_rows * cell / 2)


def flat(n_rows=12, n_cols=14, z=1500.0):
    return np.full((n_rows, n_cols), z)


# --- the time window ------------------------------------------------------------------------

def test_window_midpoints_and_equal_steps():
    t, h, t0, t1 = window_times("2025-03-15", "08:00", "09:00", "Europe/Zurich", 15)
    assert [x.strftime("%H:%M:%S") for x in t] == ["08:07:30", "08:22:30", "08:37:30", "08:52:30"]
    assert h == pytest.approx(0.25)
    t, h, _, _ = window_times("2025-03-15", "08:00", "08:50", "Europe/Zurich", 15)
    assert len(t) == 4 and h * 60 == pytest.approx(12.5)          # 50 min in 4 equal steps
    assert str(t.tz) == "Europe/Zurich"


@pytest.mark.parametrize("args", [
    ("2025-03-15", "10:00", "09:00", "Europe/Zurich", 15),   # end before start
    ("2025-03-15", "10:00", "10:00", "Europe/Zurich", 15),
    ("2025-13-15", "08:00", "09:00", "Europe/Zurich", 15),   # bad date
    ("2025-03-15", "08:00", "09:00", "Mars/Olympus", 15),    # bad zone
    ("2025-03-15", "08:00", "09:00", "Europe/Zurich", 0),    # bad step
    ("2025-03-30", "02:00", "03:30", "Europe/Zurich", 15),   # 02:00 does not exist (DST change)
])
def test_window_errors(args):
    with pytest.raises(SettingsError):
        window_times(*args)


def test_clear_sky_night_is_dark_and_totals_add_up():
    cs = clear_sky_window(46.5, 9.0, 1500.0, "2025-03-15", "00:00", "03:00", "Europe/Zurich", 30)
    assert not cs.sun_up.any() and cs.ghi_wh_m2 == 0 and cs.dni_wh_m2 == 0
    cs = clear_sky_window(46.5, 9.0, 1500.0, "2025-03-15", "10:00", "14:00", "Europe/Zurich", 30)
    assert cs.ghi_wh_m2 == pytest.approx(float(np.sum(cs.ghi_w_m2)) * 0.5)
    # Ineichen–Perez splits global into beam and diffuse: GHI = DNI cos Z + DHI
    np.testing.assert_allclose(cs.ghi_w_m2, cs.dni_w_m2 * np.cos(np.radians(cs.zenith_deg)) + cs.dhi_w_m2,
                               rtol=1e-9)
    # plausibility for a clear March noon at 1500 m (hand range, not a source): 500–1000 W/m²
    assert 500 < cs.ghi_w_m2.max() < 1000


# --- irradiation on slopes (no DEM) -----------------------------------------------------------

@pytest.fixture(scope="module")
def march_day():
    return clear_sky_window(46.5, 9.0, 1500.0, "2025-03-15", "06:00", "19:00", "Europe/Zurich", 20)


def by_hand(cs, slope, aspect, beam_scale=1.0):
    """Σ (DNI max(cos θ, 0)·scale + DHI (1 + cos β)/2) Δt with Eq. (1.6.3) of Duffie & Beckman."""
    b = math.radians(slope)
    total = 0.0
    for z, a, dni, dhi in zip(cs.zenith_deg, cs.azimuth_deg, cs.dni_w_m2, cs.dhi_w_m2, strict=True):
        zr = math.radians(z)
        c = math.cos(zr) * math.cos(b) + math.sin(zr) * math.sin(b) * math.cos(math.radians(a - aspect))
        beam = dni * max(c, 0.0) if z < 90 else 0.0
        total += (beam * beam_scale + dhi * (1 + math.cos(b)) / 2) * cs.step_hours
    return total


def test_irradiation_horizontal_is_ghi(march_day):
    e = irradiation_on_slope_wh_m2(march_day, np.zeros(3), np.array([0.0, 90.0, 200.0]))
    np.testing.assert_allclose(e, march_day.ghi_wh_m2, rtol=1e-5)


@pytest.mark.parametrize("slope, aspect", [(20.0, 180.0), (35.0, 0.0), (30.0, 95.0), (60.0, 270.0)])
def test_irradiation_tilted_plane_analytic(march_day, slope, aspect):
    got = irradiation_on_slope_wh_m2(march_day, np.array([slope]), np.array([aspect]))[0]
    assert got == pytest.approx(by_hand(march_day, slope, aspect), rel=1e-5)


def test_south_slope_gets_more_than_north_slope(march_day):
    e = irradiation_on_slope_wh_m2(march_day, np.array([30.0, 30.0]), np.array([180.0, 0.0]))
    assert e[0] > 1.5 * e[1]


def test_sun_fraction_scales_the_beam(march_day):
    slope, aspect = np.array([25.0]), np.array([180.0])
    f_open = float(np.mean([z < 90 and math.cos(math.radians(z)) * math.cos(math.radians(25)) +
                            math.sin(math.radians(z)) * math.sin(math.radians(25)) *
                            math.cos(math.radians(a - 180)) > 0
                            for z, a in zip(march_day.zenith_deg, march_day.azimuth_deg, strict=True)]))
    full = irradiation_on_slope_wh_m2(march_day, slope, aspect)[0]
    assert irradiation_on_slope_wh_m2(march_day, slope, aspect, sun_fraction=f_open)[0] == pytest.approx(full)
    diffuse_only = by_hand(march_day, 25.0, 180.0, beam_scale=0.0)
    assert irradiation_on_slope_wh_m2(march_day, slope, aspect, sun_fraction=0.0)[0] == pytest.approx(
        diffuse_only, rel=1e-5)
    half = irradiation_on_slope_wh_m2(march_day, slope, aspect, sun_fraction=f_open / 2)[0]
    assert half == pytest.approx(diffuse_only + 0.5 * (full - diffuse_only), rel=1e-5)


def test_nan_slope_gives_nan(march_day):
    e = irradiation_on_slope_wh_m2(march_day, np.array([np.nan, 10.0], dtype=np.float32),
                                   np.array([0.0, 0.0], dtype=np.float32))
    assert np.isnan(e[0]) and np.isfinite(e[1]) and e.dtype == np.float32


# --- the stage --------------------------------------------------------------------------------

def test_flat_dem_sun_fraction_is_share_of_daylight_and_irradiation_is_ghi():
    # 15:00–20:00 on 15 March spans sunset (about 18:30 CET): some steps have the sun down
    g = sun_from_dem(flat(), grid(12, 14, 5.0), UTM32, start="15:00", end="20:00", step_minutes=20, **DAY)
    cs = g.window
    assert 0 < cs.sun_up.sum() < cs.n_steps
    np.testing.assert_allclose(g.sun_fraction, cs.sun_up.mean(), atol=1e-6)
    np.testing.assert_allclose(g.irradiation_wh_m2, cs.ghi_wh_m2, rtol=1e-5)
    assert g.sun_fraction.dtype == np.float32 and g.irradiation_wh_m2.dtype == np.float32
    assert np.all(g.slope_deg == 0)
    assert abs(g.grid_north_deg) < 1e-3                      # on the central meridian
    assert cs.latitude == pytest.approx(46.50, abs=0.01) and cs.longitude == pytest.approx(9.0, abs=1e-6)


def test_tilted_plane_dem_matches_the_analytic_plane():
    # a plane falling south at 20°, 5 m cells: Horn slope 20°, aspect 180°, no cast shadows
    n_rows, n_cols, cell = 16, 18, 5.0
    rows = np.arange(n_rows)[:, None] * np.ones((1, n_cols))
    z = 1800.0 - rows * cell * math.tan(math.radians(20.0))   # lower towards the south (larger rows)
    g = sun_from_dem(z, grid(n_rows, n_cols, cell), UTM32, start="07:00", end="18:00", step_minutes=30, **DAY)
    np.testing.assert_allclose(g.slope_deg, 20.0, atol=1e-3)
    np.testing.assert_allclose(g.aspect_deg, 180.0, atol=0.01)   # float32 gradients
    np.testing.assert_allclose(g.irradiation_wh_m2, by_hand(g.window, 20.0, 180.0), rtol=1e-4)
    b = math.radians(20.0)
    open_steps = [z_ < 90 and math.cos(math.radians(z_)) * math.cos(b) +
                  math.sin(math.radians(z_)) * math.sin(b) * math.cos(math.radians(a - 180)) > 0
                  for z_, a in zip(g.window.zenith_deg, g.window.azimuth_deg, strict=True)]
    np.testing.assert_allclose(g.sun_fraction, np.mean(open_steps), atol=1e-6)


def test_north_slope_steeper_than_the_sun_is_in_shade_all_day():
    # 60° slope facing north, March: the noon sun (about 41° up) never reaches it
    n_rows, n_cols = 10, 10
    rows = np.arange(n_rows)[:, None] * np.ones((1, n_cols))
    z = 1000.0 + rows * math.tan(math.radians(60.0))        # higher towards the south
    g = sun_from_dem(z, grid(n_rows, n_cols), UTM32, start="09:00", end="15:00", step_minutes=30, **DAY)
    assert np.all(g.sun_fraction == 0)
    np.testing.assert_allclose(g.irradiation_wh_m2, by_hand(g.window, 60.0, 0.0, beam_scale=0.0), rtol=1e-4)


def test_wall_casts_the_shadow_the_geometry_predicts():
    # E–W wall 20 m high near the south edge, flat ground north of it, 1 m cells, 10:00–14:00
    n_rows, n_cols, h, wall_row = 80, 200, 20.0, 70
    z = np.full((n_rows, n_cols), 1500.0)
    z[wall_row, :] = 1500.0 + h
    g = sun_from_dem(z, grid(n_rows, n_cols), UTM32, start="10:00", end="14:00", step_minutes=15, **DAY)
    cs = g.window
    # a flat cell d metres north of the wall is shaded when the sun is in the south and
    # d < h·(−cos A)/tan e (distance across the wall to the shadow tip); 2 cells of margin for
    # the discrete rays
    cols = slice(85, 115)
    d = (wall_row - np.arange(0, wall_row - 1))[:, None].astype(float)   # rows 0 .. wall_row-2
    lit_min = np.zeros_like(d)
    lit_max = np.zeros_like(d)
    beam_hand = np.zeros_like(d)
    for zen, az, dni in zip(cs.zenith_deg, cs.azimuth_deg, cs.dni_w_m2, strict=True):
        e = math.radians(90 - zen)
        tip = h * max(-math.cos(math.radians(az)), 0.0) / math.tan(e)
        surely_shaded, surely_lit = d < tip - 2, d > tip + 2
        lit_min += surely_lit
        lit_max += ~surely_shaded
        beam_hand += np.where(surely_lit, dni * math.cos(math.radians(zen)), np.nan * surely_shaded)
    frac = g.sun_fraction[: wall_row - 1, cols]
    assert np.all(frac >= lit_min / cs.n_steps - 1e-6) and np.all(frac <= lit_max / cs.n_steps + 1e-6)
    assert frac[-1].max() < frac[0].min()                     # next to the wall: less sun than far away
    assert np.all(g.sun_fraction[0, cols] == 1.0)             # 70 m away: never shaded in this window
    # irradiation where every step is certain: beam of the lit steps + diffuse
    certain = (lit_min == lit_max)[:, 0]
    expect = (np.nan_to_num(beam_hand[certain]) + cs.dhi_w_m2.sum()) * cs.step_hours
    np.testing.assert_allclose(g.irradiation_wh_m2[: wall_row - 1][certain][:, cols],
                               np.broadcast_to(expect, (certain.sum(), 30)), rtol=1e-4)
    assert certain.sum() > 20


def test_grid_north_west_of_the_central_meridian():
    # convergence γ ≈ (λ − λ0)·sin φ (hand formula for transverse Mercator, small Δλ)
    g = sun_from_dem(flat(), grid(12, 14, 5.0, x0=400_000.0), UTM32, start="11:00", end="12:00", **DAY)
    lat, lon = g.window.latitude, g.window.longitude
    assert g.grid_north_deg == pytest.approx((lon - 9.0) * math.sin(math.radians(lat)), abs=0.02)
    assert g.grid_north_deg < 0


def test_nodata_stays_nodata_and_progress_is_called_per_step():
    z = flat()
    z[0, 0] = np.nan
    mask = np.zeros(z.shape, dtype=bool)
    mask[5, 6] = True
    calls = []
    g = sun_from_dem(z, grid(12, 14, 5.0), UTM32, start="10:00", end="11:00", step_minutes=10,
                     nodata_mask=mask, progress=lambda done, total: calls.append((done, total)), **DAY)
    assert calls == [(i, 6) for i in range(1, 7)]
    for a in (g.sun_fraction, g.irradiation_wh_m2, g.slope_deg):
        assert np.isnan(a[0, 0]) and np.isnan(a[5, 6]) and np.isfinite(a).sum() == z.size - 2


def test_south_up_grid_gives_the_same_answer_flipped():
    n_rows, n_cols = 12, 14
    rows = np.arange(n_rows)[:, None] * np.ones((1, n_cols))
    z = 1500.0 + 0.4 * rows * 2.0 + np.arange(n_cols)[None, :] * 0.3   # some slope
    t = grid(n_rows, n_cols, 2.0)
    g1 = sun_from_dem(z, t, UTM32, start="09:00", end="12:00", step_minutes=30, **DAY)
    t_up = Affine(t.a, 0, t.c, 0, -t.e, t.f + t.e * n_rows)                  # same cells, row 0 south
    g2 = sun_from_dem(z[::-1], t_up, UTM32, start="09:00", end="12:00", step_minutes=30, **DAY)
    np.testing.assert_allclose(g2.irradiation_wh_m2[::-1], g1.irradiation_wh_m2, rtol=1e-5)
    np.testing.assert_allclose(g2.aspect_deg[::-1], g1.aspect_deg, atol=1e-3)


@pytest.mark.parametrize("crs, transform, exc", [
    ("EPSG:4326", Affine(0.001, 0, 9.0, 0, -0.001, 46.5), CRSError),
    (None, grid(12, 14), CRSError),
    (UTM32, Affine(1, 0.2, 500_000, 0.2, -1, 5_150_000), InputError),
])
def test_stage_errors(crs, transform, exc):
    with pytest.raises(exc):
        sun_from_dem(flat(), transform, crs, start="10:00", end="11:00", **DAY)


def test_all_nodata_rejected():
    with pytest.raises(InputError):
        sun_from_dem(np.full((4, 4), np.nan), grid(4, 4), UTM32, start="10:00", end="11:00", **DAY)
