"""Tests of the logistics stage: bags, order, crew split, depots and timing.

Tiny synthetic zone tables (rectangles along a straight course) whose answers are computed by hand
in the comments.  The agent is a stand-in object (types.SimpleNamespace) with the catalogue's
attribute names; its numbers are made up for the tests, not catalogue values.
"""

from __future__ import annotations

import dataclasses
import itertools
import json
import math
import types

import geopandas as gpd
import numpy as np
import pytest
import shapely
from hypothesis import HealthCheck, assume, given
from hypothesis import settings as hsettings
from hypothesis import strategies as st

from courseplan import columns
from courseplan.cautions import storage_cautions
from courseplan.errors import InputError, SettingsError
from courseplan.pipeline import plan_logistics
from courseplan.settings import PlanSettings
from courseplan.stages.crews import CARRY_LIMIT_KG, crew_bag_kg, zone_bags
from courseplan.stages.crews.raceday import split_contiguous
from courseplan.stages.logistics import packages_for


def stand_in_agent(**kw):
    """Make an agent-like object; numbers made up for the tests."""
    base = dict(name="NaCl", label="Sodium chloride (test)", formula="NaCl", molar_mass_g_mol=58.443,
                nitrogen_fraction=0.0, chloride_fraction=0.6066, purity=0.97, bulk_density_kg_m3=1200.0,
                bag_sizes_kg=(25.0,), big_bag_kg=1000.0, bags_per_pallet=40, oxidiser=False)
    base.update(kw)
    return types.SimpleNamespace(**base)


def make_zones(areas, doses, passes=None, p90_factor=1.5, order=None, n_frac=0.0, cl_frac=0.6):
    """Zones as rectangles 20 m wide stacked down a straight course; areas in m², doses in g/m²."""
    n = len(areas)
    passes = passes if passes is not None else [1] * n
    order = order if order is not None else list(range(1, n + 1))
    rows, y = [], 0.0
    for i in range(n):
        length = areas[i] / 20.0
        geom = shapely.box(0.0, y - length, 20.0, y)
        y -= length
        kg = areas[i] * doses[i] / 1000.0
        rows.append(dict(zone_id=i + 1, course_order=order[i], section=f"S{i // 3 + 1}", area_m2=areas[i],
                         dose_g_m2=doses[i], dose_p90_g_m2=doses[i] * p90_factor, passes=passes[i],
                         product_kg=kg, product_p90_kg=kg * p90_factor, nitrogen_kg=kg * n_frac,
                         chloride_kg=kg * cl_frac, verdict="treat" if kg > 0 else "none-needed",
                         advice="Spread evenly." if kg > 0 else "No treatment.", geometry=geom))
    return gpd.GeoDataFrame(rows, geometry="geometry", crs="EPSG:32632")


def plan_settings(**logistics):
    # The hand computations below assume a spreading rate of 40 m²/min unless a test sets one.
    logistics.setdefault("spread_rate_m2_min", 40.0)
    s = PlanSettings()
    win = logistics.pop("window", None)
    s = s.replace(logistics=dataclasses.replace(s.logistics, **logistics))
    if win:
        s = s.replace(window=dataclasses.replace(s.window, **win))
    return s


# ---------------------------------------------------------------- bags and packages


def test_zone_bags_hand_computed():
    # 48 kg × 1.10 = 52.8 kg → 3 bags of 25 kg (2 without the margin); 50 kg with no margin →
    # exactly 2; 0 kg → 0
    assert zone_bags(np.array([48.0]), 10.0, 25.0).tolist() == [3]
    assert zone_bags(np.array([48.0]), 0.0, 25.0).tolist() == [2]
    assert zone_bags(np.array([50.0]), 0.0, 25.0).tolist() == [2]
    assert zone_bags(np.array([0.0]), 10.0, 25.0).tolist() == [0]


