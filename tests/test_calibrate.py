"""`courseplan calibrate`: a synthetic patch is fitted back, bad patch files leave the plan untouched,
the TOML round trip keeps everything outside [calibration], and plans say whether they are calibrated."""

from __future__ import annotations

import dataclasses
import json

import numpy as np
import pytest
from click.testing import CliRunner
from hypothesis import given, settings
from hypothesis import strategies as st

from courseplan.io.calibrate import calibrate, patch_energy
from courseplan.calibration import calibrated_refreeze_share, calibration_notes
from courseplan.cli.main import main
from courseplan.io.patchfile import read_patch
from courseplan.io.planfile import read_plan
from courseplan.physics.patch import patch_outcomes, rung_outcomes, tau_bounds

PLAN = """# a test plan: comments and key order must survive calibrate
[plan]
name = "patch test"   # trailing comment
date = "2027-03-18"
timezone = "Europe/Zurich"
agent = "NaCl"

[dosing]
# the knobs
depth_m = 0.04
tau_min = 20.0

[forecast]
air_temp_c = 5.0
cloud_fraction = 0.1
"""
HEAD = "lon,lat,slope_deg,aspect_deg,altitude_m,spread_at,agent,lwc_pct,density_kg_m3,dose_g_m2,read_at,result\n"
LADDER = (10.0, 20.0, 40.0, 80.0, 160.0)


def _patch(rows, spread="10:00", place="9.25,46.56,20,160,1900", agent="NaCl", lwc="5.0", rho="550"):
    out = HEAD
    for dose, read, result in rows:
        out += f"{place},{spread},{agent},{lwc},{rho},{dose},{read},{result}\n"
    return out


def _files(tmp_path, patch_text, plan_text=PLAN):
    plan, patch = tmp_path / "plan.toml", tmp_path / "patch.csv"
    plan.write_text(plan_text, encoding="utf-8")
    patch.write_text(patch_text, encoding="utf-8")
    return plan, patch


def _run(*args):
    return CliRunner().invoke(main, ["calibrate", *map(str, args)])


def _outside_calibration(text: str) -> str:
    """The file without its [calibration] table (up to the next table or the end)."""
    out, skip = [], False
    for ln in text.splitlines(keepends=True):
        if ln.strip().startswith("["):
            skip = ln.strip() == "[calibration]"
        if not skip:
            out.append(ln)
    return "".join(out).rstrip("\n")


@settings(max_examples=5, deadline=None)
@given(kf=st.floats(0.15, 0.85), lwc=st.floats(3.0, 7.0), rho=st.floats(480.0, 600.0),
       spread=st.sampled_from(["08:30", "10:00", "12:15"]), aspect=st.floats(90.0, 270.0))
def test_a_synthetic_patch_is_fitted_back_within_its_interval(tmp_path_factory, kf, lwc, rho, spread, aspect):
    tmp = tmp_path_factory.mktemp("p")
    place = f"9.25,46.56,22,{aspect:.1f},1900"
    h, m = map(int, spread.split(":"))
    read = f"{h:02d}:{m + 25:02d}" if m + 25 < 60 else f"{h + 1:02d}:{m + 25 - 60:02d}"
    kw = dict(spread=spread, place=place, lwc=f"{lwc:.3f}", rho=f"{rho:.1f}")
    plan, patch = _files(tmp, _patch([(d, read, "soft") for d in LADDER], **kw))
    s = read_plan(plan)
    p = read_patch(patch, timezone=s.plan.timezone, date=s.plan.date)
    e = patch_energy(s, p)
    ctx = e["ctx"]
    held = patch_outcomes(e["agent"], ctx.nominal, 0.0, p.lwc_pct, p.density_kg_m3, LADDER, refreeze_share=kf,
                          purity=ctx.purity, tau_s=s.dosing.tau_min * 60, depth_m=s.dosing.depth_m,
                          brine_exit_temp_c=s.dosing.brine_exit_temp_c)
    patch.write_text(_patch([(d, read, "held" if ok else "soft") for d, ok in zip(LADDER, held, strict=True)],
                            **kw), encoding="utf-8")
    r = calibrate(plan, patch)
    assert r["fit"]["low"] - 1e-3 <= kf <= r["fit"]["high"] + 1e-3
    if r["fit"]["kind"] == "interval":
        assert r["fit"]["low"] <= r["fit"]["value"] <= r["fit"]["high"]
    cal = read_plan(plan).calibration
    assert cal.refreeze_share_kind == r["fit"]["kind"] and cal.date == "2027-03-18"


@pytest.mark.parametrize("result, kind", [("held", "upper bound"), ("soft", "lower bound")])
def test_held_only_and_soft_only_give_a_bound(tmp_path, result, kind):
    plan, patch = _files(tmp_path, _patch([(d, "10:30", result) for d in (20.0, 40.0)]))
    res = _run(plan, patch, "--json")
    assert res.exit_code == 0, res.output
    r = json.loads(res.output)
    assert r["fit"]["kind"] == kind and r["fit"]["value"] is None
    cal = read_plan(plan).calibration
    assert cal.refreeze_share_kind == kind
    assert cal.refreeze_share == (cal.refreeze_share_high if result == "held" else cal.refreeze_share_low)


BAD = {
    "no rows": HEAD,
    "unknown agent": _patch([(20, "10:30", "held")], agent="Unobtainium"),
    "read before spreading": _patch([(20, "09:50", "held")]),
    "dose in kg": HEAD.replace("dose_g_m2", "dose_kg") + "9.25,46.56,20,160,1900,10:00,NaCl,5,550,0.02,10:30,held\n",
    "contradictory ladder": _patch([(20, "10:30", "held"), (40, "10:30", "soft")]),
    "not held or soft": _patch([(20, "10:30", "hard-ish")]),
    "two places": _patch([(20, "10:30", "held")]) + "9.30,46.56,20,160,1900,10:00,NaCl,5,550,40,10:30,held\n",
    "empty file": "",
}


