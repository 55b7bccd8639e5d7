"""Crews on race day: spreading methods and rates, the split of the course among the crews, and the
timing of each pass worked back from the schedule (shaded zones first, sunny last).

Rates are common practice, no source (see :data:`METHODS`); the split is the exact linear partition
of :func:`split_contiguous` (Skiena 2008, §8.5).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from courseplan.settings import PlanSettings


@dataclass(frozen=True)
class Method:
    """A way of spreading: swath, walking speed and the mass one unit can broadcast per minute."""

    name: str
    label: str
    swath_m: float
    speed_m_s: float
    flow_kg_min: float
    per_person: bool
    carried: bool



METHODS: dict[str, Method] = {
    # All three rows are common practice, no source (from memory): a person throwing handfuls from a
    # bag walks a steep race slope at about 0.5 m/s and covers a 3 m band, at about one 40 g handful
    # every two seconds; a push spreader covers about 3 m at 0.7 m/s and meters up to 10 kg/min; a
    # spreader towed by a snowmobile covers about 6 m (groomer passes are 2.5–7 m wide, domain-data §7)
    # at 2 m/s and meters up to 60 kg/min.
    "hand": Method("hand", "by hand from bags", 3.0, 0.5, 1.2, True, True),
    "push": Method("push", "push spreaders", 3.0, 0.7, 10.0, True, True),
    "towed": Method("towed", "spreader towed by a snowmobile", 6.0, 2.0, 60.0, False, False),
}



def spread_rate_m2_min(settings: PlanSettings, dose_g_m2) -> np.ndarray:
    """Area one crew covers per minute at a dose [m²/min]: walking-limited or flow-limited.

    ``units × min(swath × speed × 60, flow × 1000 / dose)``, units = people (hand, push) or one
    towed spreader; ``[logistics] spread_rate_m2_min`` overrides it with a fixed rate.
    """
    lg = settings.logistics
    d = np.maximum(np.asarray(dose_g_m2, dtype=float), 1e-6)
    if lg.spread_rate_m2_min is not None:
        return np.full(np.shape(d), float(lg.spread_rate_m2_min))
    m = METHODS[lg.method]
    units = lg.people_per_crew if m.per_person else 1
    return units * np.minimum(m.swath_m * m.speed_m_s * 60.0, m.flow_kg_min * 1000.0 / d)



def per_pass_dose(zones: Any, passes) -> np.ndarray:
    """Mean dose per pass of each zone [g/m²] (0 where untreated)."""
    d = np.nan_to_num(zones["dose_g_m2"].to_numpy(dtype=float))
    p = np.asarray(passes, dtype=float)
    return np.where(p > 0, d / np.maximum(p, 1), 0.0)



def pass_minutes(zones: Any, settings: PlanSettings, dose_g_m2, bag_kg: float) -> np.ndarray:
    """Minutes a crew needs for one pass of each zone: spreading plus carrying its bags in.

    Carrying (hand and push spreading) is ``bags × carry_min_per_bag`` shared by the crew; a towed
    spreader is filled at the depot between zones (``carry_min_per_bag`` per 100 kg).
    """
    lg = settings.logistics
    area = zones["area_m2"].to_numpy(dtype=float)
    d = np.asarray(dose_g_m2, dtype=float)
    spread = area / spread_rate_m2_min(settings, d)
    kg = area * d / 1000.0
    m = METHODS[lg.method]
    if m.carried:
        carry = np.ceil(kg / bag_kg - 1e-9) * lg.carry_min_per_bag / max(lg.people_per_crew, 1)
    else:
        carry = np.ceil(kg / 100.0 - 1e-9) * lg.carry_min_per_bag
    return spread + carry



NOMINAL_DOSE_G_M2 = 40.0
"""Dose assumed when timing a pass before it is dosed (the middle of the field band, 5–60 g/m²)."""



SUN_ORDER_STEP = 0.05
"""Sun shares closer than this share of the sunniest zone's are one step in the order of work
(common practice, no source: a crew tells shade, part sun and full sun apart, not 0.999 from 1)."""


def assign_crews(zones: Any, settings: PlanSettings, bag_kg: float = 25.0) -> Any:
    """Split the zones among the crews and set each crew's order of work (the ``crews`` stage).

    Zones are cut, in course order, into at most ``[logistics] crews`` contiguous runs of balanced
    spreading time (:func:`split_contiguous`).  Inside a crew the shaded zones come first and the
    sunny ones last (ascending sun share, then course order), so the zones the sun softens first are
    salted last and hold longest into the run (dosing-model, "Timing from the race").

    Adds ``crew``, ``work_order`` and ``spread_min`` (minutes one pass takes at the nominal dose,
    :func:`pass_minutes`; the pipeline updates it once the pass is dosed).
    """
    lg = settings.logistics
    out = zones.copy()
    spread = pass_minutes(out, settings, np.full(len(out), NOMINAL_DOSE_G_M2), bag_kg)
    order_idx = np.argsort(out["course_order"].to_numpy(), kind="stable")
    runs = split_contiguous(spread[order_idx], lg.crews)
    crew = np.zeros(len(out), dtype=np.int64)
    work = np.zeros(len(out), dtype=np.int64)
    sun = out["sun_fraction"].to_numpy(dtype=float) if "sun_fraction" in out else np.zeros(len(out))
    sun = np.where(np.isfinite(sun), sun, out["raster_irradiation_wh_m2"].to_numpy(dtype=float)
                   if "raster_irradiation_wh_m2" in out else 0.0)
    # the order of work goes by sun in steps of 5 % of the sunniest zone, so shares a crew cannot tell
    # apart (0.999 and 1.0) keep course order, and a re-run with a hair more sun keeps its round
    sun = np.nan_to_num(sun)
    step = SUN_ORDER_STEP * max(float(np.max(np.abs(sun))) if sun.size else 0.0, 1e-12)
    sun_key = np.round(sun / step)
    for c, (a, b) in enumerate(runs, start=1):
        idx = order_idx[a:b]
        crew[idx] = c
        key = np.lexsort((out["course_order"].to_numpy()[idx], sun_key[idx]))
        work[idx[key]] = np.arange(1, len(idx) + 1)
    out["crew"] = crew
    out["work_order"] = work
    out["spread_min"] = spread
    return out



def time_pass(zones: Any, need: np.ndarray, *, deadline, opens, tau_min: float) -> tuple[Any, np.ndarray]:
    """When each crew spreads the zones that need this pass, working back from the deadline.

    Each crew walks its zones in ``work_order`` (sunny last); the last one is finished τ before the
    deadline (the salt has acted when the run or the inspection starts), the others before it, one
    after the other.  In a break (``opens`` given: the end of the previous run) nobody may be on the
    course before it opens, so zones whose spreading would have to start earlier are not reached:
    they get no pass and are flagged (the sunny zones, last in the order, are the ones reached).

    Returns
    -------
    tuple
        (spread times as a tz-aware ``DatetimeIndex``, NaT where no pass; flags of zones not reached).
    """
    n = len(zones)
    need = np.asarray(need, dtype=bool)
    crew = zones["crew"].to_numpy()
    order = zones["work_order"].to_numpy()
    mins = zones["spread_min"].to_numpy(dtype=float)
    finish_by = deadline - pd.Timedelta(minutes=float(tau_min))
    at: list = [pd.NaT] * n
    missed = np.zeros(n, dtype=bool)
    for c in np.unique(crew[need]):
        idx = np.flatnonzero(need & (crew == c))
        idx = idx[np.argsort(order[idx], kind="stable")][::-1]  # last in the order first, backwards
        t_done = finish_by
        for i in idx:
            start = t_done - pd.Timedelta(minutes=float(mins[i]))
            if opens is not None and start < opens:
                missed[i] = True
                continue
            at[i] = t_done
            t_done = start
    return pd.DatetimeIndex(at).tz_convert(deadline.tz) if any(pd.notna(x) for x in at) else \
        pd.DatetimeIndex([pd.NaT] * n, tz=deadline.tz), missed


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


def work_rows(zones: Any, passes: Any, settings: PlanSettings, bag_kg: float, *, p90_scale: float = 1.0
              ) -> Any:
    """Each crew's work in order: one row per zone and pass, with its time window, dose and bags.

    The window ends when the pass is spread (``spread_at``) and starts the pass's minutes earlier
    (:func:`pass_minutes` at the pass's dose).  Bags cover the pass's P90 (scaled to the plan's P90)
    plus the margin, once.  Hand crews get handfuls per square metre; spreader crews the flow to set
    at the method's walking speed [kg/min].
    """
    lg = settings.logistics
    m = METHODS[lg.method]
    z = zones.set_index("zone_id")
    rows = []
    for r in passes.itertuples(index=False):
        zr = z.loc[r.zone_id]
        one = zr.to_frame().T
        mins = float(pass_minutes(one, settings, np.array([r.dose_g_m2]), bag_kg)[0])
        need = float(r.dose_p90_g_m2) * float(zr["area_m2"]) / 1000.0 * p90_scale * (1.0 + lg.margin_pct / 100.0)
        bags = int(np.ceil(max(need, float(r.product_kg)) / bag_kg - 1e-9))
        end = pd.Timestamp(r.spread_at)
        rows.append({"crew": int(zr["crew"]), "work_order": int(zr["work_order"]), "zone_id": int(r.zone_id),
                     "label": str(zr.get("label", r.zone_id)), "pass_no": int(r.pass_no), "slot": r.slot,
                     "start": end - pd.Timedelta(minutes=mins), "end": end, "minutes": mins,
                     "dose_g_m2": float(r.dose_g_m2), "bags": bags,
                     "handfuls_m2": float(r.dose_g_m2) / lg.handful_g if m.name == "hand" else float("nan"),
                     "flow_kg_min": (float("nan") if m.name == "hand" else
                                     float(r.dose_g_m2) * m.swath_m * m.speed_m_s * 60.0 / 1000.0)})
    cols = ["crew", "work_order", "zone_id", "label", "pass_no", "slot", "start", "end", "minutes", "dose_g_m2",
            "bags", "handfuls_m2", "flow_kg_min"]
    out = pd.DataFrame(rows, columns=cols)
    return out.sort_values(["crew", "start", "work_order"], kind="stable").reset_index(drop=True)
