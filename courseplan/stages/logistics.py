"""Logistics stage: the order for the logistics lead (packages, pallets, tonnes, cost, N and Cl).

Takes the zones table after the crews stage (:mod:`courseplan.stages.crews`, which hands out the
bags) and returns an :class:`Order`; :class:`LogisticsResult` bundles the crews and the order for
the writers.  No files are opened here.

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
import pandas as pd

from courseplan.cautions import storage_cautions
from courseplan.settings import PlanSettings


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
    work: Any = None
    depots: Any = None
    method: str = ""
    orders: tuple[Order, ...] = ()  # one line per agent, the plan's first (``order``); more in a mixed plan

    @property
    def order_lines(self) -> tuple[Order, ...]:
        """Every agent's order line, the plan's first (``(order,)`` when no lines were given)."""
        return self.orders or (self.order,)

    def summary(self) -> dict[str, Any]:
        """Plain, JSON-ready figures for ``summary.json`` under ``"order"`` and ``"crews"``.

        The sheets print exactly these (rounded) values.
        """
        order = _order_summary(self.order, self.depots)
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
                "bag_kg": _r(self.order.bag_kg, 1),
                "work_min": _r(row.work_min, 0),
                "pre_race_min": _r(row.pre_race_min, 0),
                "passes": int(row.passes),
                "depot_x": _r(row.depot_x, 1),
                "depot_y": _r(row.depot_y, 1),
                "start": row.start,
                "done_by": row.done_by,
                "second_pass": row.second_pass if isinstance(row.second_pass, str) else None,
                "notes": [n for n in self.notes if n.startswith(f"Crew {int(row.crew)} ")],
                "work": [] if self.work is None else [
                    {"zone_id": int(w.zone_id), "label": w.label, "pass_no": int(w.pass_no), "slot": w.slot,
                     "from": w.start.strftime("%H:%M"), "to": w.end.strftime("%H:%M"),
                     "spread_at": w.end.isoformat(timespec="minutes"), "dose_g_m2": _r(w.dose_g_m2, 0),
                     "bags": int(w.bags),
                     "handfuls_m2": None if w.handfuls_m2 != w.handfuls_m2 else _r(w.handfuls_m2, 1),
                     "flow_kg_min": None if w.flow_kg_min != w.flow_kg_min else _r(w.flow_kg_min, 1)}
                    for w in self.work[self.work["crew"] == row.crew].itertuples(index=False)],
                "depot": None if self.depots is None else _crew_depot(self.depots, int(row.crew)),
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
                "other_orders": [_order_summary(o, self.depots) for o in self.order_lines[1:]],
                "crews": {"count": len(crews), "crs": None if crs is None else crs.to_string(),
                          "first_start": self.first_start, "wait_min": _r(self.wait_min, 0),
                          "handful_g": _r(self.handful_g, 0), "notes": list(self.notes),
                          "method": self.method,
                          "plan_notes": [n for n in self.notes if not n.startswith("Crew ")],
                          "crews": crews}}


def _crew_depot(depots, crew: int) -> dict[str, Any] | None:
    """A crew's depot: where, what waits there (in all and per agent) and by when."""
    mine = [d for d in depots.itertuples(index=False) if int(d.crew) == crew]
    if not mine:
        return None
    d = mine[0]
    return {"name": d.depot, "lat": round(float(d.lat), 6), "lon": round(float(d.lon), 6),
            "bags": int(sum(int(m.bags) for m in mine)), "kg": _r(sum(float(m.kg) for m in mine), 1),
            "deliver_by": d.deliver_by,
            "loads": [{"agent": str(getattr(m, "agent", "")), "bags": int(m.bags), "kg": _r(m.kg, 1)} for m in mine]}


def _order_summary(o: Order, depots) -> dict[str, Any]:
    """One order line as JSON-ready figures, with the deliveries of its agent."""
    if depots is not None and "agent" in depots.columns:
        depots = depots[depots["agent"] == o.agent]
    return {
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
        "deliveries": [] if depots is None else [
            {"depot": d.depot, "crew": int(d.crew), "agent": str(getattr(d, "agent", o.agent)), "lat": round(float(d.lat), 6), "lon": round(float(d.lon), 6),
             "bags": int(d.bags), "bag_kg": _r(d.bag_kg, 1), "kg": _r(d.kg, 1),
             "pallets": None if d.pallets is None or d.pallets != d.pallets else int(d.pallets),
             "deliver_by": d.deliver_by} for d in depots.itertuples(index=False)],
    }