def test_crew_bag_is_largest_carryable_or_setting():
    s = PlanSettings()
    assert crew_bag_kg(s, stand_in_agent(bag_sizes_kg=(10.0, 25.0, 50.0))) == 25.0
    assert crew_bag_kg(s, stand_in_agent(bag_sizes_kg=(500.0, 40.0))) == 40.0  # none ≤ 25 kg: smallest
    assert crew_bag_kg(plan_settings(bag_kg=20.0), stand_in_agent()) == 20.0
    assert CARRY_LIMIT_KG == 25.0
    with pytest.raises(SettingsError, match="bag_kg"):
        crew_bag_kg(s, stand_in_agent(bag_sizes_kg=()))


def test_packages_big_bags_from_threshold():
    # 2300 kg: 2 big bags of 1000 kg + 300 kg in 12 bags of 25 kg
    p = packages_for(2300.0, 25.0, 1000.0, 1000.0)
    assert [(x.kind, x.count) for x in p] == [("big bag", 2), ("bag", 12)]
    # below the threshold: bags only (900 kg → 36 bags)
    p = packages_for(900.0, 25.0, 1000.0, 1000.0)
    assert [(x.kind, x.count) for x in p] == [("bag", 36)]
    # no big bag in the catalogue
    assert [(x.kind, x.count) for x in packages_for(2300.0, 25.0, None, 1000.0)] == [("bag", 92)]


def test_storage_cautions_keep_nitrate_and_chloride_apart():
    an = storage_cautions(stand_in_agent(name="NH4NO3", formula="NH4NO3", oxidiser=True,
                                         chloride_fraction=0.0))
    assert any("chloride" in c.lower() and "apart" in c.lower() for c in an)
    assert any("2019/1148" in c for c in an)
    cl = storage_cautions(stand_in_agent())
    assert any("ammonium nitrate" in c.lower() and "apart" in c.lower() for c in cl)
    assert not any("2019/1148" in c for c in cl)


# ---------------------------------------------------------------- split


def brute_force(work, n):
    """All ways to cut into min(n, len) non-empty runs; (best max, best min among those)."""
    m = len(work)
    k = min(n, m)
    best = None
    for cuts in itertools.combinations(range(1, m), k - 1):
        b = [0, *cuts, m]
        sums = [sum(work[b[i]:b[i + 1]]) for i in range(k)]
        key = (max(sums), -min(sums))
        best = key if best is None or key < best else best
    return best[0], -best[1]


def test_split_hand_examples():
    assert split_contiguous(np.array([1, 1, 1, 1, 4.0]), 2) == [(0, 4), (4, 5)]
    assert split_contiguous(np.array([3, 3, 3.0]), 3) == [(0, 1), (1, 2), (2, 3)]
    assert split_contiguous(np.array([5.0, 1.0]), 4) == [(0, 1), (1, 2)]  # fewer items than crews
    assert split_contiguous(np.array([]), 3) == []
    # min-max alone allows [6],[6],[1,1]... the second criterion raises the smallest run:
    # [4,2 | 2,2,2 | 4,2] → sums 6, 6, 6
    cuts = split_contiguous(np.array([4, 2, 2, 2, 2, 4, 2.0]), 3)
    assert cuts == [(0, 2), (2, 5), (5, 7)]


@hsettings(max_examples=150, deadline=None)
@given(st.lists(st.integers(0, 50), min_size=1, max_size=8), st.integers(1, 5))
def test_split_is_optimal(work, n):
    cuts = split_contiguous(np.array(work, dtype=float), n)
    # runs cover 0 … m in order, non-empty
    assert cuts[0][0] == 0 and cuts[-1][1] == len(work)
    assert all(a < b for a, b in cuts) and all(c[1] == d[0] for c, d in zip(cuts, cuts[1:], strict=False))
    assert len(cuts) == min(n, len(work))
    sums = [sum(work[a:b]) for a, b in cuts]
    assert (max(sums), min(sums)) == brute_force(work, n)


