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
from courseplan.columns import check_stage
from courseplan.errors import SettingsError
from courseplan.grid import Grid
from courseplan.settings import PlanSettings

PRACTICE_HIGH_G_M2 = 150.0
"""A single pass above this is beyond every field figure (field-evidence.md §0: about 5–60 g/m² per
treatment; 150 g/m² per pass is unsupported): a plausibility flag only, never a limit on the dose."""

DAY_STEP_MIN = 10.0
"""Longest step of the race day's energy series [min] (τ is 15–30 min, so a step must be shorter)."""


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
    passes: Any = None  # pandas.DataFrame, one row per zone and pass (courseplan.columns.PASSES)
    schedule: Any = None  # courseplan.schedule.RaceSchedule

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
            "total_product_p90_kg": float(self.logistics.order.p90_kg),
            "nitrogen_kg": float(z["nitrogen_kg"].sum()),
            "chloride_kg": float(z["chloride_kg"].sum()),
            "verdicts": {str(k): int(v) for k, v in z["verdict"].value_counts().sort_index().items()},
        }


def _lonlat(crs: CRS, x: float, y: float) -> tuple[float, float]:
    tr = Transformer.from_crs(crs, CRS.from_epsg(4326), always_xy=True)
    lon, lat = tr.transform(x, y)
    return float(lon), float(lat)


