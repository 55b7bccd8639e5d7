"""Replan between runs (docs/replan.md): the morning plan's zones, what was spread, newer observations,
and top-up passes into the breaks still to come.  Pipeline level: the stages in order, no files.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from courseplan.pipeline import PlanResult, _late_notes, _race_day, _shortfall, plan_logistics


def run_replan(morning: PlanResult, at, spread, observations=None, *, label: str, lead: str) -> tuple:
    """Replan from *at* (docs/replan.md): holds from *spread* (``zone_id``, ``time`` ≤ at, ``g_m2``;
    :func:`courseplan.stages.dosing.spread_rounds`); a zone's latest observation after its last spread
    (bool ``soft``) makes it soft since then or hard at least until then, and its snow state doses
    the top-ups in the breaks after *at*.  Returns (the replan's PlanResult — dose columns and order
    for the top-ups only, passes with what was spread —, hold per zone [NaT soft], "soft"/"hard"/"").
    """
    import dataclasses
    from types import SimpleNamespace

    import geopandas as gpd

    from courseplan.stages.conditions import assign_snow
    from courseplan.stages.crews import crew_bag_kg
    from courseplan.stages.dosing import VERDICTS, finish_dosing, prepare_dosing, spread_rounds

    s, agent, sched, z0, n = morning.settings, morning.agent, morning.schedule, morning.zones, len(morning.zones)
    ctx0 = prepare_dosing(z0, s, agent, morning.weather, agents=morning.agents)
    sp = spread.sort_values("time", kind="stable").reset_index(drop=True)
    idx = pd.Index(z0["zone_id"].to_numpy()).get_indexer(sp["zone_id"])
    done = SimpleNamespace(label=f"spread before {at:%H:%M}")
    rounds, hold, last = spread_rounds(ctx0, idx, ctx0.seconds(sp["time"]), sp["g_m2"].to_numpy(float))
    z, seen = z0.copy(), np.full(n, "", dtype=object)
    if observations is not None and len(observations):
        upd = assign_snow(z0, observations, s, window_start=at)
        inside = (upd["snow_source"] == "observation").to_numpy()
        cols = ["lwc_pct", "density_kg_m3", "snow_temp_c", "wetness", "grain", "snow_source",
                "snow_source_detail", "obs_age_h", "obs_distance_m", "obs_stale", "lwc_from_class"]
        z.loc[inside, cols] = upd.loc[inside, cols].to_numpy()
        j = gpd.sjoin(observations, z0[["geometry"]], predicate="within").sort_values("time", kind="stable")
        for zi, t, so in zip(j["index_right"].to_numpy(), ctx0.seconds(j["time"]), j["soft"], strict=True):
            if t >= last[zi]:
                seen[zi] = "soft" if so else "hard"
                hold[zi] = min(hold[zi], t) if so else max(hold[zi], t)
    ctx = prepare_dosing(z, s, agent, morning.weather, agents=morning.agents)
    results, worked = _race_day(z, ctx, sched, s, crew_bag_kg(s, agent), after=at, hold_s=hold)
    z_all, p_all, notes, _ = finish_dosing(ctx, [(done, r) for r in rounds] + results, sched)
    z_top, _, _, p90 = finish_dosing(ctx, results, sched)
    got = z_top["passes"].to_numpy() > 0
    for c in ("hard_until", "soft_min", "soft_in_run"):
        z_top[c] = z_all[c]
    z_top["verdict"] = np.where(got, z_all["verdict"], z0["verdict"])
    z_top["advice"] = np.where(got, [VERDICTS.get(v, "") for v in z_top["verdict"]], z0["advice"])
    shortfall = _shortfall(z, worked, sched, s, ctx, crew_bag_kg(s, agent))
    notes = [lead] + _late_notes(z, worked, sched, s, sched.inspection_from - pd.Timedelta(hours=s.dosing.lead_h),
                                 shortfall) + notes
    tops = p_all[p_all["slot"] != done.label].copy()
    log = plan_logistics(gpd.GeoDataFrame(z_top, geometry="geometry", crs=morning.crs), s, agent, passes=tops,
                         plan_p90_kg=p90, race_start=sched.first_start.strftime("%H:%M"), agents=morning.agents)
    log = dataclasses.replace(log, crews=log.crews[log.crews["n_zones"] > 0])  # crews without a top-up: no sheet
    s2 = s.replace(plan=dataclasses.replace(s.plan, name=f"{s.plan.name} — {label}"))  # the version on every output
    out = dataclasses.replace(morning, settings=s2, zones=log.zones, logistics=log,
                              notes=tuple(notes) + tuple(log.notes), passes=p_all, shortfall=shortfall)
    return out, ["end of day" if v == np.inf else t for v, t in zip(hold, ctx.timestamp(hold), strict=True)], seen
