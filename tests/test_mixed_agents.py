"""Zones with their own agent (``edit_agent``) in a plan of another: each is dosed with its agent.

Outside facts used: IUPAC standard atomic weights (N 14.007, Cl 35.45, Na 22.990, C 12.011, H 1.008,
O 15.999; from memory) for the nitrogen and chloride in a kilogram of product; van 't Hoff's law
(freezing-point depression ∝ dissolved particles per kilogram of water) for which agent needs more
mass: urea gives 1 particle per 60.06 g, rock salt 2 per 58.44 g, so urea needs about twice the mass
in dilute brine — more than rock salt in any case.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest

from courseplan.agents import get_agent
from courseplan.errors import SettingsError
from courseplan.schedule import pass_slots, schedule_from_mapping
from courseplan.settings import settings_from_mapping
from courseplan.stages.crews import crew_bag_kg
from courseplan.stages.dosing import dose_pass, finish_dosing, prepare_dosing
from courseplan.stages.dosing.mixed import is_mixed, plan_agents
from courseplan.stages.weather import uniform_steps, weather_from_settings

TZ = "Europe/Zurich"
OWN = [None, "urea", "CaCl2", None]  # zone 1 and 4 the plan's rock salt


def _setup(samples=1, purity=None, own=OWN):
    dosing = {"samples": samples} | ({"purity": purity} if purity is not None else {})
    s = settings_from_mapping({"plan": {"date": "2027-03-18", "timezone": TZ}, "dosing": dosing,
                               "forecast": {"air_temp_c": 5.0}})
    n = len(own)
    zones = pd.DataFrame(dict(  # four alike wet, sunny zones; only the agent differs
        zone_id=np.arange(1, n + 1), irradiation_wh_m2=[3000.0] * n, area_m2=[1000.0, 1000.0, 1000.0, 2000.0][:n],
        lwc_pct=[5.0] * n, wetness=["wet"] * n, density_kg_m3=[550.0] * n, snow_temp_c=[0.0] * n,
        grain=["MF"] * n, snow_source=["observation"] * n, exposure_class=["full-sun"] * n, edit_agent=own))
    steps = uniform_steps(pd.Timestamp("2027-03-18 06:00", tz=TZ), pd.Timestamp("2027-03-18 14:00", tz=TZ), 48)
    weather = weather_from_settings(s, np.sin(np.linspace(0.05, np.pi - 0.05, 48)) ** 2, steps=steps)
    agents = {a: get_agent(a) for a in ("NaCl", "urea", "CaCl2")}
    return s, zones, weather, agents


def _at(ctx, hhmm="09:00"):
    return ctx.seconds([pd.Timestamp(f"2027-03-18 {hhmm}", tz=TZ)] * len(ctx.zones))


def test_each_zone_is_dosed_with_its_own_agent():
    s, zones, weather, agents = _setup()
    mixed = prepare_dosing(zones, s, agents["NaCl"], weather, agents=agents)
    assert [sub.agent.name for _, sub in mixed.groups] == ["NaCl", "CaCl2", "urea"]  # the plan's first
    r = dose_pass(mixed, _at(mixed))
    for k, name in enumerate(["NaCl", "urea", "CaCl2", "NaCl"]):  # the same pass in a plan of that agent
        alone = dose_pass(prepare_dosing(zones, s, agents[name], weather), _at(mixed))
        for f in ("dose_g_m2", "dose_p90_g_m2", "hard_until_s", "sub_passes"):
            assert getattr(r, f)[k] == pytest.approx(getattr(alone, f)[k], rel=1e-12), (name, f)
    # van 't Hoff: urea needs more mass than rock salt for the same zone (about 2× in dilute brine)
    assert 1.3 < r.dose_g_m2[1] / r.dose_g_m2[0] < 3.0
    assert r.dose_g_m2[3] == pytest.approx(r.dose_g_m2[0], rel=1e-12)  # alike zones, same agent


def test_the_days_samples_add_the_agents_up():
    s, zones, weather, agents = _setup(samples=32)
    mixed = prepare_dosing(zones, s, agents["NaCl"], weather, agents=agents)
    r = dose_pass(mixed, _at(mixed))
    parts = np.zeros(32)
    for name, idx in (("NaCl", [0, 3]), ("urea", [1]), ("CaCl2", [2])):
        sub = zones.iloc[idx].reset_index(drop=True)
        c = prepare_dosing(sub, s, agents[name], weather)
        parts += dose_pass(c, _at(c)).sample_kg
    assert r.sample_kg == pytest.approx(parts, rel=1e-12)
    assert np.percentile(r.sample_kg, 90) >= np.sum(r.dose_g_m2 * zones["area_m2"].to_numpy()) / 1000.0 * 0.99


def test_nitrogen_chloride_and_purity_follow_each_zones_agent():
    # [dosing] purity is the plan's product; another agent keeps its catalogue purity (urea 0.99, CaCl2 0.94)
    s, zones, weather, agents = _setup(purity=0.90)
    ctx = prepare_dosing(zones, s, agents["NaCl"], weather, agents=agents)
    sched = schedule_from_mapping({"inspection": ["08:15", "09:00"], "runs": [["09:30", "10:45"]]},
                                  date="2027-03-18", timezone=TZ)
    slot = pass_slots(sched, s.dosing.tau_min)[0]
    r = dose_pass(ctx, ctx.seconds([slot.deadline - pd.Timedelta(minutes=30)] * 4))
    z, table, _, _ = finish_dosing(ctx, [(slot, r)], sched)
    assert z["agent"].tolist() == ["NaCl", "urea", "CaCl2", "NaCl"]
    assert table.set_index("zone_id")["agent"].to_dict() == {1: "NaCl", 2: "urea", 3: "CaCl2", 4: "NaCl"}
    kg = z["product_kg"].to_numpy()
    assert (kg > 0).all()
    n_urea = 2 * 14.007 / (12.011 + 15.999 + 2 * (14.007 + 2 * 1.008))  # 0.4665
    cl_nacl, cl_cacl2 = 35.45 / (22.990 + 35.45), 2 * 35.45 / (40.078 + 2 * 35.45)
    assert z["nitrogen_kg"].tolist() == pytest.approx([0.0, kg[1] * 0.99 * n_urea, 0.0, 0.0], rel=1e-3)
    assert z["chloride_kg"].tolist() == pytest.approx(
        [kg[0] * 0.90 * cl_nacl, 0.0, kg[2] * 0.94 * cl_cacl2, kg[3] * 0.90 * cl_nacl], rel=1e-3)
    assert "agent urea purity 0.99" in z["dose_inputs"][1] and "agent NaCl purity 0.90" in z["dose_inputs"][0]


def test_a_plan_of_one_agent_has_no_groups():
    s, zones, weather, agents = _setup(own=[None, "NaCl", None])
    assert not is_mixed(zones, "NaCl")
    assert prepare_dosing(zones, s, agents["NaCl"], weather, agents=agents).groups == ()


def test_an_agent_in_other_bags_is_refused_unless_the_bag_size_is_set():
    s, zones, _, _ = _setup()
    big = dataclasses.replace(get_agent("urea"), bag_sizes_kg=(50.0,))
    cat = {"NaCl": get_agent("NaCl"), "urea": big, "CaCl2": get_agent("CaCl2")}
    with pytest.raises(SettingsError) as e:
        plan_agents(zones, get_agent("NaCl"), cat, crew_bag_kg, s, where="edited.gpkg")
    msg = str(e.value)
    assert "urea comes in 50 kg bags, the crews carry 25 kg bags of NaCl" in msg and "\n" not in msg
    assert "[logistics] bag_kg" in msg
    s25 = s.replace(logistics=dataclasses.replace(s.logistics, bag_kg=25.0))
    assert set(plan_agents(zones, get_agent("NaCl"), cat, crew_bag_kg, s25)) == {"NaCl", "urea", "CaCl2"}