@hsettings(max_examples=60, deadline=None)
@given(st.lists(st.floats(1.0, 4.0), min_size=40, max_size=120), st.integers(2, 6))
def test_split_within_25_percent_of_even(work, n):
    # "where the zones allow it": when no zone is more than a quarter of a crew's even share, cutting
    # at the zone boundary nearest each multiple of the share gives runs within ±25 %; the least
    # largest run is then within it for sure, and the second criterion (largest smallest run) keeps
    # the smallest run within it too
    w = np.array(work)
    mean = w.sum() / n
    assume(w.max() <= 0.25 * mean)
    sums = [w[a:b].sum() for a, b in split_contiguous(w, n)]
    assert max(sums) <= 1.25 * mean
    assert min(sums) >= 0.75 * mean


# ---------------------------------------------------------------- the stage


def test_work_bags_handfuls_hand_computed():
    # zone: 800 m², 30 g/m², 2 passes → P50 24 kg, P90 36 kg; ×1.10 = 39.6 kg → 2 bags of 25 kg.
    # work = 800 × 2 / 40 m²/min + 2 bags × 2 min = 44 min; handfuls = 30 / 2 / 40 g = 0.375 per m²
    z = make_zones([800.0], [30.0], passes=[2])
    r = plan_logistics(z, plan_settings(margin_pct=10.0, spread_rate_m2_min=40.0, carry_min_per_bag=2.0,
                                        handful_g=40.0), stand_in_agent())
    row = r.zones.iloc[0]
    assert row["bags"] == 2
    assert row["work_min"] == pytest.approx(44.0)
    assert row["handfuls_m2"] == pytest.approx(0.375)
    assert row["crew"] == 1


def test_every_treated_zone_in_one_contiguous_crew_and_untreated_in_none():
    # zones 3 and 6 are untreated (dose 0); course order is the reverse of zone ids
    doses = [30, 30, 0, 30, 30, 0, 30, 30, 30.0]
    z = make_zones([1000.0] * 9, doses, order=list(range(9, 0, -1)))
    r = plan_logistics(z, plan_settings(crews=3), stand_in_agent())
    zz = r.zones.sort_values("course_order")
    treated = zz["product_kg"] > 0
    assert (zz.loc[~treated, "crew"] == 0).all()
    assert set(zz.loc[treated, "crew"]) == {1, 2, 3}
    seq = zz.loc[treated, "crew"].tolist()
    assert seq == sorted(seq)  # contiguous runs in course order, numbered from the start
    # 7 equal zones in 3 crews: runs of 3, 2, 2 or similar; the largest has 3
    assert max(seq.count(c) for c in (1, 2, 3)) == 3


def test_crews_split_before_dosing_keep_their_numbers_when_one_has_nothing_to_spread():
    # the crews stage gave zones 1-2 to crew 1, 3-4 to crew 2, 5-6 to crew 3; crew 2's zones need no salt
    # (a replan with no top-up there): crews 1 and 3 keep their numbers and their own zones
    z = make_zones([1000.0] * 6, [30, 30, 0, 0, 30, 30.0]).assign(crew=[1, 1, 2, 2, 3, 3])
    r = plan_logistics(z, plan_settings(crews=3), stand_in_agent())
    assert r.crews["crew"].tolist() == [1, 3] and r.crews["label"].tolist() == ["Crew 1", "Crew 3"]
    assert r.crews["zone_ids"].tolist() == ["1, 2", "5, 6"]
    assert r.zones["crew"].tolist() == [1, 1, 0, 0, 3, 3]


def test_fewer_crews_than_asked_when_fewer_zones():
    z = make_zones([500.0, 500.0], [20.0, 20.0])
    r = plan_logistics(z, plan_settings(crews=5), stand_in_agent())
    assert len(r.crews) == 2
    assert r.summary()["crews"]["count"] == 2


@hsettings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.tuples(st.floats(50.0, 5000.0), st.sampled_from([0.0, 0.0, 5.0, 20.0, 60.0, 150.0]),
                          st.integers(1, 3)), min_size=1, max_size=25),
       st.integers(1, 6), st.floats(0.0, 50.0), st.permutations(list(range(25))))