@pytest.mark.parametrize("case", sorted(BAD))
def test_bad_patch_files_exit_2_and_leave_the_plan_byte_identical(tmp_path, case):
    plan, patch = _files(tmp_path, BAD[case])
    before = plan.read_bytes()
    res = _run(plan, patch)
    assert res.exit_code == 2, res.output
    lines = [ln for ln in res.output.splitlines() if ln.strip()]
    assert len(lines) == 1 and lines[0].startswith("error: "), res.output
    assert plan.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["patch.csv", "plan.toml"]  # no temporary left


def test_round_trip_keeps_comments_and_key_order_outside_the_table(tmp_path):
    plan_text = PLAN + "\n[calibration]\n# my own note stays\nagent = \"old\"\n\n[logistics]\n# crews\ncrews = 2\n"
    plan, patch = _files(tmp_path, _patch([(20, "10:30", "soft"), (40, "10:30", "held")]), plan_text)
    assert _run(plan, patch).exit_code == 0
    after = plan.read_text(encoding="utf-8")
    assert _outside_calibration(after) == _outside_calibration(plan_text)
    assert "# my own note stays" in after and 'agent = "NaCl"' in after
    # and again on a plan without the table: the old text is a prefix of the new one
    plan.write_text(PLAN, encoding="utf-8")
    assert _run(plan, patch).exit_code == 0
    again = plan.read_text(encoding="utf-8")
    assert again.startswith(PLAN) and _outside_calibration(again) == PLAN.rstrip("\n")
    assert read_plan(plan).calibration.patch_sha256 and read_plan(plan).calibration.refreeze_share_kind == "interval"


def test_dry_run_prints_the_diff_and_writes_nothing(tmp_path):
    plan, patch = _files(tmp_path, _patch([(20, "10:30", "soft"), (40, "10:30", "held")]))
    res = _run(plan, patch, "--dry-run")
    assert res.exit_code == 0, res.output
    assert "+[calibration]" in res.output and "+refreeze_share_kind = \"interval\"" in res.output
    assert plan.read_text(encoding="utf-8") == PLAN


def test_readings_bound_tau_and_early_soft_readings_say_nothing():
    # 10 g/m² read soft only before τ (20 min): undecided; 40 held at 25 min after soft at 10 min
    d, r, h = [10, 40, 40, 80], [600, 600, 1500, 1500], [False, False, True, True]
    lad = rung_outcomes(d, r, h, tau_s=1200)
    assert lad.undecided_g_m2 == (10.0,) and list(lad.doses_g_m2) == [40.0, 80.0] and lad.held.all()
    assert tau_bounds(d, r, h) == (600.0, 1500.0)
    assert tau_bounds([20], [900], [False]) == (0.0, np.inf)


def _calibrated(**kw):
    s = read_plan_text_settings()
    c = dict(refreeze_share=0.3, refreeze_share_kind="interval", refreeze_share_low=0.2, refreeze_share_high=0.4,
             date="2027-03-17", lon=9.25, lat=46.56, agent="NaCl", wetness="wet", tau_min=20.0,
             brine_exit_temp_c=-2.0)
    c.update(kw)
    return s.replace(calibration=dataclasses.replace(s.calibration, **c))


def read_plan_text_settings():
    from courseplan.settings import PlanSettings, PlanInfo

    return PlanSettings(plan=PlanInfo(date="2027-03-18", agent="NaCl"))


def test_calibration_notes_say_calibrated_or_not_and_flag_mismatches():
    s = read_plan_text_settings()
    assert calibration_notes(s)[0].startswith("not calibrated")
    # the free-text note never makes a plan calibrated
    noted = s.replace(dosing=dataclasses.replace(s.dosing, calibrated="2027-03-17 at the start ramp"))
    assert calibration_notes(noted)[0].startswith("not calibrated")
    ok = calibration_notes(_calibrated(), wetness=["wet"])
    assert len(ok) == 1 and ok[0].startswith("calibrated on 2027-03-17 at 46.56000 N 9.25000 E (k_f 0.30")
    far = calibration_notes(_calibrated(date="2027-03-10", agent="CaCl2", wetness="moist"), wetness=["wet"])
    assert any("another day" in n for n in far) and any("another agent" in n for n in far)
    assert any("other snow" in n for n in far)
    assert calibrated_refreeze_share(_calibrated()) == (0.3, "test patch of 2027-03-17")
    up = _calibrated(refreeze_share=0.35, refreeze_share_kind="upper bound", refreeze_share_low=0.0,
                     refreeze_share_high=0.35)
    assert calibrated_refreeze_share(up)[0] == 0.35  # the 0.5 setting capped by the bound


def test_the_demo_patch_calibrates_the_demo_plan(tmp_path):
    import shutil
    from pathlib import Path

    src = Path(__file__).resolve().parents[1] / "sample-geodata"
    for f in ("plan.toml", "patch.csv", "forecast.csv", "terrain.tif"):
        shutil.copy(src / f, tmp_path / f)
    res = _run(tmp_path / "plan.toml", tmp_path / "patch.csv", "--dry-run")
    assert res.exit_code == 0, res.output
    assert "k_f = " in res.output and "interval" in res.output and "recorded, not fitted" in res.output
    assert (tmp_path / "plan.toml").read_bytes() == (src / "plan.toml").read_bytes()
