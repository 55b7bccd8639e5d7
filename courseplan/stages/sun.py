"""Stage: sun and shade over a race-day window, from a terrain model (DEM).

Data in, data out, no files.  For every time step of the window: the sun's position (NREL SPA via
pvlib), the cast shadows of all terrain in the DEM (:class:`courseplan.physics.terrain.ShadowCaster`),
the sun behind the slope and the sun below the horizon; clear-sky irradiance (Ineichen–Perez via
pvlib) transposed onto each cell's slope.  See ``docs/sun.md`` for methods, equations and limits.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from courseplan.errors import InputError, SettingsError
from courseplan.geo.crs import require_metric
from courseplan.geo.raster import resample_to
from courseplan.grid import Grid
from courseplan.physics.solar import (
    ClearSkyWindow,
    clear_sky_window,
    irradiation_on_slope_wh_m2,
    sky_view_isotropic,
)
from courseplan.physics.terrain import (
    ShadowCaster,
    horn_gradient,
    normal_from_gradient,
    slope_aspect_from_gradient,
    slope_aspect_horn,
    sun_vector,
)

__all__ = ["SunGrids", "sun_from_dem", "METHOD", "PlanSun", "plan_sun", "terrain_on", "zone_irradiation"]

#: Short method statement written into the sun GeoTIFF's tags.
METHOD = ("NREL SPA solar position (pvlib); Ineichen-Perez clear sky with pvlib Linke turbidity; "
          "Horn 1981 slope/aspect; cast shadows by a shadow-height-front sweep along the sun azimuth "
          "over the whole DEM; beam by cosine of incidence, isotropic sky diffuse (1+cos slope)/2; "
          "midpoint rule per time step")


@dataclass(frozen=True, eq=False)
class SunGrids:
    """Sun and shade on a DEM's grid over a window.

    Attributes
    ----------
    sun_fraction
        Share of the window's time steps in direct sun [-], 0–1 (float32): sun above the horizon, in
        front of the slope and not hidden by terrain.  NaN on nodata.
    irradiation_wh_m2
        Clear-sky irradiation on the sloping surface over the window [Wh/m²] (float32): beam on the
        slope where sunlit plus isotropic sky diffuse.  NaN on nodata.
    slope_deg, aspect_deg
        Horn slope [deg] and aspect [deg, clockwise from grid north] (float32).
    window
        The sun positions and clear-sky irradiance used (:class:`ClearSkyWindow`).
    grid_north_deg
        Azimuth of grid north measured from true north at the DEM centre [deg] (positive when grid
        north lies east of true north); sun azimuths were turned by it onto the grid.
    transform, crs
        The DEM's grid (``affine.Affine``) and CRS, unchanged.
    """

    sun_fraction: np.ndarray
    irradiation_wh_m2: np.ndarray
    slope_deg: np.ndarray
    aspect_deg: np.ndarray
    window: ClearSkyWindow
    grid_north_deg: float
    transform: object
    crs: object

    @property
    def method(self) -> str:
        """One-paragraph method statement (for file tags)."""
        return METHOD


def _site(crs, transform, shape) -> tuple[float, float, float]:
    """Longitude, latitude of the grid centre and the grid-north azimuth there [deg]."""
    from pyproj import Transformer

    n_rows, n_cols = shape
    x0, y0 = transform @ (n_cols / 2.0, n_rows / 2.0)
    to_geo = Transformer.from_crs(crs, "EPSG:4326", always_xy=True)
    to_grid = Transformer.from_crs("EPSG:4326", crs, always_xy=True)
    lon, lat = to_geo.transform(x0, y0)
    # Direction of true north on the grid: step 1e-4 deg (≈ 11 m) north along the meridian.
    x1, y1 = to_grid.transform(lon, lat + 1e-4)
    true_north_on_grid = math.degrees(math.atan2(x1 - x0, y1 - y0))
    return float(lon), float(lat), -true_north_on_grid


def sun_from_dem(dem: np.ndarray, transform, crs, *, date: str, start: str, end: str, timezone: str,
                 step_minutes: float = 15, nodata_mask: np.ndarray | None = None,
                 progress: Callable[[int, int], object] | None = None) -> SunGrids:
    """Sun fraction and clear-sky irradiation over a local time window, on a DEM's grid.

    Parameters
    ----------
    dem
        Elevation [m], 2-D; NaN = nodata.
    transform
        ``affine.Affine`` of the grid, without rotation (north-up or south-up); cell size in metres.
    crs
        The DEM's CRS (pyproj or rasterio CRS, EPSG code, WKT), projected in metres.  Geographic DEMs
        are reprojected by ``courseplan.io.rasters.read_dem`` first.
    date, start, end, timezone, step_minutes
        Race-day window: ``YYYY-MM-DD``, local ``HH:MM`` limits, IANA zone, longest step [min].
    nodata_mask
        Optional boolean array, True where the DEM has no data (in addition to NaN cells).
    progress
        Optional callable, called once per time step as ``progress(done, total)``.

    Returns
    -------
    SunGrids

    Raises
    ------
    CRSError
        Missing, unreadable or non-metric CRS.
    InputError
        Rotated grid, wrong mask shape, or a DEM without any data.
    SettingsError
        Unreadable window (see :func:`courseplan.physics.solar.window_times`).

    Notes
    -----
    The site for solar position and clear sky is the grid centre at the median DEM elevation.  Sun
    azimuths are turned from true north onto grid north (UTM meridian convergence).  A time step
    counts as sunlit for a cell when the sun is above the horizon, ``cos θ > 0`` on the cell's slope
    and no terrain up-sun hides the sun; the beam ``DNI · cos θ`` is added for those steps only.
    Working arrays are float32 and reused from step to step: peak memory is about 12 float32 grids
    (460 MB measured for 10 million cells, ``benchmarks/bench_sun.py``).
    """
    crs_m = require_metric(crs, "DEM", "reproject it to a metric CRS first (courseplan reads DEMs in the local UTM zone)")
    z = np.array(dem, dtype=np.float32, copy=True)
    if z.ndim != 2 or min(z.shape) < 2:
        raise InputError(f"DEM of shape {z.shape} is too small", where="DEM", fix="give at least 2 × 2 cells")
    if nodata_mask is not None:
        mask = np.asarray(nodata_mask, dtype=bool)
        if mask.shape != z.shape:
            raise InputError(f"nodata mask of shape {mask.shape} does not match the DEM {z.shape}",
                             where="DEM")
        z[mask] = np.nan
    if transform.b != 0 or transform.d != 0:
        raise InputError("the DEM grid is rotated", where="DEM",
                         fix="warp it to a north-up grid first, e.g. with rasterio's rio command: "
                             "rio warp IN.tif OUT.tif --dst-crs EPSG:32632")
    dx_m, dy_m = abs(float(transform.a)), abs(float(transform.e))
    flip = transform.e > 0                                # south-up grid: row 0 at the south
    if flip:
        z = z[::-1]
    nodata = np.isnan(z)
    if nodata.all():
        raise InputError("the DEM holds no elevation data", where="DEM",
                         fix="check its nodata value and extent")
    lon, lat, grid_north = _site(crs_m, transform, z.shape)
    altitude = float(np.nanmedian(z))
    cs = clear_sky_window(lat, lon, altitude, date, start, end, timezone, step_minutes=step_minutes)

    gx, gy = horn_gradient(z, dx_m, dy_m)
    slope, aspect = slope_aspect_from_gradient(gx, gy)
    ne, nn, nu = normal_from_gradient(gx, gy)
    del gx, gy
    caster = ShadowCaster(z, dx_m, dy_m)
    f32 = np.float32
    lit_steps = np.zeros(z.shape, dtype=np.uint16 if cs.n_steps < 65535 else np.uint32)
    beam = np.zeros(z.shape, dtype=f32)                  # Σ DNI cos θ over sunlit steps [W/m²]
    cosi = np.empty(z.shape, dtype=f32)
    tmp = np.empty(z.shape, dtype=f32)
    shade = np.empty(z.shape, dtype=bool)
    lit = np.empty(z.shape, dtype=bool)
    total = cs.n_steps
    for k in range(total):
        zen, az, dni = float(cs.zenith_deg[k]), float(cs.azimuth_deg[k]), float(cs.dni_w_m2[k])
        if zen < 90.0:
            az_grid = (az - grid_north) % 360.0
            se, sn, su = (f32(v) for v in sun_vector(zen, az_grid))
            np.multiply(ne, se, out=cosi)                # cos θ = n · s, Eq. (1.6.3) of Duffie & Beckman
            np.multiply(nn, sn, out=tmp)
            cosi += tmp
            np.multiply(nu, su, out=tmp)
            cosi += tmp
            caster.shadow(az_grid, 90.0 - zen, out=shade)
            np.greater(cosi, 0, out=lit)
            lit &= ~shade
            lit_steps += lit
            if dni > 0:
                np.multiply(cosi, f32(dni), out=tmp)
                np.multiply(tmp, lit, out=tmp)           # beam only where sunlit
                beam += tmp
        if progress is not None:
            progress(k + 1, total)
    del cosi, tmp, shade, lit, ne, nn, nu, caster

    sun_fraction = lit_steps.astype(f32)
    sun_fraction /= f32(total)
    del lit_steps
    irr = sky_view_isotropic(slope).astype(f32, copy=False)
    irr *= f32(np.sum(cs.dhi_w_m2))
    irr += beam
    irr *= f32(cs.step_hours)
    del beam
    for a in (sun_fraction, irr):
        a[nodata] = np.nan
    if flip:
        # back to the caller's row order; aspect is a compass azimuth and needs no change
        sun_fraction, irr, slope, aspect = (np.ascontiguousarray(a[::-1])
                                            for a in (sun_fraction, irr, slope, aspect))
    return SunGrids(sun_fraction=sun_fraction, irradiation_wh_m2=irr, slope_deg=slope, aspect_deg=aspect,
                    window=cs, grid_north_deg=grid_north, transform=transform, crs=crs)


# ---------------------------------------------------------------- sun for a plan

DEFAULT_SITE_ALTITUDE_M = 1500.0
"""Altitude assumed for the clear sky when no DEM is given [m] (a typical alpine race venue; practice)."""

SUN_STEP_MIN = 15.0
"""Longest time step of the plan's clear-sky window and of the sun computed from a DEM [min]."""


