"""Logistics stage: the order, the crew split, depots, bags per zone and timing.

Takes the dosed zones table and returns it with the ``logistics`` columns of
:mod:`courseplan.columns` added, a ``crews`` table (one row per crew, geometry = its zones) and an
:class:`Order` for the logistics lead.  No files are opened here.

How the figures are made (all planning estimates; see ``docs/logistics.md``):

- **Mass.**  P50 and P90 product mass are the sums of the zones' ``product_kg`` and
  ``product_p90_kg``.  Each treated zone gets whole bags covering its P90 mass plus the safety margin
  (``[logistics] margin_pct``); the order covers the bags handed out, so no crew runs short.
- **Packages.**  The crew bag is ``[logistics] bag_kg`` or the largest catalogue bag a person can carry
  (at most :data:`CARRY_LIMIT_KG`).  From ``big_bag_from_kg`` on, whole big bags are ordered and the
  rest in bags; pallets = bags / bags per pallet, rounded up, plus one place per big bag.
- **Work.**  Spreading time = surface area × passes / ``spread_rate_m2_min``; carrying = bags ×
  ``carry_min_per_bag``.  The dose enters through the bags and the passes.
- **Split.**  Treated zones, in course order, are cut into at most N runs of consecutive zones by an
  exact dynamic programme: first the largest run's work is minimised (the linear-partition problem,
  Skiena 2008, §8.5), then, among the splits that reach it, the smallest run's work is maximised.
- **Depot.**  Where the crew's bags are dropped: the point on the edge of the crew's zones nearest the
  bag-weighted centre of its zones (bags beside the course, not in the racing line; common practice, no
  source).
- **Timing.**  Every crew finishes its first pass ``wait_min`` before the first start (guidance 45–60 min:
  summary of the 2015 international cross-country salting guideline, domain-data §7 [V]).  Further
  passes go into the breaks between runs (dosing-model Part C), runs taken as evenly spread from the
  first start to the window end; passes that find no break are spread before the race, one after the
  other.

References
----------
.. [1] S. S. Skiena, *The Algorithm Design Manual*, 2nd ed., Springer, 2008, §8.5 "The Partition
   Problem", doi:10.1007/978-1-84800-070-4.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from courseplan.errors import InputError, SettingsError
from courseplan.settings import PlanSettings, _minutes

CARRY_LIMIT_KG = 25.0
"""Heaviest bag one person carries onto the hill [kg]; common practice, no source (25 kg is the usual
sack size of road salt and fertiliser)."""

_REQUIRED = ("zone_id", "course_order", "area_m2", "dose_g_m2", "dose_p90_g_m2", "passes", "product_kg",
             "product_p90_kg", "nitrogen_kg", "chloride_kg")


@dataclass(frozen=True)
class Package:
    """One line of the order: a package kind, its size and how many."""

    kind: str  # "bag" | "big bag"
    size_kg: float
    count: int

    @property
    def kg(self) -> float:
        """Mass in these packages [kg]."""
        return self.size_kg * self.count


@dataclass(frozen=True)
class Order:
    """What the logistics lead orders, and what it puts on the hill.

    Masses in [kg]; ``cost`` in ``currency`` (None without a price); ``pallets`` None when the bags per
    pallet are unknown.
    """

    agent: str
    agent_label: str
    p50_kg: float
    p90_kg: float
    margin_pct: float
    needed_kg: float  # P90 × (1 + margin)
    handed_out_kg: float  # whole bags per zone × bag size
    order_kg: float  # mass in the packages ordered
    bag_kg: float
    bags_handed_out: int
    packages: tuple[Package, ...]
    big_bags: int
    pallets: int | None
    tonnes: float
    cost: float | None
    currency: str
    price_per_kg: float | None
    nitrogen_kg: float
    nitrogen_p90_kg: float
    chloride_kg: float
    chloride_p90_kg: float
    storage_cautions: tuple[str, ...]


@dataclass(frozen=True)
class LogisticsResult:
    """Output of :func:`plan_logistics`.

    Attributes
    ----------
    zones
        The input zones with ``crew``, ``bags``, ``work_min`` and ``handfuls_m2`` added.
    crews
        One row per crew (see :data:`courseplan.columns.CREW_LAYER`); geometry = union of its zones.
    order
        The order.
    first_start
        First race start used, HH:MM.
    wait_min
        Time the agent acts before skiing [min].
    handful_g
        Handful mass behind ``handfuls_m2`` [g].
    notes
        Plain-language notes on the timing (e.g. a crew starting before the window).
    """

    zones: Any
    crews: Any
    order: Order
    first_start: str
    wait_min: float
    handful_g: float
    notes: tuple[str, ...] = field(default=())

    def summary(self) -> dict[str, Any]:
        """Plain, JSON-ready figures for ``summary.json`` under ``"order"`` and ``"crews"``.

        The sheets print exactly these (rounded) values.
        """
        o = self.order
        order = {
            "agent": o.agent,
            "agent_label": o.agent_label,
            "p50_kg": _r(o.p50_kg, 1),
            "p90_kg": _r(o.p90_kg, 1),
            "margin_pct": _r(o.margin_pct, 1),
            "needed_kg": _r(o.needed_kg, 1),
            "bag_kg": _r(o.bag_kg, 1),
            "bags_handed_out": o.bags_handed_out,
            "handed_out_kg": _r(o.handed_out_kg, 1),
            "packages": [{"kind": p.kind, "size_kg": _r(p.size_kg, 1), "count": p.count,
                          "kg": _r(p.kg, 1)} for p in o.packages],
            "big_bags": o.big_bags,
            "pallets": o.pallets,
            "order_kg": _r(o.order_kg, 1),
            "tonnes": _r(o.tonnes, 3),
            "price_per_kg": o.price_per_kg,
            "cost": None if o.cost is None else _r(o.cost, 2),
            "currency": o.currency,
            "nitrogen_kg": _r(o.nitrogen_kg, 1),
            "nitrogen_p90_kg": _r(o.nitrogen_p90_kg, 1),
            "chloride_kg": _r(o.chloride_kg, 1),
            "chloride_p90_kg": _r(o.chloride_p90_kg, 1),
            "storage_cautions": list(o.storage_cautions),
        }
        crs = self.crews.crs
        zones = self.zones
        crews = []
        for row in self.crews.itertuples(index=False):
            zs = zones[zones["crew"] == row.crew].sort_values("course_order")
            crews.append({
                "crew": int(row.crew),
                "label": row.label,
                "zone_ids": [int(z) for z in zs["zone_id"]],
                "first_course_order": int(row.first_course_order),
                "last_course_order": int(row.last_course_order),
                "area_m2": _r(row.area_m2, 0),
                "product_kg": _r(row.product_kg, 1),
                "product_p90_kg": _r(row.product_p90_kg, 1),
                "bags": int(row.bags),
                "bag_kg": _r(o.bag_kg, 1),
                "work_min": _r(row.work_min, 0),
                "pre_race_min": _r(row.pre_race_min, 0),
                "passes": int(row.passes),
                "depot_x": _r(row.depot_x, 1),
                "depot_y": _r(row.depot_y, 1),
                "start": row.start,
                "done_by": row.done_by,
                "second_pass": row.second_pass if isinstance(row.second_pass, str) else None,
                "notes": [n for n in self.notes if n.startswith(f"Crew {int(row.crew)} ")],
                "zones": [{
                    "zone_id": int(z.zone_id),
                    "course_order": int(z.course_order),
                    "section": str(getattr(z, "section", "")),
                    "area_m2": _r(z.area_m2, 0),
                    "dose_g_m2": _r(z.dose_g_m2, 1),
                    "dose_p90_g_m2": _r(z.dose_p90_g_m2, 1),
                    "passes": int(z.passes),
                    "product_kg": _r(z.product_kg, 1),
                    "bags": int(z.bags),
                    "work_min": _r(z.work_min, 0),
                    "handfuls_m2": _r(z.handfuls_m2, 2),
                    "advice": str(getattr(z, "advice", "")),
                } for z in zs.itertuples(index=False)],
            })
        return {"order": order,
                "crews": {"count": len(crews), "crs": None if crs is None else crs.to_string(),
                          "first_start": self.first_start, "wait_min": _r(self.wait_min, 0),
                          "handful_g": _r(self.handful_g, 0), "notes": list(self.notes),
                          "plan_notes": [n for n in self.notes if not n.startswith("Crew ")],
                          "crews": crews}}


def _r(x: float, nd: int) -> float:
    """Round for output; ints stay whole numbers when ``nd`` is 0."""
    v = round(float(x), nd)
    return float(int(v)) if nd == 0 else v


# ---------------------------------------------------------------- packaging


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


def packages_for(total_kg: float, bag_kg: float, big_bag_kg: float | None, big_bag_from_kg: float
                 ) -> tuple[Package, ...]:
    """Choose packages covering ``total_kg``: whole big bags from the threshold on, the rest in bags."""
    out: list[Package] = []
    rest = total_kg
    if big_bag_kg and total_kg >= big_bag_from_kg and total_kg >= big_bag_kg:
        n_big = int(math.floor(total_kg / big_bag_kg + 1e-9))
        out.append(Package("big bag", float(big_bag_kg), n_big))
        rest = total_kg - n_big * big_bag_kg
    n_bags = int(math.ceil(max(rest, 0.0) / bag_kg - 1e-9))
    if n_bags > 0 or not out:
        out.append(Package("bag", float(bag_kg), n_bags))
    return tuple(out)


def storage_cautions(agent: Any) -> tuple[str, ...]:
    """Storage cautions for the order (the project's own wording).

    Facts: ammonium nitrate is an oxidiser (UN 1942, class 5.1), not to be stored or mixed with
    chlorides, and an EU-restricted explosives precursor (Regulation (EU) 2019/1148) [V, domain-data
    §9]; the duty to report thefts and losses under that regulation is from memory; dry, covered storage
    and corrosion by chlorides are common practice, no source.
    """
    lines = ["Store bags closed, dry and off the ground, under cover and away from streams and drains."]
    formula = str(getattr(agent, "formula", "") or "").upper().replace(" ", "")
    name = str(getattr(agent, "name", "") or "").upper()
    if getattr(agent, "oxidiser", False):
        lines.append("Oxidiser: store apart from fuels, oils, wood, straw and other organic matter, and "
                     "away from heat and flames.")
        lines.append("Keep apart from chloride agents (road salt, calcium or magnesium chloride) in the "
                     "store, on the trucks and at the depots; never mix them.")
        if "NH4NO3" in formula or "NH4NO3" in name or "NITRATE" in name:
            lines.append("In the EU ammonium nitrate is a restricted explosives precursor (Regulation (EU) "
                         "2019/1148): keep it locked, count it in and out, and report losses or thefts.")
    if float(getattr(agent, "chloride_fraction", 0.0) or 0.0) > 0:
        lines.append("Chloride: keep apart from ammonium nitrate in the store and at the depots; it "
                     "corrodes steel, so keep it off bare metal and rinse tools and vehicles.")
    return tuple(lines)


# ---------------------------------------------------------------- split


def split_contiguous(work: np.ndarray, n: int) -> list[tuple[int, int]]:
    """Cut a sequence into at most ``n`` runs of consecutive items with balanced sums.

    Exact dynamic programme on prefix sums: first minimise the largest run's sum (the
    linear-partition problem [1]_), then, among the splits reaching it, maximise the smallest run's
    sum.  With fewer items than ``n`` every item is its own run.

    Parameters
    ----------
    work
        Non-negative work per item, in order [any unit].
    n
        Number of runs wanted (≥ 1).

    Returns
    -------
    list of (start, stop)
        Half-open index ranges, in order, covering ``0 … len(work)``; empty for no items.

    References
    ----------
    .. [1] S. S. Skiena, *The Algorithm Design Manual*, 2nd ed., Springer, 2008, §8.5,
       doi:10.1007/978-1-84800-070-4.
    """
    w = np.asarray(work, dtype=float)
    m = w.size
    if m == 0:
        return []
    k_runs = max(1, min(int(n), m))
    prefix = np.concatenate([[0.0], np.cumsum(w)])
    inf = np.inf
    # best_max[k, j]: least possible largest run when the first j items form k runs
    best_max = np.full((k_runs + 1, m + 1), inf)
    best_max[0, 0] = 0.0
    for k in range(1, k_runs + 1):
        for j in range(k, m + 1):
            i = np.arange(k - 1, j)  # last run is items i … j-1
            cand = np.maximum(best_max[k - 1, i], prefix[j] - prefix[i])
            best_max[k, j] = cand.min()
    limit = best_max[k_runs, m]
    tol = 1e-9 * max(1.0, prefix[-1])
    # best_min[k, j]: largest possible smallest run under the limit; arg for the back-track
    best_min = np.full((k_runs + 1, m + 1), -inf)
    best_min[0, 0] = inf
    arg = np.zeros((k_runs + 1, m + 1), dtype=int)
    for k in range(1, k_runs + 1):
        for j in range(k, m + 1):
            i = np.arange(k - 1, j)
            run = prefix[j] - prefix[i]
            cand = np.where(run <= limit + tol, np.minimum(best_min[k - 1, i], run), -inf)
            a = int(np.argmax(cand))
            best_min[k, j] = cand[a]
            arg[k, j] = i[a]
    cuts: list[tuple[int, int]] = []
    j = m
    for k in range(k_runs, 0, -1):
        i = int(arg[k, j])
        cuts.append((i, j))
        j = i
    return cuts[::-1]


# ---------------------------------------------------------------- timing


def _hhmm(minutes: float) -> str:
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


# ---------------------------------------------------------------- stage


def plan_logistics(zones: Any, settings: PlanSettings, agent: Any) -> LogisticsResult:
    """Order, crew split, depots, bags per zone and timing for a dosed zones table.

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
    LogisticsResult
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

    out = zones.copy()
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
    bags = np.where(treated, zone_bags(kg90, margin, bag_kg), 0)
    spread = np.where(treated, area * passes / lg.spread_rate_m2_min, 0.0)
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
    runs = split_contiguous(work[t_idx], lg.crews)
    crew_col = np.zeros(len(out), dtype=int)
    for c, (a, b) in enumerate(runs, start=1):
        crew_col[t_idx[a:b]] = c
    out["crew"] = crew_col

    # timing
    win_start = _minutes(win.start, "[window] start")
    win_end = _minutes(win.end, "[window] end")
    notes: list[str] = []

    def pre_race_times(n_runs: int) -> list[tuple[float, float, int, int]]:
        # (work before the race, first pass, passes before the race, most passes) per crew
        res = []
        for a, b in runs:
            idx = t_idx[a:b]
            crew_passes = int(passes[idx].max())
            before, _ = pass_schedule(crew_passes, n_runs, 0.0, 1.0)
            carry = float(bags[idx].sum() * lg.carry_min_per_bag)  # all bags come in on the first pass
            t_pre = carry + sum(float((area[idx] * (passes[idx] >= p)).sum()) / lg.spread_rate_m2_min
                                for p in range(1, before + 1))
            t_first = carry + float(area[idx].sum()) / lg.spread_rate_m2_min
            res.append((t_pre, t_first, before, crew_passes))
        return res

    def first_start_for(pre: list[tuple[float, float, int, int]]) -> float:
        if lg.first_start is not None:
            return float(_minutes(lg.first_start, "[logistics] first_start"))
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
        notes.append(f"The first start {_hhmm(first_start)} is at or after the window end {win.end}: "
                     "add crews, or check the window and the spreading rate.")
    done_by = first_start - lg.wait_min

    rows = []
    zone_geom = out.geometry
    for c, ((a, b), (t_pre, t_first, before, crew_passes)) in enumerate(zip(runs, pre_race, strict=True),
                                                                       start=1):
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
            second = _hhmm(start + t_first) if before >= 2 else _hhmm(break_times[0])
        else:
            second = None
        if start < win_start:
            notes.append(f"Crew {c} starts at {_hhmm(start)}, before the window start {win.start}: the "
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
            "start": _hhmm(start),
            "done_by": _hhmm(done_by),
            "second_pass": second,
            "geometry": geom,
        })
    cols = ["crew", "label", "zone_ids", "first_course_order", "last_course_order", "n_zones", "area_m2",
            "product_kg", "product_p90_kg", "bags", "work_min", "pre_race_min", "passes", "depot_x",
            "depot_y", "start", "done_by", "second_pass", "geometry"]
    crews = gpd.GeoDataFrame(rows, columns=cols, geometry="geometry", crs=zones.crs)
    second = crews["second_pass"].astype(object)
    crews["second_pass"] = second.where(second.notna(), None)  # None, not NaN, for one pass

    # the order
    n_out = int(bags.sum())
    handed = n_out * bag_kg
    big = lg.big_bag_kg if lg.big_bag_kg is not None else getattr(agent, "big_bag_kg", None)
    pkgs = packages_for(handed, bag_kg, big, lg.big_bag_from_kg)
    order_kg = float(sum(p.kg for p in pkgs))
    n_big = sum(p.count for p in pkgs if p.kind == "big bag")
    n_small = sum(p.count for p in pkgs if p.kind == "bag")
    per_pallet = lg.bags_per_pallet if lg.bags_per_pallet is not None else getattr(agent, "bags_per_pallet",
                                                                                   None)
    pallets = None if not per_pallet else int(math.ceil(n_small / per_pallet)) + n_big
    ratio = np.divide(kg90, kg, out=np.ones_like(kg), where=kg > 0)
    n_kg = np.nan_to_num(out["nitrogen_kg"].to_numpy(dtype=float))
    cl_kg = np.nan_to_num(out["chloride_kg"].to_numpy(dtype=float))
    order = Order(
        agent=str(getattr(agent, "name", "")), agent_label=str(getattr(agent, "label", "")),
        p50_kg=float(kg.sum()), p90_kg=float(kg90.sum()), margin_pct=margin,
        needed_kg=float(kg90.sum() * (1 + margin / 100.0)), handed_out_kg=float(handed),
        order_kg=order_kg, bag_kg=bag_kg, bags_handed_out=n_out, packages=pkgs, big_bags=n_big,
        pallets=pallets, tonnes=order_kg / 1000.0,
        cost=None if lg.price_per_kg is None else order_kg * lg.price_per_kg,
        currency=lg.currency, price_per_kg=lg.price_per_kg,
        nitrogen_kg=float(n_kg[treated].sum()), nitrogen_p90_kg=float((n_kg * ratio)[treated].sum()),
        chloride_kg=float(cl_kg[treated].sum()), chloride_p90_kg=float((cl_kg * ratio)[treated].sum()),
        storage_cautions=storage_cautions(agent),
    )
    return LogisticsResult(zones=out, crews=crews, order=order, first_start=_hhmm(first_start),
                           wait_min=float(lg.wait_min), handful_g=float(lg.handful_g), notes=tuple(notes))
