"""The pipeline: one function that runs a plan from settings and loaded inputs (no file I/O).

    zoning → conditions → dosing → logistics

:func:`run_plan` takes :class:`LoadedInputs` (built by :mod:`courseplan.io.loader`) and returns a
:class:`PlanResult` that the io layer writes out.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from pyproj import CRS, Transformer
from shapely.geometry.base import BaseGeometry

from courseplan.cautions import cautions_for
from courseplan.errors import SettingsError
from courseplan.grid import Grid
from courseplan.settings import PlanSettings

PRACTICE_HIGH_G_M2 = 150.0
"""Upper end of reported alpine doses per pass, 50–150 g/m² [from memory, domain-data §7]: a
plausibility flag only, never a limit on the computed dose."""


@dataclass(frozen=True)
class LoadedInputs:
    """Inputs read by the io layer, all in the one working CRS.

    Attributes
    ----------
    course
        Course polygon [m].
    course_name
        Name of the course (from the file).
    crs
        Working metric CRS.
    sun
        Sun/shade raster window, or None when the plan computes it from the DEM.
    dem
        Terrain model window on its own grid, or None.
    observations
        Field observations (GeoDataFrame) or None.
    forecast
        Hourly forecast table or None.
    centreline
        Course line from start to finish or None.
    markers
        Named section markers ``(name, x, y)``.
    catalogue
        Agent catalogue (built-in plus user overrides).
    notes
        Warnings gathered while reading (shown to the user and kept in the outputs).
    """

    course: BaseGeometry
    course_name: str
    crs: CRS
    sun: Grid | None
    dem: Grid | None = None
    observations: Any = None
    forecast: pd.DataFrame | None = None
    centreline: BaseGeometry | None = None
    markers: tuple[tuple[str, float, float], ...] = ()
    catalogue: dict | None = None
    notes: tuple[str, ...] = field(default=())
    sources: dict = field(default_factory=dict)


@dataclass(frozen=True)
class PlanResult:
    """Everything a plan produced, ready for the writers."""

    settings: PlanSettings
    agent: Any
    zones: Any  # GeoDataFrame, working CRS, every declared column
    course: Any  # GeoDataFrame with one row
    observations: Any
    logistics: Any  # courseplan.stages.logistics.LogisticsResult
    weather: Any
    start_xy: tuple[float, float]
    finish_xy: tuple[float, float]
    crs: CRS
    notes: tuple[str, ...]
    cautions: tuple[str, ...]
    context: Grid | None
    sources: dict

    def totals(self) -> dict[str, Any]:
        """Plan totals (all zones): areas, masses, loads."""
        z = self.zones
        treated = z["product_kg"] > 0
        return {
            "agent": self.agent.name,
            "agent_label": self.agent.label,
            "zone_count": int(len(z)),
            "treated_zone_count": int(treated.sum()),
            "course_area_m2": float(self.course.geometry.iloc[0].area),
            "course_surface_area_m2": float(z["area_m2"].sum()),
            "treated_area_m2": float(z.loc[treated, "area_m2"].sum()),
            "total_product_kg": float(z["product_kg"].sum()),
            "total_product_p90_kg": float(z["product_p90_kg"].sum()),
            "nitrogen_kg": float(z["nitrogen_kg"].sum()),
            "chloride_kg": float(z["chloride_kg"].sum()),
            "verdicts": {str(k): int(v) for k, v in z["verdict"].value_counts().sort_index().items()},
        }


def _lonlat(crs: CRS, x: float, y: float) -> tuple[float, float]:
    tr = Transformer.from_crs(crs, CRS.from_epsg(4326), always_xy=True)
    lon, lat = tr.transform(x, y)
    return float(lon), float(lat)


def terrain_on(grid: Grid, dem: Grid) -> tuple[Grid, Grid, Grid]:
    """Slope, aspect (Horn 1981, on the DEM's own cells) and elevation resampled onto *grid*."""
    from courseplan.geo.raster import resample_to
    from courseplan.physics.terrain import slope_aspect_horn

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


def run_plan(settings: PlanSettings, inputs: LoadedInputs, progress=None) -> PlanResult:
    """Run a plan: zones, snow state, dose, order and crews.

    Parameters
    ----------
    settings
        Validated plan settings (``[plan] date`` must be set).
    inputs
        Loaded inputs in the working CRS.
    progress
        Optional callable ``progress(stage_name)``.

    Returns
    -------
    PlanResult
    """
    import geopandas as gpd

    from courseplan.agents import get_agent
    from courseplan.physics.solar import clear_sky_window, irradiation_on_slope_wh_m2
    from courseplan.stages.conditions import assign_snow
    from courseplan.stages.dosing import apply_dosing
    from courseplan.stages.logistics import plan_logistics
    from courseplan.stages.weather import weather_from_settings, weather_from_table
    from courseplan.stages.zoning import ZoningInputs, zone_course

    def step(name: str) -> None:
        if progress is not None:
            progress(name)

    notes = list(inputs.notes)
    if settings.plan.date is None:
        raise SettingsError("no race date", where="[plan] date", fix='set it, e.g. date = "2027-03-14"')
    agent = get_agent(settings.plan.agent, inputs.catalogue)
    pl, win = settings.plan, settings.window
    cx, cy = inputs.course.centroid.x, inputs.course.centroid.y
    lon, lat = _lonlat(inputs.crs, cx, cy)
    altitude = 1500.0
    if inputs.dem is not None:
        vals = inputs.dem.values[np.isfinite(inputs.dem.values)]
        if vals.size:
            altitude = float(np.median(vals))
    else:
        notes.append("no DEM: clear-sky irradiance computed for an assumed altitude of 1500 m and a flat course")
    step("sun")
    cs = clear_sky_window(lat, lon, altitude, pl.date, win.start, win.end, pl.timezone, 15.0)
    sun = inputs.sun
    encoding = settings.inputs.sun_encoding
    sources = dict(inputs.sources)
    if sun is None:
        if inputs.dem is None:
            raise SettingsError("neither a sun raster nor a DEM is given", where="[inputs]",
                                fix="give --sun SUN.tif or --dem DEM.tif")
        from courseplan.stages.sun import sun_from_dem

        grids = sun_from_dem(inputs.dem.values, inputs.dem.transform, inputs.crs, date=pl.date,
                             start=win.start, end=win.end, timezone=pl.timezone, step_minutes=15)
        sun = Grid(np.asarray(grids.sun_fraction, dtype=np.float32), inputs.dem.transform, inputs.crs,
                   f"sun share computed from the DEM for {pl.date} {win.start}–{win.end}")
        encoding = "fraction"
        sources["sun"] = sun.source
    slope = aspect = elev = None
    if inputs.dem is not None:
        slope, aspect, elev = terrain_on(sun, inputs.dem)

    step("zoning")
    zres = zone_course(ZoningInputs(course=inputs.course, sun=sun, encoding=encoding, slope_deg=slope,
                                    aspect_deg=aspect, elevation_m=elev,
                                    start_xy=_start_in_work(settings, inputs),
                                    centreline=inputs.centreline, markers=inputs.markers),
                       settings.zoning, window_hours=win.hours,
                       max_uncovered_pct=settings.inputs.max_uncovered_pct)
    notes += list(zres.notes)
    zones = zres.zones
    if encoding != "wh_m2":
        asp = np.nan_to_num(zones["aspect_deg"].to_numpy(float), nan=180.0)
        zones["irradiation_wh_m2"] = irradiation_on_slope_wh_m2(
            cs, zones["slope_deg"].to_numpy(float), asp, zones["sun_fraction"].to_numpy(float))
        sources["irradiation"] = ("clear-sky (pvlib Ineichen–Perez) on each zone's slope, beam scaled by the "
                                  "zone's sun share")
    else:
        sources["irradiation"] = "sun/shade raster (Wh/m² over the window)"

    step("conditions")
    obs = inputs.observations
    obs_exp = None
    if obs is not None and len(obs):
        idx = zres.exposure_grid.sample(obs.geometry.x.to_numpy(), obs.geometry.y.to_numpy())
        labels = settings.zoning.exposure_labels
        obs_exp = np.array([labels[int(i)] if np.isfinite(i) and i >= 0 else None for i in idx], dtype=object)
        obs = obs.copy()
        obs["exposure_class"] = obs_exp
    window_start = cs.times[0] - pd.Timedelta(minutes=7.5) if len(cs.times) else None
    zones = assign_snow(zones, obs, settings, window_start=window_start, obs_exposure=obs_exp)

    step("dosing")
    if inputs.forecast is not None:
        weather = weather_from_table(inputs.forecast, settings, cs,
                                     source=f"forecast file {sources.get('forecast', '')}".strip())
    else:
        weather = weather_from_settings(settings, cs)
    zones = apply_dosing(zones, settings, agent, weather)
    high = zones["dose_g_m2"].to_numpy(float) > PRACTICE_HIGH_G_M2
    if high.any() and not getattr(settings.dosing, "calibrated", None):
        notes.append(f"{int(high.sum())} zone(s) get more than {PRACTICE_HIGH_G_M2:.0f} g/m², above the doses the "
                     "trade reports; the model is not calibrated for this hill yet: treat a test patch, fit "
                     "the model to it ([dosing] calibrated) and check the inputs before ordering")

    step("logistics")
    log = plan_logistics(gpd.GeoDataFrame(zones, geometry="geometry", crs=inputs.crs), settings, agent)
    zones = log.zones
    course = gpd.GeoDataFrame({"name": [inputs.course_name]}, geometry=[inputs.course], crs=inputs.crs)
    cautions = tuple(cautions_for(agent.name, agent.nitrogen_fraction, nitrate=bool(agent.oxidiser)))
    context = inputs.dem if inputs.dem is not None else sun
    return PlanResult(settings=settings, agent=agent, zones=zones, course=course, observations=obs,
                      logistics=log, weather=weather, start_xy=zres.start_xy, finish_xy=zres.finish_xy,
                      crs=inputs.crs, notes=tuple(notes) + tuple(log.notes), cautions=cautions,
                      context=context, sources=sources)


def _start_in_work(settings: PlanSettings, inputs: LoadedInputs) -> tuple[float, float] | None:
    xy = settings.zoning.start_xy
    if xy is None:
        return None
    src = inputs.sources.get("course_crs")
    if src is None:
        return float(xy[0]), float(xy[1])
    tr = Transformer.from_crs(CRS.from_user_input(src), inputs.crs, always_xy=True)
    x, y = tr.transform(float(xy[0]), float(xy[1]))
    return float(x), float(y)