@dataclass(frozen=True)
class PlanSun:
    """The sun inputs of a plan, on the working grid.

    Attributes
    ----------
    sun
        Sun/shade grid the zones are classed on (the raster given, or computed from the DEM).
    encoding
        What ``sun`` holds (``fraction``, ``percent`` or ``wh_m2``).
    slope, aspect, elevation
        DEM-derived grids on ``sun``'s grid, or None without a DEM.
    clear_sky
        Clear-sky window at the course (:class:`courseplan.physics.solar.ClearSkyWindow`).
    notes, sources
        What the user should know, and where each value came from.
    """

    sun: Grid
    encoding: str
    slope: Grid | None
    aspect: Grid | None
    elevation: Grid | None
    clear_sky: ClearSkyWindow
    notes: tuple[str, ...]
    sources: dict

    @property
    def window_start(self):
        """Start of the hold window (tz-aware), taken from the clear-sky window itself."""
        return self.clear_sky.start


def terrain_on(grid: Grid, dem: Grid) -> tuple[Grid, Grid, Grid]:
    """Slope, aspect (Horn 1981, on the DEM's own cells) and elevation resampled onto *grid*."""
    dx, dy = dem.cell_size
    slope, aspect = slope_aspect_horn(dem.values, dx, dy)
    s = resample_to(Grid(slope.astype(np.float32), dem.transform, dem.crs, "slope"), grid)
    # aspect is circular: resample its sine and cosine
    a_rad = np.radians(aspect.astype(np.float64))
    sa = resample_to(Grid(np.sin(a_rad).astype(np.float32), dem.transform, dem.crs), grid).values
    ca = resample_to(Grid(np.cos(a_rad).astype(np.float32), dem.transform, dem.crs), grid).values
    a = Grid((np.degrees(np.arctan2(sa, ca)) % 360.0).astype(np.float32), grid.transform, grid.crs, "aspect")
    e = resample_to(dem, grid)
    return s, a, e


