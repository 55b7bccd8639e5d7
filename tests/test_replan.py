"""`courseplan replan`: top-ups from a time on, from what was spread and mid-day observations.

The demo hill under a cloudy, cool day ([forecast] constants 0.5 °C, full cloud): the morning passes
hold part of the course to the end of the day, so a replan at 10:50 has zones to leave alone.
"""

from __future__ import annotations

import dataclasses
import json
from pathlib import Path

import pandas as pd
import pytest
from click.testing import CliRunner

from courseplan.api import replan
from courseplan.cli.main import main
from courseplan.io.planfile import read_plan

ROOT = Path(__file__).resolve().parents[1]
PLAN = ROOT / "sample-geodata" / "plan.toml"
ISSUED = "2027-03-18T10:52+01:00"


def cloudy():
    s = read_plan(PLAN)
    return s.replace(inputs=dataclasses.replace(s.inputs, forecast=None),
                     forecast=dataclasses.replace(s.forecast, air_temp_c=0.5, cloud_fraction=1.0))


@pytest.fixture(scope="module")
def base(tmp_path_factory):
    out = tmp_path_factory.mktemp("replan") / "base"
    return replan(cloudy(), out, at="10:50", as_planned=True, issued_at=ISSUED), out


def _obs_in(rep, zone_id, tmp: Path, hardness: int) -> Path:
    z = rep["result"].zones.set_index("zone_id")
    pt = z.geometry.representative_point().to_crs(4326)[zone_id]
    f = tmp / f"obs-{zone_id}.csv"
    f.write_text("obs_id,time,lon,lat,wetness,lwc_pct,snow_temp_c,density_kg_m3,grain,hand_hardness\n"
                 f"T1,2027-03-18T10:40+01:00,{pt.x:.7f},{pt.y:.7f},wet,5.0,0.0,560,MF,{hardness}\n",
                 encoding="utf-8")
    return f


def test_as_planned_leaves_zones_hard_through_run_2_alone(base):
    rep, out = base
    t, res = rep["topups"], rep["result"]
    alone = t[t["status"] == "leave alone"]
    assert len(alone) >= 3 and (alone["dose_g_m2"] == 0).all()
    tops = res.passes[~res.passes["slot"].str.startswith("spread before")]
    assert not set(tops["zone_id"]) & set(alone["zone_id"])
    assert set(tops["zone_id"]) == set(t.loc[t["status"] == "top-up", "zone_id"])
    at = pd.Timestamp("2027-03-18T10:50+01:00")
    assert (tops["spread_at"] >= at).all() and (tops["spread_at"] < pd.Timestamp("2027-03-18T12:30+01:00")).all()
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert summary["replan"]["version"] == "replan 10:50, v2" and summary["issued_at"] == ISSUED
    assert "replan 10:50, v2" in summary["plan"] and summary["notes"][0].startswith("REPLAN 10:50, v2")
    for f in ("zones.gpkg", "map.html", "order.pdf", "crews.pdf", "topups.csv", "depots.csv"):
        assert (out / f).exists()
    d = rep["depots"]
    assert (d["bags_left"] == d["bags_morning"] - d["bags_used"]).all()
    assert (d["bags_short"] == (d["bags_needed"] - d["bags_left"]).clip(lower=0)).all()


def test_soft_observation_adds_a_top_up_there_only(base, tmp_path):
    rep, _ = base
    t0 = rep["topups"].set_index("zone_id")
    zone = int(t0.index[t0["status"] == "leave alone"][-1])
    soft = replan(cloudy(), tmp_path / "soft", at="10:50", as_planned=True, issued_at=ISSUED,
                  observations=_obs_in(rep, zone, tmp_path, hardness=2))
    t1 = soft["topups"].set_index("zone_id")
    assert t1.loc[zone, "status"] == "top-up" and t1.loc[zone, "observed"] == "soft"
    changed = t1.index[(t1["status"] != t0["status"]) | (t1["topup_at"] != t0["topup_at"])]
    assert list(changed) == [zone]


def test_hard_observation_keeps_the_hold(base, tmp_path):
    rep, _ = base
    t0 = rep["topups"].set_index("zone_id")
    zone = int(t0.index[t0["status"] == "leave alone"][-1])
    hard = replan(cloudy(), tmp_path / "hard", at="10:50", as_planned=True, issued_at=ISSUED,
                  observations=_obs_in(rep, zone, tmp_path, hardness=4))
    t1 = hard["topups"].set_index("zone_id")
    assert t1.loc[zone, "status"] == "leave alone" and t1.loc[zone, "observed"] == "hard"


