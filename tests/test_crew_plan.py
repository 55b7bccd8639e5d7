"""The crew plan can be done, and the sheets say what the GeoPackage says (issue: crews and sheets).

Checks against hand arithmetic and against the plan's own outputs; spreading rates are common
practice, no source (docs/logistics.md)."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import pandas as pd
import pyogrio
import pytest
from click.testing import CliRunner
from pypdf import PdfReader

from courseplan.cli.main import main

ROOT = Path(__file__).resolve().parents[1]
PLAN = ROOT / "sample-geodata" / "plan.toml"


def _run(**logistics):
    from courseplan.io.loader import load_inputs
    from courseplan.io.planfile import read_plan
    from courseplan.pipeline import run_plan

    s = read_plan(PLAN)
    if logistics:
        s = s.replace(logistics=dataclasses.replace(s.logistics, **logistics))
    return run_plan(s, load_inputs(s))


@pytest.fixture(scope="module")
def demo():
    return _run()


def test_demo_crews_finish_every_pass_before_its_deadline(demo):
    from courseplan.schedule import pass_slots

    assert demo.shortfall is None
    s = demo.settings
    slots = {sl.label: sl for sl in pass_slots(demo.schedule, s.dosing.tau_min)}
    earliest = pd.Timestamp(f"{s.plan.date} {s.logistics.earliest_start}", tz=s.plan.timezone)
    w = demo.logistics.work
    assert len(w) == len(demo.passes)
    for r in w.itertuples():
        sl = slots[r.slot]
        assert r.end <= sl.deadline - pd.Timedelta(minutes=s.dosing.tau_min) + pd.Timedelta(seconds=1)
        assert r.start >= (sl.opens if sl.opens is not None else earliest) - pd.Timedelta(seconds=1)
    # one crew never does two things at once
    for _, g in w.groupby("crew"):
        g = g.sort_values("start")
        assert (g["start"].iloc[1:].to_numpy() >= g["end"].iloc[:-1].to_numpy() - pd.Timedelta(seconds=1)).all()


def test_fewer_crews_fall_short_with_the_documented_exit_and_the_right_count(tmp_path):
    res = CliRunner().invoke(main, ["plan", str(PLAN), "--crews", "2", "--out", str(tmp_path / "o"), "--json"])
    assert res.exit_code == 3, res.output           # docs/logistics.md: exit 3, outputs written
    assert (tmp_path / "o" / "summary.json").exists()
    import json

    sf = json.loads((tmp_path / "o" / "summary.json").read_text())["shortfall"]
    assert sf["crews"] == 2 and sf["crews_needed"] and sf["crews_needed"] > 2
    assert _run(crews=sf["crews_needed"]).shortfall is None      # that many crews do it
    check = CliRunner().invoke(main, ["check", str(PLAN), "--crews", "2"])
    assert check.exit_code == 3 and "problem:" in check.output


def test_sheet_times_equal_the_pass_times_in_the_geopackage(tmp_path):
    out = tmp_path / "o"
    res = CliRunner().invoke(main, ["plan", str(PLAN), "--out", str(out)])
    assert res.exit_code == 0, res.output
    passes = pyogrio.read_dataframe(out / "zones.gpkg", layer="passes")
    text = " ".join(p.extract_text() for p in PdfReader(out / "crews.pdf").pages)
    for t in passes["spread_at"]:
        assert f"– {pd.Timestamp(t).strftime('%H:%M')}" in text, t
    depots = pyogrio.read_dataframe(out / "zones.gpkg", layer="depots")
    assert len(depots) == len(pyogrio.read_dataframe(out / "zones.gpkg", layer="crews"))


def test_order_packages_add_up_to_what_is_handed_out(demo):
    o = demo.logistics.order
    assert sum(p.count * p.size_kg for p in o.packages) == pytest.approx(o.handed_out_kg)
    assert o.bags_handed_out == int(demo.logistics.zones["bags"].sum())
    assert o.bags_handed_out == int(demo.logistics.depots["bags"].sum())
    assert o.bags_handed_out == int(demo.logistics.work["bags"].sum())
    assert o.handed_out_kg >= o.needed_kg - 1e-6           # P90 + margin once, rounded up to bags


def test_names_print_with_their_own_letters(tmp_path):
    name = "Ostrava–Łódź Übungshang ěščř"
    res = CliRunner().invoke(main, ["plan", str(PLAN), "--set", f'plan.name="{name}"', "--out", str(tmp_path / "o")])
    assert res.exit_code == 0, res.output
    for f in ("crews.pdf", "order.pdf"):
        text = PdfReader(tmp_path / "o" / f).pages[0].extract_text()
        assert name in text, (f, text[:200])