def site_altitude_m(dem: Grid | None) -> tuple[float, str | None]:
    """Median DEM height as the site altitude [m], or the default with a note."""
    if dem is not None:
        vals = dem.values[np.isfinite(dem.values)]
        if vals.size:
            return float(np.median(vals)), None
    return DEFAULT_SITE_ALTITUDE_M, (f"no DEM: clear-sky irradiance computed for an assumed altitude of "
                                     f"{DEFAULT_SITE_ALTITUDE_M:.0f} m and a flat course")


def plan_sun(*, lon: float, lat: float, date: str, start: str, end: str, timezone: str, sun: Grid | None,
             encoding: str, dem: Grid | None, crs, sources: dict, step_min: float = SUN_STEP_MIN) -> PlanSun:
    """Sun inputs of a plan: the clear-sky window at the course and the sun/shade grid.

    Without a sun raster the sun share is computed from the DEM (:func:`sun_from_dem`); with a DEM,
    slope, aspect and elevation are resampled onto the sun grid (:func:`terrain_on`).
    """
    notes = []
    srcs = dict(sources)
    altitude, note = site_altitude_m(dem)
    if note:
        notes.append(note)
    cs = clear_sky_window(lat, lon, altitude, date, start, end, timezone, step_min)
    if sun is None:
        if dem is None:
            raise SettingsError("neither a sun raster nor a DEM is given", where="[inputs]",
                                fix="give --sun SUN.tif or --dem DEM.tif")
        grids = sun_from_dem(dem.values, dem.transform, crs, date=date, start=start, end=end,
                             timezone=timezone, step_minutes=SUN_STEP_MIN)
        sun = Grid(np.asarray(grids.sun_fraction, dtype=np.float32), dem.transform, crs,
                   f"sun share computed from the DEM for {date} {start}–{end}")
        encoding = "fraction"
        srcs["sun"] = sun.source
    slope = aspect = elev = None
    if dem is not None:
        slope, aspect, elev = terrain_on(sun, dem)
    return PlanSun(sun=sun, encoding=encoding, slope=slope, aspect=aspect, elevation=elev, clear_sky=cs,
                   notes=tuple(notes), sources=srcs)


def zone_irradiation(zones, ps: PlanSun):
    """Add ``irradiation_wh_m2`` (the ``sun`` stage's column) to the zones table.

    The raster's own irradiation where it holds Wh/m²; otherwise the clear sky on each zone's slope
    and aspect with the beam scaled by the zone's sun share
    (:func:`courseplan.physics.solar.irradiation_on_slope_wh_m2`).
    """
    out = zones.copy()
    sources = dict(ps.sources)
    if ps.encoding == "wh_m2":
        out["irradiation_wh_m2"] = out["raster_irradiation_wh_m2"].to_numpy(float)
        sources["irradiation"] = "sun/shade raster (Wh/m² over the window)"
    else:
        asp = np.nan_to_num(out["aspect_deg"].to_numpy(float), nan=180.0)
        out["irradiation_wh_m2"] = irradiation_on_slope_wh_m2(
            ps.clear_sky, out["slope_deg"].to_numpy(float), asp, out["sun_fraction"].to_numpy(float))
        sources["irradiation"] = ("clear-sky (pvlib Ineichen–Perez) on each zone's slope, beam scaled by the "
                                  "zone's sun share")
    return out, sources
