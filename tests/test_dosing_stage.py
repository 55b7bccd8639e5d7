"""The harden-and-hold dosing stage on tiny synthetic zones (hand-checkable relations).

Physics values are checked in tests/test_hold.py against hand computations and field-evidence.md;
here: the stage's wiring — sun raises the dose, blocked snow gets no pass, water-first follows the
physics, the passes table adds up to the zones' product, and a second pass adds to the day total.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from courseplan.errors import InputError
from courseplan.schedule import pass_slots, schedule_from_mapping
from courseplan.settings import settings_from_mapping
from courseplan.stages.dosing import dose_pass, finish_dosing, prepare_dosing
from courseplan.stages.weather import uniform_steps, weather_from_settings

AGENT = "NaCl"


def _setup(n=1, **zone_kw):
    from courseplan.agents import get_agent

    s = settings_from_mapping({"plan": {"date": "2027-03-18", "timezone": "Europe/Zurich"},
                               "dosing": {"samples": n}, "forecast": {"air_temp_c": 5.0}})
    base = dict(zone_id=[1, 2, 3, 4, 5], irradiation_wh_m2=[0.0, 3000.0, 3000.0, 3000.0, 3000.0],
                area_m2=[1000.0] * 5, lwc_pct=[5.0, 5.0, 0.3, 20.0, 5.0],
                wetness=["wet", "wet", "moist", "soaked", "wet"], density_kg_m3=[550.0] * 4 + [300.0],
                snow_temp_c=[0.0] * 5, grain=["MF"] * 5, snow_source=["observation"] * 5,
                exposure_class=["shaded", "full-sun", "full-sun", "full-sun", "full-sun"])
    base.update(zone_kw)
    zones = pd.DataFrame(base)
    t0 = pd.Timestamp("2027-03-18 06:00", tz="Europe/Zurich")
    t1 = pd.Timestamp("2027-03-18 14:00", tz="Europe/Zurich")
    steps = uniform_steps(t0, t1, 48)
    weights = np.sin(np.linspace(0.05, np.pi - 0.05, 48)) ** 2   # a made-up clear-sky shape
    weather = weather_from_settings(s, weights, steps=steps)
    return s, zones, prepare_dosing(zones, s, get_agent(AGENT), weather)


def test_sun_raises_the_dose_and_blocked_snow_gets_none():
    _, zones, ctx = _setup()
    t = ctx.seconds([pd.Timestamp("2027-03-18 11:00", tz="Europe/Zurich")] * 5)
    r = dose_pass(ctx, t)
    assert r.dose_g_m2[1] > r.dose_g_m2[0] > 0          # full sun needs more than shade
    assert r.dose_g_m2[3] == 0 and r.dose_g_m2[4] == 0  # slush (20 %) and new snow (300 kg/m³)
    assert list(ctx.blocked[3:]) == ["slush", "new-snow"]
    # θ 0.3 % at midday: the sun wets it within τ only if E_k/(L_f ρ_w d) lifts θ past 1 %
    e = r.energy_j_m2[2] if np.isfinite(r.energy_j_m2[2]) else 0.0
    lifted = 0.3 + 100 * e / (333_400 * 1000 * 0.04)
    assert bool(r.water_first[2]) == (lifted < 1.0)


def test_passes_table_adds_up_and_second_pass_adds_to_the_day():
    s, zones, ctx = _setup()
    sched = schedule_from_mapping({"inspection": ["08:15", "09:00"], "runs": [["09:30", "10:45"],
                                                                           ["12:30", "13:45"]]},
                                  date="2027-03-18", timezone="Europe/Zurich")
    slots = pass_slots(sched, s.dosing.tau_min)
    r1 = dose_pass(ctx, ctx.seconds([slots[0].deadline - pd.Timedelta(minutes=30)] * 5))
    r2 = dose_pass(ctx, ctx.seconds([slots[1].deadline - pd.Timedelta(minutes=30)] * 5))
    z, table, _, _ = finish_dosing(ctx, [(slots[0], r1)], sched)
    z2, table2, _, p90 = finish_dosing(ctx, [(slots[0], r1), (slots[1], r2)], sched)
    assert p90 >= z2["product_kg"].sum()
    assert z["product_kg"].sum() == pytest.approx(table["product_kg"].sum())
    assert z2["product_kg"].sum() == pytest.approx(table2["product_kg"].sum())
    assert z2.loc[1, "dose_g_m2"] > z.loc[1, "dose_g_m2"]    # a second pass adds, it does not replace
    assert (table2.groupby("zone_id")["pass_no"].max() <= 2).all()
    assert set(z2["verdict"]) >= {"treat-in-passes", "slush", "new-snow"}


def test_sampled_p90_is_at_least_p50():
    _, zones, ctx = _setup(n=64)
    r = dose_pass(ctx, ctx.seconds([pd.Timestamp("2027-03-18 11:00", tz="Europe/Zurich")] * 5))
    assert np.all(r.dose_p90_g_m2 >= r.dose_g_m2)
    assert r.dose_p90_g_m2[1] > r.dose_g_m2[1]   # albedo and air temperature spread matter in full sun


def test_missing_columns_and_nan_are_one_clear_error():
    with pytest.raises(InputError, match="lwc_pct"):
        _setup(lwc_pct=[np.nan, 5.0, 5.0, 5.0, 5.0])
