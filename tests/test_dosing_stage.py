"""The dosing stage: declared columns, verdicts, P50/P90, seeding, provenance, errors."""

import dataclasses

import numpy as np
import pandas as pd
import pytest

from courseplan import columns
from courseplan.agents import get_agent
from courseplan.errors import InputError
from courseplan.physics.dose import VERDICTS
from courseplan.settings import Dosing, Forecast, PlanInfo, PlanSettings
from courseplan.stages.dosing import apply_dosing, zone_energy_j_m2
from courseplan.stages.weather import weather_from_settings


def _zones(**over):
    base = dict(
        zone_id=[1, 2, 3, 4, 5, 6],
        exposure_class=["shaded", "part-sun", "full-sun", "full-sun", "full-sun", "shaded"],
        sun_fraction=[0.1, 0.5, 0.9, 0.9, 0.9, 0.1],
        irradiation_wh_m2=[300.0, 1200.0, 2400.0, 2400.0, 2400.0, 300.0],
        slope_deg=[20.0] * 6, area_m2=[1000.0, 500.0, 2000.0, 100.0, 100.0, 100.0],
        lwc_pct=[1.5, 5.5, 5.5, 0.5, 20.0, 5.5],
        wetness=["moist", "wet", "wet", "moist", "soaked", "wet"],
        density_kg_m3=[560.0, 560.0, 560.0, 560.0, 560.0, 300.0],
        snow_temp_c=[0.0, 0.0, 0.0, -1.0, 0.0, 0.0],
        grain=["RG", "MF", "MF", "RG", "MF", "PP"],
        snow_source=["class-default", "class-default", "observation", "observation", "class-default",
                     "nearby"],
    )
    base.update(over)
    return pd.DataFrame(base)


def _settings(**dosing):
    return PlanSettings().replace(dosing=dataclasses.replace(Dosing(), **dosing))


def _run(zones=None, settings=None, agent="NaCl"):
    st = settings or _settings()
    z = zones if zones is not None else _zones()
    return apply_dosing(z, st, get_agent(agent), weather_from_settings(st))


def test_all_declared_columns_added_and_input_kept():
    z = _zones()
    out = _run(z)
    for c in columns.declared("dosing"):
        assert c.name in out.columns, c.name
    assert list(out.columns[: len(z.columns)]) == list(z.columns)
    assert "verdict" not in z.columns  # a copy, input untouched
    assert out["passes"].dtype.kind == "i"


def test_verdicts_and_advice():
    out = _run()
    v = list(out["verdict"])
    assert v[0] == "treat" and v[1] in ("treat", "treat-in-passes") and v[2] in ("treat", "treat-in-passes")
    assert v[3:] == ["too-cold", "slush", "new-snow"]
    for v, a in zip(out["verdict"], out["advice"], strict=True):
        assert a == VERDICTS[v]
    untreated = ~out["verdict"].isin(["treat", "treat-in-passes"])
    assert (out.loc[untreated, "dose_g_m2"] == 0).all() and (out.loc[untreated, "product_kg"] == 0).all()
    assert (out.loc[untreated, "passes"] == 0).all()


def test_quantities_follow_dose_and_area():
    out = _run(agent="NH4NO3")
    ag = get_agent("NH4NO3")
    np.testing.assert_allclose(out["product_kg"], out["dose_g_m2"] * out["area_m2"] / 1000)
    np.testing.assert_allclose(out["product_p90_kg"], out["dose_p90_g_m2"] * out["area_m2"] / 1000)
    np.testing.assert_allclose(out["nitrogen_kg"], out["product_kg"] * ag.purity * ag.nitrogen_fraction)
    assert (out["chloride_kg"] == 0).all()
    assert (out["dose_p90_g_m2"] >= out["dose_g_m2"]).all()


