"""Crews stage: split the treated zones among the crews, hand out bags, place depots, time the passes.

Table in (the dosed zones), table out (the zones with ``crew``, ``bags``, ``work_min``,
``handfuls_m2``) plus the crews layer.  The split is an exact contiguous partition along the course
(:func:`split_contiguous`); bags per zone cover P90 plus the margin once (:func:`zone_bags`).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from courseplan.errors import InputError, SettingsError
from courseplan.settings import PlanSettings, minutes_of
from courseplan.stages.crews.raceday import per_pass_dose, split_contiguous, spread_rate_m2_min, work_rows


def hhmm(minutes: float) -> str:
    mins = int(round(minutes))
    day = mins // (24 * 60)
    text = f"{(mins // 60) % 24:02d}:{mins % 60:02d}"
    return text + (f" (+{day} d)" if day > 0 else f" ({day} d)" if day < 0 else "")


def pass_schedule(passes: int, runs: int, first_start_min: float, window_end_min: float
                  ) -> tuple[int, list[float]]:
    """Where a crew's passes go.

    Parameters
    ----------
    passes
        Largest number of passes among the crew's zones.
    runs
        Race runs in the window.
    first_start_min, window_end_min
        First start and window end [min after midnight].

    Returns
    -------
    (before, breaks)
        ``before``: passes spread before the race (≥ 1); ``breaks``: for each later pass, its time
        [min after midnight] — the end of run j, runs evenly spread from the first start to the
        window end (an estimate).
    """
    extra = max(int(passes) - 1, 0)
    n_breaks = max(int(runs) - 1, 0)
    at_breaks = min(extra, n_breaks)
    run_len = (window_end_min - first_start_min) / max(int(runs), 1)
    times = [first_start_min + (j + 1) * run_len for j in range(at_breaks)]
    return 1 + extra - at_breaks, times


@dataclass(frozen=True)
class CrewPlan:
    """Output of :func:`plan_crews`: the zones with ``crew``, ``bags``, ``work_min``, ``handfuls_m2``,
    the crews layer, the bag size, the timing and its notes."""

    zones: Any
    crews: Any
    bag_kg: float
    first_start: str
    wait_min: float
    handful_g: float
    notes: tuple[str, ...] = ()
    work: Any = None      # one row per crew, zone and pass in order of work (raceday.work_rows)
    depots: Any = None    # one row per depot: name, x/y, lon/lat, bags, kg, pallets, deliver by


def plan_crews(zones: Any, settings: PlanSettings, agent: Any, pass_table: Any = None,
               race_start: str | None = None, plan_p90_kg: float | None = None) -> CrewPlan:
    """Crew split, depots, bags per zone and timing for a dosed zones table.

    Parameters
    ----------
    zones
        ``geopandas.GeoDataFrame`` in a metric CRS, one row per zone, with the zoning, conditions and
        dosing columns (:mod:`courseplan.columns`).  Treated zones are those with ``product_kg > 0``.
    settings
        Plan settings; uses ``[logistics]`` and ``[window]``.
    agent
        Catalogue agent (``name``, ``label``, ``bag_sizes_kg``, ``big_bag_kg``, ``bags_per_pallet``,
        ``oxidiser``, ``chloride_fraction``, ``formula``).

    Returns
    -------
    CrewPlan
    """
    import geopandas as gpd
    import shapely
    from shapely.ops import nearest_points

    missing = [c for c in _REQUIRED if c not in zones.columns]
    if missing:
        raise InputError(f"the zones table lacks the columns {', '.join(missing)}", where="logistics",
                         fix="run the dosing stage before logistics")
    lg, win = settings.logistics, settings.window
    bag_kg = crew_bag_kg(settings, agent)
    margin = float(lg.margin_pct)

    out = zones.drop(columns=[c for c in ("crew",) if c in zones.columns]).copy()
    kg = out["product_kg"].to_numpy(dtype=float)
    kg90 = out["product_p90_kg"].to_numpy(dtype=float)
    if np.any(~np.isfinite(kg)) or np.any(~np.isfinite(kg90)):
        kg = np.nan_to_num(kg, nan=0.0)
        kg90 = np.nan_to_num(kg90, nan=0.0)
    treated = kg > 0
    kg90 = np.where(treated, np.maximum(kg90, kg), 0.0)  # untreated zones put nothing on the hill
    kg = np.where(treated, kg, 0.0)
    passes = np.where(treated, np.maximum(out["passes"].fillna(1).to_numpy(dtype=float), 1), 0)
    area = out["area_m2"].to_numpy(dtype=float)
    # bags cover the plan's P90 (the day's 90th percentile over the samples) plus the margin, once:
    # the zones' own P90s are scaled down to it, so their uncertainty is not stacked
    scale = 1.0
    if plan_p90_kg is not None and kg90.sum() > 0:
        scale = min(1.0, max(plan_p90_kg, kg.sum()) / kg90.sum())
    bags = np.where(treated, zone_bags(np.maximum(kg90 * scale, kg), margin, bag_kg), 0)
    rate = spread_rate_m2_min(settings, per_pass_dose(out, passes))
    spread = np.where(treated, area * passes / rate, 0.0)
    work = spread + bags * lg.carry_min_per_bag
    dose = out["dose_g_m2"].to_numpy(dtype=float)
    per_pass = np.where(treated, np.nan_to_num(dose) / np.maximum(passes, 1), 0.0)
    out["bags"] = bags.astype(int)
    out["work_min"] = work
    out["handfuls_m2"] = per_pass / lg.handful_g
    out["crew"] = 0

    # split the treated zones, in course order, into runs
    order_idx = np.argsort(out["course_order"].to_numpy(), kind="stable")
    t_idx = order_idx[treated[order_idx]]
    if "crew" in zones.columns:  # split before dosing (assign_crews): keep it, treated zones only
        given = zones["crew"].to_numpy()
        crew_col = np.where(treated, given, 0).astype(int)
        labels = sorted(int(c) for c in set(crew_col[t_idx]))
        runs, crew_ids = [], labels  # the crews keep their numbers, also when one has nothing to spread
        for c in labels:
            pos = np.flatnonzero(crew_col[t_idx] == c)
            runs.append((int(pos.min()), int(pos.max()) + 1))
    else:
        runs = split_contiguous(work[t_idx], lg.crews)
        crew_ids = list(range(1, len(runs) + 1))
        crew_col = np.zeros(len(out), dtype=int)
        for c, (a, b) in enumerate(runs, start=1):
            crew_col[t_idx[a:b]] = c
    out["crew"] = crew_col

    # timing
    win_start = minutes_of(win.start, "[window] start")
    win_end = minutes_of(win.end, "[window] end")
    notes: list[str] = []

    def pre_race_times(n_runs: int) -> list[tuple[float, float, int, int]]:
        # (work before the race, first pass, passes before the race, most passes) per crew
        res = []
        for a, b in runs:
            idx = t_idx[a:b]
            crew_passes = int(passes[idx].max())
            before, _ = pass_schedule(crew_passes, n_runs, 0.0, 1.0)
            carry = float(bags[idx].sum() * lg.carry_min_per_bag)  # all bags come in on the first pass
            t_pre = carry + sum(float((area[idx] / rate[idx] * (passes[idx] >= p)).sum())
                                for p in range(1, before + 1))
            t_first = carry + float((area[idx] / rate[idx]).sum())
            res.append((t_pre, t_first, before, crew_passes))
        return res

    def first_start_for(pre: list[tuple[float, float, int, int]]) -> float:
        if lg.first_start is not None:
            return float(minutes_of(lg.first_start, "[logistics] first_start"))
        longest = max((p[0] for p in pre), default=0.0)
        return float(win_start + math.ceil(longest + lg.wait_min))

    n_runs = win.runs
    pre_race = pre_race_times(n_runs)
    first_start = first_start_for(pre_race)
    if first_start >= win_end and n_runs > 1:
        n_runs = 1  # no breaks between runs inside the window: every pass before the race
        pre_race = pre_race_times(n_runs)
        first_start = first_start_for(pre_race)
    if first_start >= win_end:
        notes.append(f"The first start {hhmm(first_start)} is at or after the window end {win.end}: "
                     "add crews, or check the window and the spreading rate.")
    done_by = first_start - lg.wait_min

    rows = []
    zone_geom = out.geometry
    for c, (a, b), (t_pre, t_first, before, crew_passes) in zip(crew_ids, runs, pre_race, strict=True):
        idx = t_idx[a:b]
        geom = shapely.union_all(zone_geom.iloc[idx].to_numpy())
        cents = shapely.centroid(zone_geom.iloc[idx].to_numpy())
        wts = bags[idx].astype(float)
        if wts.sum() <= 0:
            wts = np.ones_like(wts)
        cx = float(np.average(shapely.get_x(cents), weights=wts))
        cy = float(np.average(shapely.get_y(cents), weights=wts))
        edge = geom.boundary if not geom.is_empty else geom
        depot = nearest_points(edge, shapely.Point(cx, cy))[0] if not edge.is_empty else shapely.Point(cx, cy)
        start = done_by - t_pre
        _, break_times = pass_schedule(crew_passes, n_runs, first_start, win_end)
        if crew_passes >= 2:
            second = hhmm(start + t_first) if before >= 2 else hhmm(break_times[0])
        else:
            second = None
        if start < win_start:
            notes.append(f"Crew {c} starts at {hhmm(start)}, before the window start {win.start}: the "
                         f"doses assume salting from {win.start}.")
        if start < 0:
            notes.append(f"Crew {c} would have to start on the day before; add crews or move the start.")
        rows.append({
            "crew": c, "label": f"Crew {c}",
            "zone_ids": ", ".join(str(int(z)) for z in out["zone_id"].to_numpy()[idx]),
            "first_course_order": int(out["course_order"].to_numpy()[idx].min()),
            "last_course_order": int(out["course_order"].to_numpy()[idx].max()),
            "n_zones": int(len(idx)),
            "area_m2": float(area[idx].sum()),
            "product_kg": float(kg[idx].sum()),
            "product_p90_kg": float(kg90[idx].sum()),
            "bags": int(bags[idx].sum()),
            "work_min": float(work[idx].sum()),
            "pre_race_min": t_pre,
            "passes": crew_passes,
            "depot_x": float(depot.x), "depot_y": float(depot.y),
            "start": hhmm(start),
            "done_by": hhmm(done_by),
            "second_pass": second,
            "geometry": geom,
        })
    cols = ["crew", "label", "zone_ids", "first_course_order", "last_course_order", "n_zones", "area_m2",
            "product_kg", "product_p90_kg", "bags", "work_min", "pre_race_min", "passes", "depot_x",
            "depot_y", "start", "done_by", "second_pass", "geometry"]
    crews = gpd.GeoDataFrame(rows, columns=cols, geometry="geometry", crs=zones.crs)
    second = crews["second_pass"].astype(object)
    crews["second_pass"] = second.where(second.notna(), None)  # None, not NaN, for one pass

    work = depots = None
    if pass_table is not None:  # timing from the passes actually planned (dosing), not from a window
        notes = [n for n in notes if not n.startswith("Crew ") and not n.startswith("The first start")]
        _times_from_passes(crews, out, pass_table)
        work = work_rows(out, pass_table, settings, bag_kg, p90_scale=scale)
        # the bags handed out are the bags of the passes: zones and crews add up to the order
        per_zone = work.groupby("zone_id")["bags"].sum()
        out["bags"] = out["zone_id"].map(per_zone).fillna(0).astype(int).to_numpy()
        two = work[work["pass_no"] == 2].groupby("crew")["start"].min()
        crews["second_pass"] = [two[c].strftime("%H:%M") if c in two.index else None for c in crews["crew"]]
        per_crew = work.groupby("crew")["bags"].sum()
        crews["bags"] = crews["crew"].map(per_crew).fillna(0).astype(int).to_numpy()
        depots = _depots(crews, settings, agent, bag_kg)
        if race_start:
            first_start = float(minutes_of(race_start, "[race] runs"))
        lg = dataclasses.replace(lg, wait_min=float(settings.dosing.tau_min))
    return CrewPlan(zones=out, crews=crews, bag_kg=bag_kg, first_start=hhmm(first_start),
                    wait_min=float(lg.wait_min), handful_g=float(lg.handful_g), notes=tuple(notes), work=work,
                    depots=depots)


CARRY_LIMIT_KG = 25.0
"""Heaviest bag one person carries onto the hill [kg]; common practice, no source (25 kg is the usual
sack size of road salt and fertiliser)."""


_REQUIRED = ("zone_id", "course_order", "area_m2", "dose_g_m2", "dose_p90_g_m2", "passes", "product_kg",
             "product_p90_kg", "nitrogen_kg", "chloride_kg")


def crew_bag_kg(settings: PlanSettings, agent: Any) -> float:
    """Bag size the crews carry [kg]: the setting, else the largest catalogue bag up to 25 kg."""
    if settings.logistics.bag_kg is not None:
        return float(settings.logistics.bag_kg)
    sizes = [float(s) for s in (getattr(agent, "bag_sizes_kg", None) or ()) if s and s > 0]
    if not sizes:
        raise SettingsError(f"agent {getattr(agent, 'name', '?')!r} has no bag sizes in the catalogue",
                            where="[logistics] bag_kg", fix="set bag_kg, e.g. bag_kg = 25")
    carry = [s for s in sizes if s <= CARRY_LIMIT_KG]
    return max(carry) if carry else min(sizes)


def zone_bags(p90_kg: np.ndarray, margin_pct: float, bag_kg: float) -> np.ndarray:
    """Whole bags covering P90 mass plus margin, per zone.

    Parameters
    ----------
    p90_kg
        P90 product mass per zone [kg].
    margin_pct
        Safety margin [%].
    bag_kg
        Bag size [kg].

    Returns
    -------
    numpy.ndarray of int
        ``ceil(p90_kg · (1 + margin_pct/100) / bag_kg)``; 0 where the mass is 0.
    """
    need = np.asarray(p90_kg, dtype=float) * (1.0 + margin_pct / 100.0) / bag_kg
    # a hair of tolerance so 50.000000001 kg in 25 kg bags stays 2 bags, not 3
    return np.ceil(np.maximum(need - 1e-9, 0.0)).astype(int)


# ---------------------------------------------------------------- crews before dosing: who spreads where, when


def _times_from_passes(crews: Any, zones: Any, passes: Any) -> None:
    """Fill the crews' start, done-by and second-pass times from the passes table (in place)."""
    zc = dict(zip(zones["zone_id"].to_numpy(), zones["crew"].to_numpy(), strict=True))
    spread = dict(zip(zones["zone_id"].to_numpy(), zones["spread_min"].to_numpy(), strict=True)) \
        if "spread_min" in zones.columns else {}
    p = passes.assign(crew=passes["zone_id"].map(zc))
    for i, c in enumerate(crews["crew"].to_numpy()):
        mine = p[p["crew"] == c]
        one, two = mine[mine["pass_no"] == 1], mine[mine["pass_no"] == 2]
        if len(one):
            first = one.sort_values("spread_at").iloc[0]
            start = first["spread_at"] - pd.Timedelta(minutes=float(spread.get(first["zone_id"], 0.0)))
            crews.loc[crews.index[i], "start"] = start.strftime("%H:%M")
            crews.loc[crews.index[i], "done_by"] = one["spread_at"].max().strftime("%H:%M")
        crews.loc[crews.index[i], "second_pass"] = (two["spread_at"].min().strftime("%H:%M")
                                                    if len(two) else None)


def _depots(crews: Any, settings: PlanSettings, agent: Any, bag_kg: float) -> Any:
    """One depot per crew: a name, where (working CRS and lon/lat), what waits there and by when."""
    import geopandas as gpd
    from pyproj import Transformer

    lg = settings.logistics
    per_pallet = lg.bags_per_pallet if lg.bags_per_pallet is not None else getattr(agent, "bags_per_pallet", None)
    to_ll = Transformer.from_crs(crews.crs, "EPSG:4326", always_xy=True)
    rows = []
    for c in crews.itertuples(index=False):
        lon, lat = to_ll.transform(float(c.depot_x), float(c.depot_y))
        rows.append({"depot": f"Depot {int(c.crew)}", "crew": int(c.crew), "x": float(c.depot_x),
                     "y": float(c.depot_y), "lon": float(lon), "lat": float(lat), "bags": int(c.bags),
                     "bag_kg": float(bag_kg), "kg": float(c.bags * bag_kg),
                     "pallets": int(math.ceil(c.bags / per_pallet)) if per_pallet else None,
                     "deliver_by": c.start})
    import shapely

    return gpd.GeoDataFrame(rows, geometry=[shapely.Point(r["x"], r["y"]) for r in rows], crs=crews.crs)