@pytest.mark.parametrize("rows, says", [
    ("zone_id,kg,time\n999,20,08:00\n", "zone 999 is not a zone of this plan"),
    ("zone_id,kg,time\n1,20,11:05\n", "is after --at 10:50"),
    ("zone_id,time,g_m2\n1,08:00,\n", "neither kg nor g_m2"),
    ("zone_id,time,bags\n1,08:00,3\n", "neither a kg nor a g_m2 column"),
])
def test_bad_spread_file_one_line_exit_2_nothing_written(tmp_path, rows, says):
    f = tmp_path / "spread.csv"
    f.write_text(rows, encoding="utf-8")
    out = tmp_path / "out"
    res = CliRunner().invoke(main, ["replan", str(PLAN), "--at", "10:50", "--spread", str(f), "--out", str(out)])
    assert res.exit_code == 2, res.output
    lines = [ln for ln in res.output.splitlines() if ln.strip()]
    assert len(lines) == 1 and lines[0].startswith("error:") and says in lines[0]
    assert not out.exists() and not [p for p in tmp_path.iterdir() if p.name.startswith(".out")]


def test_observation_after_at_is_refused(tmp_path):
    f = tmp_path / "late.csv"
    f.write_text("obs_id,time,lon,lat,wetness\nL1,2027-03-18T11:00+01:00,9.2526,46.5525,wet\n", encoding="utf-8")
    res = CliRunner().invoke(main, ["replan", str(PLAN), "--at", "10:50", "--as-planned", "--observations", str(f),
                                    "--out", str(tmp_path / "out")])
    assert res.exit_code == 2 and "L1 are after --at 10:50" in res.output
    assert not (tmp_path / "out").exists()


def test_spread_file_in_kg_and_previous_folder(tmp_path):
    morning = tmp_path / "morning"
    assert CliRunner().invoke(main, ["plan", str(PLAN), "--out", str(morning), "--quiet"]).exit_code in (0, 3)
    f = tmp_path / "spread.csv"
    f.write_text("zone_id,kg,time\n9,300,07:40\n13,150,07:45\n", encoding="utf-8")
    out = tmp_path / "r"
    res = CliRunner().invoke(main, ["replan", str(PLAN), "--at", "10:50", "--spread", str(f), "--previous",
                                    str(morning), "--out", str(out), "--json"])
    assert res.exit_code in (0, 3), res.output
    doc = json.loads(res.stdout)
    assert doc["replan"]["version"] == "replan 10:50, v2"
    t = pd.read_csv(out / "topups.csv").set_index("zone_id")
    assert t.loc[9, "spread_kg"] == 300 and t.loc[13, "spread_kg"] == 150 and t.loc[1, "spread_kg"] == 0


def test_replan_summary_validates(base):
    jsonschema = pytest.importorskip("jsonschema")
    schema = json.loads((ROOT / "courseplan" / "schema" / "summary.schema.json").read_text(encoding="utf-8"))
    doc = json.loads((base[1] / "summary.json").read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator(schema, format_checker=jsonschema.FormatChecker()).validate(doc)


def test_a_replan_keeps_each_zones_own_agent(base, tmp_path):
    # the chief gave zone 4 urea (edit_agent): its spread and its top-ups stay urea, the rest rock salt
    import geopandas as gpd

    jsonschema = pytest.importorskip("jsonschema")
    z = gpd.read_file(base[1] / "zones.gpkg", layer="zones")
    z["edit_agent"] = ["urea" if i == 4 else None for i in z.zone_id]
    z.to_file(tmp_path / "edited.gpkg", layer="zones", driver="GPKG", engine="pyogrio")
    s = cloudy()
    s = s.replace(inputs=dataclasses.replace(s.inputs, zones=tmp_path / "edited.gpkg"))
    rep = replan(s, tmp_path / "o", at="10:50", as_planned=True, issued_at=ISSUED)
    res = rep["result"]
    p = res.passes
    assert set(p.loc[p["zone_id"] == 4, "agent"]) == {"urea"} and len(p[p["zone_id"] == 4])
    assert set(p.loc[p["zone_id"] != 4, "agent"]) == {"NaCl"}
    assert res.zones.set_index("zone_id").loc[4, "agent"] == "urea"
    doc = json.loads((tmp_path / "o" / "summary.json").read_text(encoding="utf-8"))
    schema = json.loads((ROOT / "courseplan" / "schema" / "summary.schema.json").read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator(schema, format_checker=jsonschema.FormatChecker()).validate(doc)