def test_same_seed_same_numbers_other_seed_differs():
    a, b = _run(), _run()
    pd.testing.assert_frame_equal(a, b)
    c = _run(settings=_settings(seed=1))
    sampled = a["lwc_sampled"] & a["verdict"].isin(["treat", "treat-in-passes"])
    assert sampled.any()
    assert not np.allclose(a.loc[sampled, "dose_p90_g_m2"], c.loc[sampled, "dose_p90_g_m2"])


def test_no_uncertainty_gives_p50_equal_p90():
    st = PlanSettings().replace(forecast=dataclasses.replace(Forecast(), air_temp_spread_k=0.0))
    z = _zones(snow_source=["observation"] * 6)
    out = apply_dosing(z, st, get_agent("NaCl"), weather_from_settings(st))
    assert not out["lwc_sampled"].any()
    np.testing.assert_allclose(out["dose_g_m2"], out["dose_p90_g_m2"])


def test_lwc_from_class_column_overrides_source_rule():
    z = _zones(snow_source=["observation"] * 6)
    z["lwc_from_class"] = [True, False, False, False, False, False]
    out = _run(z)
    assert list(out["lwc_sampled"]) == [True, False, False, False, False, False]


def test_shade_lowers_dose_and_sun_raises_it():
    z = _zones(irradiation_wh_m2=[0.0, 800.0, 1600.0, 2400.0, 3200.0, 4000.0], lwc_pct=[5.0] * 6,
               wetness=["wet"] * 6, density_kg_m3=[560.0] * 6, snow_temp_c=[0.0] * 6, grain=["MF"] * 6,
               snow_source=["observation"] * 6)
    out = _run(z)
    d = out["dose_g_m2"].to_numpy()
    assert np.all(np.diff(d) >= 0) and d[-1] > d[0]
    assert np.all(np.diff(out["energy_in_mj_m2"].to_numpy()) >= 0)


def test_energy_by_hand_for_one_step():
    # one 1-hour step, clear sky: shortwave part = (1 − α)·irr·3600·share
    st = PlanSettings().replace(plan=PlanInfo(timezone="UTC"),
                                window=dataclasses.replace(PlanSettings().window, start="12:00", end="13:00"))
    w = weather_from_settings(st)
    e = zone_energy_j_m2([1000.0, 0.0], dataclasses.replace(w, cloud_fraction=np.zeros(1)), 0.6)
    assert e.shape == (2, 1, 1)
    assert e[0, 0, 0] - e[1, 0, 0] == pytest.approx(0.4 * 1000.0 * 3600.0)


def test_provenance_columns():
    out = _run()
    assert out["weather_source"].iloc[0] == "plan constants [forecast]"
    s = out["dose_inputs"].iloc[1]
    assert "class-default" in s and "sampled 3–8 %" in s and "T_b -2.0" in s and "seed 20261202" in s
    assert (out["brine_exit_temp_c"] == -2.0).all() and (out["refreeze_share"] == 0.5).all()


def test_passes_and_pass_times():
    z = _zones(irradiation_wh_m2=[6000.0] * 6, lwc_pct=[8.0] * 6, wetness=["very-wet"] * 6,
               density_kg_m3=[560.0] * 6, snow_temp_c=[0.0] * 6, grain=["MF"] * 6,
               snow_source=["observation"] * 6)
    out = _run(z, settings=_settings(slush_limit=0.03))
    n = out["passes"].iloc[0]
    assert n >= 2 and out["verdict"].iloc[0] == "treat-in-passes"
    times = out["pass_times"].iloc[0].split("; ")
    assert len(times) == n and times[0] == "10:00" and times == sorted(times)
    assert out["dose_per_pass_g_m2"].iloc[0] <= out["max_pass_g_m2"].iloc[0] + 1e-9


def test_missing_column_and_nan_raise():
    with pytest.raises(InputError, match="lacks"):
        _run(_zones().drop(columns=["lwc_pct"]))
    with pytest.raises(InputError, match="NaN"):
        _run(_zones(irradiation_wh_m2=[np.nan, 1.0, 1.0, 1.0, 1.0, 1.0]))