def test_random_tables_properties(rows, n, margin, perm):
    areas = [a for a, _, _ in rows]
    doses = [d for _, d, _ in rows]
    passes = [p for _, _, p in rows]
    order = [p + 1 for p in perm if p < len(rows)]
    z = make_zones(areas, doses, passes=passes, order=order)
    r = plan_logistics(z, plan_settings(crews=n, margin_pct=margin), stand_in_agent())
    zz = r.zones.sort_values("course_order")
    treated = zz["product_kg"].to_numpy() > 0
    crew = zz["crew"].to_numpy()
    # each treated zone in exactly one crew (crew ≥ 1), untreated in none
    assert (crew[treated] >= 1).all() and (crew[~treated] == 0).all()
    assert len(r.crews) == min(n, int(treated.sum()))
    # contiguous: crew numbers never go back along the course, and each crew's zones are one run
    seq = crew[treated]
    assert (np.diff(seq) >= 0).all() and (np.diff(seq) <= 1).all()
    # bags × bag size ≥ P90 × (1 + margin)
    bags = zz["bags"].to_numpy()
    need = zz["product_p90_kg"].to_numpy() * (1 + margin / 100)
    assert (bags[treated] * 25.0 >= need[treated] - 1e-6).all()
    assert (bags[treated] * 25.0 < need[treated] + 25.0).all()  # and no whole bag too many
    # the order covers what is handed out
    assert r.order.order_kg >= r.order.bags_handed_out * 25.0 - 1e-6
    assert r.order.order_kg >= r.order.needed_kg - 1e-6
    # crew totals add up
    assert r.crews["bags"].sum() == bags.sum()
    assert r.crews["product_kg"].sum() == pytest.approx(zz["product_kg"].sum())


def test_order_figures_hand_computed():
    # two treated zones of 1000 m² at 40 g/m² (40 kg P50, 60 kg P90 each) and one untreated zone
    # whose P90 must not count.  P50 80 kg, P90 120 kg, +10 % = 132 kg.  Bags: 66 kg → 3 per zone
    # → 6 × 25 = 150 kg (below the big-bag threshold) → 6 bags, 1 pallet, 0.15 t, 150 × 0.5 = 75.
    z = make_zones([1000.0, 1000.0, 1000.0], [40.0, 40.0, 0.0], n_frac=0.2, cl_frac=0.5)
    z.loc[2, "product_p90_kg"] = 30.0  # untreated at P50
    r = plan_logistics(z, plan_settings(margin_pct=10.0, price_per_kg=0.5, currency="CHF"), stand_in_agent())
    o = r.order
    assert o.p50_kg == pytest.approx(80.0) and o.p90_kg == pytest.approx(120.0)
    assert o.needed_kg == pytest.approx(132.0)
    assert o.bags_handed_out == 6 and o.order_kg == pytest.approx(150.0)
    assert o.big_bags == 0 and o.pallets == 1
    assert o.tonnes == pytest.approx(0.15)
    assert o.cost == pytest.approx(75.0) and o.currency == "CHF"
    assert o.nitrogen_kg == pytest.approx(16.0) and o.chloride_kg == pytest.approx(40.0)
    assert o.nitrogen_p90_kg == pytest.approx(24.0)  # scales with P90/P50 per zone
    assert r.summary()["order"]["cost"] == 75.0


def test_big_bags_and_pallets():
    # 10 zones × 100 kg P90 × 1.0 = 4 bags each → 40 bags = 1000 kg → 1 big bag, 0 bags, 1 pallet place
    z = make_zones([1000.0] * 10, [100.0] * 10, p90_factor=1.0)
    r = plan_logistics(z, plan_settings(margin_pct=0.0), stand_in_agent())
    assert [(p.kind, p.count) for p in r.order.packages] == [("big bag", 1)]
    assert r.order.pallets == 1
    r2 = plan_logistics(z, plan_settings(margin_pct=0.0, big_bag_from_kg=5000.0), stand_in_agent())
    assert [(p.kind, p.count) for p in r2.order.packages] == [("bag", 40)]
    assert r2.order.pallets == 1  # 40 bags per pallet