def orders_by_agent(cp, settings: PlanSettings, agent: Any, agents: dict, plan_p90_kg: float | None):
    """One :class:`Order` per agent of the plan (the plan's first) and the depots, one row per depot and agent.

    Each agent's P90 is its zones' share of the plan's P90 (the zones' P90s scaled to the day's, as
    the bags are, :func:`courseplan.stages.crews.plan_crews`), at least its P50.
    """
    z = cp.zones
    names = z["agent"].astype(str).to_numpy() if "agent" in z.columns else np.full(len(z), agent.name)
    kg = np.nan_to_num(z["product_kg"].to_numpy(dtype=float))
    kg90 = np.where(kg > 0, np.maximum(np.nan_to_num(z["product_p90_kg"].to_numpy(dtype=float)), kg), 0.0)
    scale = 1.0 if plan_p90_kg is None or kg90.sum() <= 0 else max(plan_p90_kg, kg.sum()) / kg90.sum()
    depots = cp.depots
    if depots is not None:
        depots = depots.assign(agent=agent.name)
    used = [agent.name] + sorted(set(names[kg > 0]) - {agent.name})
    if len(used) == 1:
        return (plan_order(z, settings, agent, cp.bag_kg, plan_p90_kg=plan_p90_kg, depots=depots),), depots
    if depots is not None:  # one delivery per depot and agent: the bags of that agent's zones of the crew
        rows = []
        for name in used:
            bags = z.loc[names == name].groupby("crew")["bags"].sum()
            part = depots.assign(agent=name, bags=depots["crew"].map(bags).fillna(0).astype(int))
            per = settings.logistics.bags_per_pallet or getattr(agents[name], "bags_per_pallet", None)
            part["kg"] = part["bags"] * cp.bag_kg
            part["pallets"] = [int(math.ceil(b / per)) if per else None for b in part["bags"]]
            rows.append(part[part["bags"] > 0])
        depots = pd.concat(rows, ignore_index=True).sort_values(["crew", "agent"], kind="stable")
        depots = depots.reset_index(drop=True)
    orders = []
    for name in used:
        sel = names == name
        p90 = max(float(kg90[sel].sum()) * scale, float(kg[sel].sum()))
        mine = None if depots is None else depots[depots["agent"] == name]
        orders.append(plan_order(z[sel], settings, agents[name], cp.bag_kg, plan_p90_kg=p90, depots=mine))
    return tuple(orders), depots


def _r(x: float, nd: int) -> float:
    """Round for output; ints stay whole numbers when ``nd`` is 0."""
    v = round(float(x), nd)
    return float(int(v)) if nd == 0 else v


# ---------------------------------------------------------------- packaging


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


# ---------------------------------------------------------------- split


# ---------------------------------------------------------------- timing


# ---------------------------------------------------------------- stage


def plan_order(zones: Any, settings: PlanSettings, agent: Any, bag_kg: float,
               plan_p90_kg: float | None = None, depots: Any = None) -> Order:
    """The order for the logistics lead from the zones table with its ``bags`` column.

    Parameters
    ----------
    zones
        Zones after the crews stage (``product_kg``, ``product_p90_kg``, ``bags``, ``nitrogen_kg``,
        ``chloride_kg``).
    settings
        Plan settings (``[logistics]``).
    agent
        Catalogue agent.
    bag_kg
        Bag size the crews carry [kg].
    plan_p90_kg
        The plan's P90 over the whole day [kg] (from the dosing stage's samples), or None.
    """
    lg = settings.logistics
    margin = float(lg.margin_pct)
    out = zones
    kg = np.nan_to_num(out["product_kg"].to_numpy(dtype=float), nan=0.0)
    kg90 = np.nan_to_num(out["product_p90_kg"].to_numpy(dtype=float), nan=0.0)
    treated = kg > 0
    kg90 = np.where(treated, np.maximum(kg90, kg), 0.0)
    kg = np.where(treated, kg, 0.0)
    bags = out["bags"].to_numpy(dtype=int)
    # the order
    n_out = int(bags.sum())
    handed = n_out * bag_kg
    big = lg.big_bag_kg if lg.big_bag_kg is not None else getattr(agent, "big_bag_kg", None)
    pkgs = packages_for(handed, bag_kg, big, lg.big_bag_from_kg) if depots is None else (
        Package("bag", float(bag_kg), n_out),)  # delivered as the bags the crews carry, to their depots
    order_kg = float(sum(p.kg for p in pkgs))
    n_big = sum(p.count for p in pkgs if p.kind == "big bag")
    n_small = sum(p.count for p in pkgs if p.kind == "bag")
    per_pallet = lg.bags_per_pallet if lg.bags_per_pallet is not None else getattr(agent, "bags_per_pallet",
                                                                                   None)
    pallets = None if not per_pallet else int(math.ceil(n_small / per_pallet)) + n_big
    if depots is not None and per_pallet:  # each depot gets its own pallets
        pallets = int(sum(math.ceil(int(b) / per_pallet) for b in depots["bags"]))
    ratio = np.divide(kg90, kg, out=np.ones_like(kg), where=kg > 0)
    n_kg = np.nan_to_num(out["nitrogen_kg"].to_numpy(dtype=float))
    cl_kg = np.nan_to_num(out["chloride_kg"].to_numpy(dtype=float))
    # the plan's P90 is the day's 90th percentile over the samples when the dosing stage gives it;
    # the sum of the zones' P90s stacks their uncertainty and is only the fallback
    p90 = float(kg90.sum()) if plan_p90_kg is None else float(max(plan_p90_kg, kg.sum()))
    order = Order(
        agent=str(getattr(agent, "name", "")), agent_label=str(getattr(agent, "label", "")),
        p50_kg=float(kg.sum()), p90_kg=p90, margin_pct=margin,
        needed_kg=float(p90 * (1 + margin / 100.0)), handed_out_kg=float(handed),
        order_kg=order_kg, bag_kg=bag_kg, bags_handed_out=n_out, packages=pkgs, big_bags=n_big,
        pallets=pallets, tonnes=order_kg / 1000.0,
        cost=None if lg.price_per_kg is None else order_kg * lg.price_per_kg,
        currency=lg.currency, price_per_kg=lg.price_per_kg,
        nitrogen_kg=float(n_kg[treated].sum()), nitrogen_p90_kg=float((n_kg * ratio)[treated].sum()),
        chloride_kg=float(cl_kg[treated].sum()), chloride_p90_kg=float((cl_kg * ratio)[treated].sum()),
        storage_cautions=storage_cautions(agent),
    )
    return order
