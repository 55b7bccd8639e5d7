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
    no_salt: tuple = ()  # (name, polygon) in the working CRS, cut out of the course before zoning
    zones: Any = None  # courseplan.geo.edits.EditedZones: the chief's edited zones, kept instead of zoning
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
    shortfall: Any = None  # dict when the crews cannot do the plan in time (see _shortfall), else None
    no_salt: Any = None  # GeoDataFrame of the no-salt areas on the course (name, area_m2), or None
    schedule: Any = None  # courseplan.schedule.RaceSchedule
    agents: Any = None  # name → catalogue agent: the plan's first, then the zones' own (edit_agent)

    def totals(self) -> dict[str, Any]:
        """Plan totals (all zones): areas, masses, loads."""
        z = self.zones
        treated = z["product_kg"] > 0
        orders = self.logistics.order_lines
        return {
            "agent": self.agent.name,
            "agent_label": self.agent.label,
            "zone_count": int(len(z)),
            "treated_zone_count": int(treated.sum()),
            "course_area_m2": float(self.course.geometry.iloc[0].area),
            "no_salt_area_m2": float(self.no_salt["area_m2"].sum()) if self.no_salt is not None else 0.0,
            "course_surface_area_m2": float(z["area_m2"].sum()),
            "treated_area_m2": float(z.loc[treated, "area_m2"].sum()),
            "total_product_kg": float(z["product_kg"].sum()),
            "total_product_p90_kg": float(sum(o.p90_kg for o in orders)),
            "by_agent": {o.agent: {"product_kg": float(z.loc[z["agent"] == o.agent, "product_kg"].sum()),
                                   "product_p90_kg": float(o.p90_kg)} for o in orders},
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
    from courseplan.calibration import calibration_notes, is_calibrated
    from courseplan.geo.edits import fit_to_course
    from courseplan.schedule import plan_schedule
    from courseplan.stages.conditions import assign_snow, observation_exposure
    from courseplan.stages.crews import crew_bag_kg
    from courseplan.stages.crews.raceday import assign_crews
    from courseplan.stages.dosing import finish_dosing, prepare_dosing
    from courseplan.stages.dosing.mixed import plan_agents
    from courseplan.stages.edits import add_edits, cut_no_salt, kept_note
    from courseplan.stages.sun import plan_sun, zone_irradiation
    from courseplan.stages.weather import uniform_steps, weather_from_settings, weather_from_table
    from courseplan.stages.zoning import ZoningInputs, zone_course, zone_given

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
    course_z, no_salt, ns_notes = cut_no_salt(inputs.course, inputs.no_salt, inputs.crs)
    notes += ns_notes
    zin = ZoningInputs(course=course_z, sun=ps.sun, encoding=ps.encoding, slope_deg=ps.slope,
                       aspect_deg=ps.aspect, elevation_m=ps.elevation, centreline=inputs.centreline,
                       start_xy=_start_in_work(settings, inputs), markers=inputs.markers)
    zkw = dict(window_hours=(day1 - day0).total_seconds() / 3600.0,
               max_uncovered_pct=settings.inputs.max_uncovered_pct)
    ez = inputs.zones
    if ez is not None:  # the chief's edited zones: kept, everything else computed anew
        fitted, fit_notes = fit_to_course(list(ez.geometries), list(ez.zone_id), course_z, where=ez.source)
        zres = zone_given(zin, settings.zoning, fitted, ez.zone_id, ez.label, **zkw)
    else:
        zres = zone_course(zin, settings.zoning, **zkw)
    check_stage("zoning", (), zres.zones.columns)
    zones = _staged("edits", zres.zones, lambda z: add_edits(z, ez, inputs.catalogue))
    agents = plan_agents(zones, agent, inputs.catalogue, crew_bag_kg, settings, where=ez.source if ez else "")
    kept = [kept_note(ez, zones), *ez.notes, *fit_notes] if ez is not None else []  # lead, after a shortfall
    if len(agents) > 1 and is_calibrated(settings):
        kept.append(f"k_f from the test patch ({settings.calibration.agent or agent.name}) is used for the zones "
                    f"with {', '.join(n for n in agents if n != agent.name)} too: treat a patch with that agent")
    notes += list(zres.notes)
    zones, sources = _staged("sun", zones, lambda z: zone_irradiation(z, ps))

    step("conditions")
    obs, obs_exp = observation_exposure(inputs.observations, zres.exposure_grid, settings.zoning.exposure_labels)
    zones = _staged("conditions", zones, lambda z: assign_snow(z, obs, settings, window_start=ps.window_start,
                                                              obs_exposure=obs_exp))
    notes = calibration_notes(settings, zones["wetness"]) + notes
    bag_kg = crew_bag_kg(settings, agent)
    zones = _staged("crews", zones, lambda z: assign_crews(z, settings, bag_kg))

    step("dosing")
    cs = ps.clear_sky
    steps = uniform_steps(cs.start, cs.end, cs.n_steps)
    if inputs.forecast is not None:
        weather = weather_from_table(inputs.forecast, settings, cs, steps=steps,
                                     source=f"forecast file {sources.get('forecast', '')}".strip())
    else:
        weather = weather_from_settings(settings, cs, steps=steps)
    ctx = prepare_dosing(zones, settings, agent, weather, agents=agents)
    results, worked = _race_day(zones, ctx, schedule, settings, bag_kg)
    shortfall = _shortfall(zones, worked, schedule, settings, ctx, bag_kg)
    late_notes = _late_notes(zones, worked, schedule, settings, day0, shortfall)
    zones, passes, dose_notes, plan_p90 = finish_dosing(ctx, results, schedule)
    check_stage("dosing", ctx.zones.columns, zones.columns)
    lead = 1 if shortfall is not None else 0  # a shortfall leads every output, then what an edit kept
    notes = late_notes[:lead] + kept + late_notes[lead:] + notes + dose_notes
    high = zones["max_pass_g_m2"].to_numpy(float) > PRACTICE_HIGH_G_M2
    if high.any():
        notes.append(f"{int(high.sum())} zone(s) get a pass above {PRACTICE_HIGH_G_M2:.0f} g/m², beyond anything "
                     "the field evidence reports for one pass: check the inputs and treat a test patch first")

    step("logistics")
    log = _staged("logistics", gpd.GeoDataFrame(zones, geometry="geometry", crs=inputs.crs),
                  lambda z: plan_logistics(z, settings, agent, passes=passes, plan_p90_kg=plan_p90,
                                           race_start=schedule.first_start.strftime("%H:%M"), agents=agents))
    course = gpd.GeoDataFrame({"name": [inputs.course_name]}, geometry=[inputs.course], crs=inputs.crs)
    used = [a for n, a in agents.items() if n == agent.name or (zones["agent"] == n).any()]
    cautions = tuple(dict.fromkeys(c for a in used for c in cautions_for(a.name, a.nitrogen_fraction,
                                                                          nitrate=bool(a.oxidiser))))
    context = inputs.dem if inputs.dem is not None else ps.sun
    return PlanResult(settings=settings, agent=agent, zones=log.zones, course=course, observations=obs,
                      logistics=log, weather=weather, start_xy=zres.start_xy, finish_xy=zres.finish_xy,
                      crs=inputs.crs, notes=tuple(notes) + tuple(log.notes), cautions=cautions,
                      context=context, sources=sources, passes=passes, schedule=schedule,
                      shortfall=shortfall, no_salt=no_salt, agents=agents)


def _race_day(zones, ctx, schedule, settings: PlanSettings, bag_kg: float, *, after=None, hold_s=None):
    """The passes in race order: who needs one, when the crews spread it, what it takes.

    Pass 1 for every zone salt can work on; pass k for the zones soft again before run k ends.  Each
    pass is timed at the nominal dose, dosed, then timed again with the minutes its real dose takes
    and dosed again (the spreading rate depends on the dose).  A replan starts at *after* with each zone
    hard until *hold_s* [s of ``ctx``; −inf soft], in the breaks left then (:func:`replan_slots`).
    """
    from courseplan.schedule import pass_slots
    from courseplan.stages.crews.raceday import pass_minutes, time_pass
    from courseplan.stages.dosing import dose_pass

    tau = settings.dosing.tau_min
    min_use = settings.dosing.min_useful_hold_min
    useless_by_slot: dict = {}
    results, worked = [], []
    hold = np.full(len(zones), -np.inf) if hold_s is None else np.asarray(hold_s, dtype=float).copy()
    can = ctx.blocked == ""
    has_pass = can if after is None else can & (zones["crew"].to_numpy() > 0)  # a replan: zones in a round
    slots = pass_slots(schedule, tau) if after is None else replan_slots(schedule, tau, after)
    for slot in slots:
        need = can if slot.number == 1 else can & has_pass & (hold < ctx.seconds([slot.must_hold_until])[0])
        if not need.any():
            continue
        mins = zones["spread_min"].to_numpy(dtype=float)
        run_start = ctx.seconds([slot.deadline])[0]
        useless = np.zeros(len(zones), dtype=bool)
        for _ in range(3):
            at, missed = time_pass(zones.assign(spread_min=mins), need & ~useless, deadline=slot.deadline,
                                   opens=slot.opens, tau_min=tau)
            res = dose_pass(ctx, ctx.seconds(at))
            mins = np.where(res.dose_g_m2 > 0, pass_minutes(zones, settings, res.dose_g_m2, bag_kg), mins)
            if slot.number >= 2:  # a pass in a break that the sun spends before the run is wasted salt
                spent = np.isfinite(res.spread_at_s) & (res.hard_until_s < run_start + 60.0 * min_use)
                useless |= spent
        if slot.number >= 2 and useless.any():
            useless_by_slot[slot.number] = useless
        if slot.number == 1:
            has_pass = res.dose_g_m2 > 0
        hold = np.where(np.isfinite(res.spread_at_s) & (res.dose_g_m2 > 0), res.hard_until_s, hold)
        results.append((slot, res))
        worked.append((slot, need & ~useless, mins, missed, at, useless))
    return results, worked


def replan_slots(schedule, tau_min: float, after) -> tuple:
    """The pass slots left at *after*: the breaks whose run starts later, opening at *after* at the earliest."""
    import dataclasses

    from courseplan.schedule import pass_slots

    tau = pd.Timedelta(minutes=tau_min)
    return tuple(dataclasses.replace(k, opens=max(k.opens, after), short_break=k.deadline - max(k.opens, after) < tau)
                 for k in pass_slots(schedule, tau_min)[1:] if k.deadline > after)


def _earliest(schedule, settings: PlanSettings):
    return pd.Timestamp(f"{schedule.date} {settings.logistics.earliest_start}").tz_localize(
        schedule.inspection_from.tz)


def _fits(zones, worked, schedule, settings: PlanSettings) -> tuple[bool, set, object]:
    """Whether every pass fits: no zone left unreached in a break, no crew before the earliest start."""
    from courseplan.stages.crews.raceday import time_pass

    earliest = _earliest(schedule, settings)
    missed_ids: set = set()
    first_start = None
    for slot, need, mins, *_ in worked:
        at, missed = time_pass(zones.assign(spread_min=mins), need, deadline=slot.deadline, opens=slot.opens,
                               tau_min=settings.dosing.tau_min)
        missed_ids |= {int(i) for i in zones["zone_id"].to_numpy()[missed]}
        ok = pd.notna(at)
        if ok.any():
            s = min(a - pd.Timedelta(minutes=float(m)) for a, m, o in zip(at, mins, ok, strict=True) if o)
            first_start = s if first_start is None else min(first_start, s)
    early = first_start is not None and first_start < earliest
    return (not missed_ids and not early), missed_ids, first_start


def _shortfall(zones, worked, schedule, settings: PlanSettings, ctx=None, bag_kg: float = 25.0):
    """None when the crews can do the plan; else what is missing and how many crews would do it.

    The crew count is found by planning the race day again with one crew more at a time (split,
    timing and doses), up to 50.
    """
    import dataclasses

    from courseplan.stages.crews.raceday import assign_crews

    ok, missed, first = _fits(zones, worked, schedule, settings)
    if ok:
        return None
    lg = settings.logistics
    needed = None
    base = zones.drop(columns=["crew", "work_order", "spread_min"])
    for n in range(lg.crews + 1, 51):
        s_n = settings.replace(logistics=dataclasses.replace(lg, crews=n))
        z_n = assign_crews(base, s_n, bag_kg)
        if ctx is not None:
            _, w_n = _race_day(z_n, ctx, schedule, s_n, bag_kg)
        else:
            w_n = worked
        if _fits(z_n, w_n, schedule, s_n)[0]:
            needed = n
            break
    earliest = _earliest(schedule, settings)
    return {"crews": lg.crews, "crews_needed": needed, "method": lg.method,
            "zones_not_reached": sorted(missed),
            "first_start": None if first is None else first.isoformat(timespec="minutes"),
            "earliest_start": earliest.isoformat(timespec="minutes"),
            "starts_too_early": bool(first is not None and first < earliest)}


def _late_notes(zones, worked, schedule, settings: PlanSettings, day0, shortfall) -> list[str]:
    notes = []
    if shortfall is not None:
        need = (f"{shortfall['crews_needed']} crews would do it" if shortfall["crews_needed"]
                else "no number of crews up to 50 does it: choose a faster method")
        what = []
        if shortfall["zones_not_reached"]:
            what.append(f"zone(s) {', '.join(map(str, shortfall['zones_not_reached']))} cannot be reached in time")
        if shortfall["starts_too_early"]:
            what.append(f"the first pass would start at {shortfall['first_start'][11:16]}, before the earliest start "
                        f"{settings.logistics.earliest_start}")
        notes.append(f"SHORTFALL: {shortfall['crews']} crew(s) ({shortfall['method']}) cannot do this plan: "
                     f"{'; '.join(what)}; {need}")
    for slot, need, _, missed, at, useless in worked:
        if useless.any():
            ids = ", ".join(str(int(i)) for i in zones["zone_id"].to_numpy()[useless])
            notes.append(f"{slot.label}: no pass for zone(s) {ids}: salt spread there in the break would be spent "
                         f"by the sun less than {settings.dosing.min_useful_hold_min:.0f} min into the run")
        if missed.any():
            ids = ", ".join(str(int(i)) for i in zones["zone_id"].to_numpy()[missed])
            notes.append(f"{slot.label} ({slot.opens:%H:%M}–{slot.deadline:%H:%M}): the crews reach only "
                         f"{int((need & ~missed).sum())} of {int(need.sum())} zones in time; zone(s) {ids} get no "
                         "pass there and stay soft")
        early = at[pd.notna(at)].min() if pd.notna(at).any() else None
        if early is not None and early < day0:
            notes.append(f"{slot.label}: the crews would have to spread before {day0:%H:%M}, the start of the "
                         "plan's day; raise [dosing] lead_h")
    return notes


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


def plan_logistics(zones, settings: PlanSettings, agent, passes=None, race_start=None, plan_p90_kg=None,
                   agents=None):
    """The crews' bags and depots, then the order: :class:`~courseplan.stages.logistics.LogisticsResult`.

    A mixed plan (zones with their own agent, *agents* name → agent) gets one order line per agent
    and one delivery per depot and agent (:func:`courseplan.stages.logistics.orders_by_agent`).
    """
    from courseplan.stages.crews import plan_crews
    from courseplan.stages.crews.raceday import METHODS
    from courseplan.stages.logistics import LogisticsResult, orders_by_agent

    cp = plan_crews(zones, settings, agent, pass_table=passes, race_start=race_start, plan_p90_kg=plan_p90_kg)
    orders, depots = orders_by_agent(cp, settings, agent, agents or {agent.name: agent}, plan_p90_kg)
    return LogisticsResult(zones=cp.zones, crews=cp.crews, order=orders[0], orders=orders,
                           first_start=cp.first_start,
                           wait_min=cp.wait_min, handful_g=cp.handful_g, notes=cp.notes, work=cp.work,
                           depots=depots, method=METHODS[settings.logistics.method].label)