def run_plan(settings: PlanSettings, inputs: LoadedInputs, progress=None) -> PlanResult:
    """Run a plan: sun, zones, snow state, dose, crews and order — the stages in order.

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
    from courseplan.schedule import pass_slots, plan_schedule
    from courseplan.stages.conditions import assign_snow, observation_exposure
    from courseplan.stages.crews import assign_crews, time_pass
    from courseplan.stages.dosing import dose_pass, finish_dosing, prepare_dosing
    from courseplan.stages.sun import plan_sun, zone_irradiation
    from courseplan.stages.weather import uniform_steps, weather_from_settings, weather_from_table
    from courseplan.stages.zoning import ZoningInputs, zone_course

    def step(name: str) -> None:
        if progress is not None:
            progress(name)

    if settings.plan.date is None:
        raise SettingsError("no race date", where="[plan] date", fix='set it, e.g. date = "2027-03-14"')
    agent = get_agent(settings.plan.agent, inputs.catalogue)
    pl = settings.plan
    lon, lat = _lonlat(inputs.crs, inputs.course.centroid.x, inputs.course.centroid.y)

    schedule = plan_schedule(settings)
    ds = settings.dosing
    day0 = schedule.inspection_from - pd.Timedelta(hours=ds.lead_h)
    day1 = schedule.last_end
    start, end = day0.strftime("%H:%M"), day1.strftime("%H:%M")

    step("sun")
    ps = plan_sun(lon=lon, lat=lat, date=pl.date, start=start, end=end, timezone=pl.timezone,
                  sun=inputs.sun, encoding=settings.inputs.sun_encoding, dem=inputs.dem, crs=inputs.crs,
                  sources=inputs.sources, step_min=DAY_STEP_MIN)
    notes = list(inputs.notes) + list(schedule.notes) + list(ps.notes)

    step("zoning")
    zres = zone_course(ZoningInputs(course=inputs.course, sun=ps.sun, encoding=ps.encoding, slope_deg=ps.slope,
                                    aspect_deg=ps.aspect, elevation_m=ps.elevation,
                                    start_xy=_start_in_work(settings, inputs),
                                    centreline=inputs.centreline, markers=inputs.markers),
                       settings.zoning, window_hours=(day1 - day0).total_seconds() / 3600.0,
                       max_uncovered_pct=settings.inputs.max_uncovered_pct)
    notes += list(zres.notes)
    check_stage("zoning", (), zres.zones.columns)
    zones, sources = _staged("sun", zres.zones, lambda z: zone_irradiation(z, ps))

    step("conditions")
    obs, obs_exp = observation_exposure(inputs.observations, zres.exposure_grid, settings.zoning.exposure_labels)
    zones = _staged("conditions", zones, lambda z: assign_snow(z, obs, settings, window_start=ps.window_start,
                                                              obs_exposure=obs_exp))
    zones = _staged("crews", zones, lambda z: assign_crews(z, settings))

    step("dosing")
    cs = ps.clear_sky
    steps = uniform_steps(cs.start, cs.end, cs.n_steps)
    if inputs.forecast is not None:
        weather = weather_from_table(inputs.forecast, settings, cs, steps=steps,
                                     source=f"forecast file {sources.get('forecast', '')}".strip())
    else:
        weather = weather_from_settings(settings, cs, steps=steps)
    ctx = prepare_dosing(zones, settings, agent, weather)
    results, late_notes = [], []
    hold = np.full(len(zones), -np.inf)
    can = ctx.blocked == ""
    has_pass = can
    for slot in pass_slots(schedule, ds.tau_min):
        need = can if slot.number == 1 else can & (hold < ctx.seconds([slot.must_hold_until])[0]) & has_pass
        if not need.any():
            continue
        at, missed = time_pass(zones, need, deadline=slot.deadline, opens=slot.opens, tau_min=ds.tau_min)
        res = dose_pass(ctx, ctx.seconds(at))
        if slot.number == 1:
            has_pass = res.dose_g_m2 > 0
        hold = np.where(np.isfinite(res.spread_at_s) & (res.dose_g_m2 > 0), res.hard_until_s, hold)
        results.append((slot, res))
        if missed.any():
            ids = ", ".join(str(int(i)) for i in zones["zone_id"].to_numpy()[missed])
            late_notes.append(f"{slot.label} ({slot.opens:%H:%M}–{slot.deadline:%H:%M}): the crews reach only "
                              f"{int((need & ~missed).sum())} of {int(need.sum())} zones in time; zone(s) {ids} "
                              "get no pass there and stay soft: add crews")
        early = at[pd.notna(at)].min() if pd.notna(at).any() else None
        if early is not None and early < day0:
            late_notes.append(f"{slot.label}: the crews would have to start before {day0:%H:%M}, the start of "
                              "the plan's day; raise [dosing] lead_h or add crews")
    zones, passes, dose_notes, plan_p90 = finish_dosing(ctx, results, schedule)
    check_stage("dosing", ctx.zones.columns, zones.columns)
    notes += late_notes + dose_notes
    high = zones["max_pass_g_m2"].to_numpy(float) > PRACTICE_HIGH_G_M2
    if high.any():
        notes.append(f"{int(high.sum())} zone(s) get a pass above {PRACTICE_HIGH_G_M2:.0f} g/m², beyond anything "
                     "the field evidence reports for one pass: check the inputs and treat a test patch first")

    step("logistics")
    log = _staged("logistics", gpd.GeoDataFrame(zones, geometry="geometry", crs=inputs.crs),
                  lambda z: plan_logistics(z, settings, agent, passes=passes, plan_p90_kg=plan_p90,
                                           race_start=schedule.first_start.strftime("%H:%M")))
    course = gpd.GeoDataFrame({"name": [inputs.course_name]}, geometry=[inputs.course], crs=inputs.crs)
    cautions = tuple(cautions_for(agent.name, agent.nitrogen_fraction, nitrate=bool(agent.oxidiser)))
    context = inputs.dem if inputs.dem is not None else ps.sun
    return PlanResult(settings=settings, agent=agent, zones=log.zones, course=course, observations=obs,
                      logistics=log, weather=weather, start_xy=zres.start_xy, finish_xy=zres.finish_xy,
                      crs=inputs.crs, notes=tuple(notes) + tuple(log.notes), cautions=cautions,
                      context=context, sources=sources, passes=passes, schedule=schedule)


def _staged(stage: str, zones, run):
    """Run one stage on the zones table and hold its output to the stage's declared columns."""
    out = run(zones)
    table = out[0] if isinstance(out, tuple) else getattr(out, "zones", out)
    check_stage(stage, zones.columns, table.columns)
    return out


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


def plan_logistics(zones, settings: PlanSettings, agent, passes=None, race_start=None, plan_p90_kg=None):
    """The crews' bags and depots, then the order: :class:`~courseplan.stages.logistics.LogisticsResult`."""
    from courseplan.stages.crews import plan_crews
    from courseplan.stages.logistics import LogisticsResult, plan_order

    cp = plan_crews(zones, settings, agent, pass_table=passes, race_start=race_start, plan_p90_kg=plan_p90_kg)
    order = plan_order(cp.zones, settings, agent, cp.bag_kg, plan_p90_kg=plan_p90_kg)
    return LogisticsResult(zones=cp.zones, crews=cp.crews, order=order, first_start=cp.first_start,
                           wait_min=cp.wait_min, handful_g=cp.handful_g, notes=cp.notes)