def test_timing_with_a_first_start():
    # one zone per crew, 2000 m² at 20 g/m² (P90 60 kg ×1.1 = 66 → 3 bags): first pass = 2000/40
    # + 3 × 2 = 56 min.  First start 10:30, wait 50 → done by 09:40, start 08:44.  The zone with 2
    # passes gets its second one between run 1 and 2: 10:30 + (13:00 − 10:30) / 2 = 11:45.
    z = make_zones([2000.0, 2000.0], [20.0, 20.0], passes=[1, 2])
    r = plan_logistics(z, plan_settings(crews=2, first_start="10:30", wait_min=50.0,
                                        window={"start": "08:00", "end": "13:00", "runs": 2}),
                       stand_in_agent())
    c = r.crews.set_index("crew")
    assert c.loc[1, "start"] == "08:44" and c.loc[2, "start"] == "08:44"
    assert c.loc[1, "done_by"] == "09:40"
    assert c.loc[1, "second_pass"] is None
    assert c.loc[2, "second_pass"] == "11:45"
    assert r.first_start == "10:30" and not r.notes


def test_timing_default_first_start_and_one_run():
    # No first start given: the longest crew starts at the window start 09:00; one run, so the
    # second pass goes right after the first: pre-race = 6 + 50 + 50 = 106 min; first start
    # = 09:00 + 106 + 50 = 11:36; second pass starts 09:00 + 56 = 09:56.
    z = make_zones([2000.0], [20.0], passes=[2])
    r = plan_logistics(z, plan_settings(window={"start": "09:00", "end": "14:00", "runs": 1}),
                       stand_in_agent())
    c = r.crews.iloc[0]
    assert r.first_start == "11:36"
    assert c["start"] == "09:00" and c["second_pass"] == "09:56"
    assert c["pre_race_min"] == pytest.approx(106.0)


def test_timing_notes_when_crews_start_before_the_window():
    z = make_zones([4000.0], [20.0])
    r = plan_logistics(z, plan_settings(first_start="09:00", window={"start": "08:30", "end": "12:00"}),
                       stand_in_agent())
    assert r.crews.iloc[0]["start"] < "08:30"
    assert any("before the window start" in n for n in r.notes)
    assert r.summary()["crews"]["crews"][0]["notes"]


def test_depot_on_the_edge_of_the_crew_zones():
    z = make_zones([1000.0] * 6, [30.0] * 6)
    r = plan_logistics(z, plan_settings(crews=2), stand_in_agent())
    for row in r.crews.itertuples():
        assert row.geometry.boundary.distance(shapely.Point(row.depot_x, row.depot_y)) < 1e-6


def test_no_treated_zones():
    z = make_zones([1000.0, 1000.0], [0.0, 0.0])
    r = plan_logistics(z, PlanSettings(), stand_in_agent())
    assert len(r.crews) == 0 and r.order.order_kg == 0 and r.order.bags_handed_out == 0
    assert (r.zones["crew"] == 0).all()
    json.dumps(r.summary())


def test_missing_columns_raise_input_error():
    z = make_zones([1000.0], [30.0]).drop(columns=["product_p90_kg"])
    with pytest.raises(InputError, match="product_p90_kg"):
        plan_logistics(z, PlanSettings(), stand_in_agent())


def test_declared_columns_and_summary():
    z = make_zones([1000.0] * 5, [30.0] * 5, passes=[1, 2, 1, 1, 1])
    r = plan_logistics(z, plan_settings(crews=2, price_per_kg=1.2), stand_in_agent())
    assert {c.name for c in columns.declared("logistics")} <= set(r.zones.columns)
    assert [c.name for c in columns.CREW_LAYER] + ["geometry"] == list(r.crews.columns)
    assert r.crews.crs == z.crs
    s = json.loads(json.dumps(r.summary()))  # JSON-ready
    assert s["order"]["bags_handed_out"] == r.order.bags_handed_out
    assert sum(c["bags"] for c in s["crews"]["crews"]) == r.order.bags_handed_out
    assert [zz["zone_id"] for c in s["crews"]["crews"] for zz in c["zones"]] == [1, 2, 3, 4, 5]
    assert math.isclose(s["order"]["cost"], round(r.order.order_kg * 1.2, 2))
