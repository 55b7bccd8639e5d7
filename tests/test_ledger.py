"""The venue ledger: one entry per plan version, totals that add up by hand, limits, bad files, the demo."""

from __future__ import annotations

import json
import os
import threading
from pathlib import Path
from types import SimpleNamespace

import pandas as pd
import pytest
from click.testing import CliRunner

from courseplan.cli.main import main
from courseplan.errors import InputError, OutputError
from courseplan.io.ledger import COLUMNS, append_plan, ledger_lock, plan_version, read_ledger, season_totals
from courseplan.settings import Ledger, PlanInfo, PlanSettings

ROOT = Path(__file__).resolve().parents[1]
PLAN = ROOT / "sample-geodata" / "plan.toml"
HEADER = ",".join(COLUMNS)


def fake_result(products, *, date="2027-03-18", name="Test GS", agent="NaCl", area=100.0):
    """A stand-in for PlanResult with only what the ledger reads."""
    n = len(products)
    zones = pd.DataFrame({"zone_id": list(range(1, n + 1)), "area_m2": [area] * n, "product_kg": products,
                          "nitrogen_kg": [0.0] * n, "chloride_kg": [0.6 * p for p in products]})
    return SimpleNamespace(settings=PlanSettings(plan=PlanInfo(name=name, date=date)),
                           agent=SimpleNamespace(name=agent), zones=zones)


def test_same_plan_twice_gives_one_entry(tmp_path):
    led = tmp_path / "ledger.csv"
    first = append_plan(led, fake_result([10.0, 0.0, 5.0]), venue="Testberg")
    again = append_plan(led, fake_result([10.04, 0.0, 4.96]), venue="Testberg")  # same to 0.1 kg
    rows = read_ledger(led).rows
    assert first.written == 2 and again.written == 0 and "already" in again.note
    assert len(rows) == 2 and {r["zone_id"] for r in rows} == {"1", "3"}  # the zone with no product: no row
    assert {r["plan_version"] for r in rows} == {first.version} == {again.version}
    assert rows[0]["venue"] == "Testberg" and rows[0]["source"] == "plan"
    assert led.read_text(encoding="utf-8").splitlines()[0] == HEADER


def test_two_different_plans_give_two_entries(tmp_path):
    led = tmp_path / "ledger.csv"
    a = append_plan(led, fake_result([10.0, 5.0]))
    b = append_plan(led, fake_result([10.0, 5.2]))
    c = append_plan(led, fake_result([10.0, 5.0], date="2027-03-19"))
    assert len({a.version, b.version, c.version}) == 3
    assert len(read_ledger(led).rows) == 6
    # the version is of the summary figures only
    assert plan_version("2027-03-18", "Test GS", "NaCl", [(2, 5.0), (1, 10.0)]) == a.version


def test_two_runs_at_once_do_not_interleave(tmp_path):
    led = tmp_path / "ledger.csv"
    errors = []

    def run(i):
        try:
            append_plan(led, fake_result([1.0 + i, 2.0]))
        except Exception as exc:  # pragma: no cover - shown in the assert
            errors.append(exc)

    threads = [threading.Thread(target=run, args=(i,)) for i in range(4)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert not errors
    led_file = read_ledger(led)
    assert len(led_file.rows) == 8 and len(led_file.versions) == 4
    assert led_file.text.count(HEADER) == 1


def test_a_held_lock_gives_one_clear_error(tmp_path):
    led = tmp_path / "ledger.csv"
    lock = tmp_path / ".ledger.csv.courseplan-lock"
    lock.write_text(str(os.getpid()))  # a live owner
    with pytest.raises(OutputError, match="another courseplan run is writing to the ledger"):
        with ledger_lock(led, wait_s=0.2):
            pass
    assert not led.exists()


SYNTHETIC = f"""{HEADER}
aaaaaaaaaaaa-1,aaaaaaaaaaaa,2027-01-10T06:00:00+00:00,Testberg,2027-01-10,A,NaCl,1,100.0,2.000,0.000,1.200,plan
aaaaaaaaaaaa-2,aaaaaaaaaaaa,2027-01-10T06:00:00+00:00,Testberg,2027-01-10,A,NaCl,2,400.0,4.000,0.000,2.400,plan
bbbbbbbbbbbb-1,bbbbbbbbbbbb,2027-02-01T06:00:00+00:00,Testberg,2027-02-01,B,urea,1,100.0,1.000,0.460,0.000,plan
cccccccccccc-2,cccccccccccc,2027-05-01T06:00:00+00:00,Testberg,2027-05-01,C,NaCl,2,400.0,9.000,0.000,5.000,plan
"""


def test_totals_add_up_by_hand(tmp_path):
    led = tmp_path / "ledger.csv"
    led.write_text(SYNTHETIC, encoding="utf-8")
    rep = season_totals(read_ledger(led).rows, season_from="2027-01-01", season_to="2027-03-31")
    t = rep["totals"]
    assert rep["plans"] == 2 and rep["days"] == 2 and rep["entries"] == 3   # plan C is after the season
    assert t["product"]["kg"] == pytest.approx(7.0)
    assert t["nitrogen"]["kg"] == pytest.approx(0.46) and t["chloride"]["kg"] == pytest.approx(3.6)
    assert rep["treated_area_m2"] == pytest.approx(500.0)
    assert t["product"]["mean_g_m2"] == pytest.approx(14.0)                 # 7000 g / 500 m²
    # zone 1: 2 kg / 100 m² + 1 kg / 100 m² = 30 g/m²; zone 2: 4 kg / 400 m² = 10 g/m²
    assert rep["zones"]["1"]["product_g_m2"] == pytest.approx(30.0)
    assert rep["zones"]["2"]["product_g_m2"] == pytest.approx(10.0)
    assert t["product"]["worst_zone"] == "1" and t["product"]["worst_g_m2"] == pytest.approx(30.0)
    assert t["nitrogen"]["worst_g_m2"] == pytest.approx(4.6)
    assert rep["by_agent"]["NaCl"]["product_kg"] == pytest.approx(6.0)
    urea = {"product_kg": 1.0, "nitrogen_kg": 0.46, "chloride_kg": 0.0, "plans": 1}
    assert rep["by_agent"]["urea"] == pytest.approx(urea)
    whole = season_totals(read_ledger(led).rows)
    assert whole["totals"]["product"]["kg"] == pytest.approx(16.0) and whole["plans"] == 3


def test_a_limit_exceeded_is_reported_and_exit_is_0(tmp_path):
    led = tmp_path / "ledger.csv"
    led.write_text(SYNTHETIC, encoding="utf-8")
    plan = tmp_path / "limits.toml"
    plan.write_text("[ledger]\nmax_product_kg = 5.0\nmax_product_g_m2 = 50.0\n", encoding="utf-8")
    rep = season_totals(read_ledger(led).rows, season_to="2027-03-31",
                        limits=Ledger(max_product_kg=5.0, max_product_g_m2=50.0))
    by_key = {lim["key"]: lim for lim in rep["limits"]}
    assert by_key["max_product_kg"]["over"] and by_key["max_product_kg"]["share_pct"] == pytest.approx(140.0)
    per_area = by_key["max_product_g_m2"]
    assert not per_area["over"] and per_area["share_pct"] == pytest.approx(60.0)

    args = ["ledger", str(led), "--season-from", "2027-01-01", "--season-to", "2027-03-31",
            "--limits", str(plan)]
    res = CliRunner().invoke(main, args)
    assert res.exit_code == 0, res.output
    lines = res.output.splitlines()
    assert all(len(ln) <= 80 for ln in lines), [ln for ln in lines if len(ln) > 80]
    kg_line = next(ln for ln in lines if ln.startswith("product kg"))
    area_line = next(ln for ln in lines if ln.startswith("product g/m²"))
    assert kg_line.endswith("over") and "140.0 %" in kg_line
    assert "over" not in area_line and "60.0 %" in area_line

    res = CliRunner().invoke(main, [*args, "--json"])
    assert res.exit_code == 0, res.output
    doc = json.loads(res.stdout)
    assert doc["totals"]["product"]["kg"] == pytest.approx(7.0)
    assert [lim["over"] for lim in doc["limits"]] == [True, False]


@pytest.mark.parametrize("bad, words", [
    ("aaaaaaaaaaaa-1,aaaaaaaaaaaa,x,T,2027-01-10,A,NaCl,1,100.0,lots,0,0,plan", "line 2: product_kg 'lots'"),
    ("aaaaaaaaaaaa-1,aaaaaaaaaaaa,x,T,2027-01-10,A,NaCl,1,100.0,2.0,0,0", "line 2: 12 fields instead of 13"),
    ("aaaaaaaaaaaa-1,aaaaaaaaaaaa,x,T,10.01.2027,A,NaCl,1,100.0,2.0,0,0,plan", "is not YYYY-MM-DD"),
    ("aaaaaaaaaaaa-1,aaaaaaaaaaaa,x,T,2027-01-10,A,NaCl,1,0,2.0,0,0,plan", "area_m2 0.0 is not a positive"),
])
def test_a_malformed_ledger_is_one_line_exit_2_and_left_untouched(tmp_path, bad, words):
    led = tmp_path / "ledger.csv"
    led.write_text(f"{HEADER}\n{bad}\n", encoding="utf-8")
    before = led.read_bytes()
    res = CliRunner().invoke(main, ["ledger", str(led)])
    assert res.exit_code == 2, res.output
    err = [ln for ln in res.output.splitlines() if ln.startswith("error:")]
    assert len(err) == 1 and words in err[0], res.output
    with pytest.raises(InputError):
        append_plan(led, fake_result([1.0]))
    assert led.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["ledger.csv"]  # no lock or temporary file left


def test_a_file_that_is_not_a_ledger_is_refused(tmp_path):
    led = tmp_path / "ledger.csv"
    led.write_text("zone,kg\n1,2\n", encoding="utf-8")
    res = CliRunner().invoke(main, ["ledger", str(led)])
    assert res.exit_code == 2 and "not a courseplan ledger" in res.output


def _demo_plan(tmp_path: Path, ledger_table: str) -> Path:
    body = PLAN.read_text(encoding="utf-8")
    for key in ("course", "sun", "dem", "observations", "forecast", "centreline", "markers"):
        body = body.replace(f'{key} = "', f'{key} = "{ROOT / "sample-geodata"}/')
    body = body.replace('"no-salt-', f'"{ROOT / "sample-geodata"}/no-salt-')
    plan = tmp_path / "plan.toml"
    plan.write_text(body + "\n[ledger]\n" + ledger_table, encoding="utf-8")
    return plan


def test_api_plan_on_the_demo_writes_the_ledger_once(tmp_path):
    from courseplan.api import plan

    (tmp_path / "venue").mkdir()
    plan_file = _demo_plan(tmp_path, 'file = "venue/ledger.csv"\nvenue = "Ulmenkar"\n')
    result = plan(plan_file, tmp_path / "out")
    led = tmp_path / "venue" / "ledger.csv"
    rows = read_ledger(led).rows
    tot = result.totals()
    assert len(rows) == tot["treated_zone_count"]
    assert sum(r["product_kg"] for r in rows) == pytest.approx(tot["total_product_kg"], abs=0.01)
    assert sum(r["chloride_kg"] for r in rows) == pytest.approx(tot["chloride_kg"], abs=0.01)
    assert {r["date"] for r in rows} == {"2027-03-18"} and {r["venue"] for r in rows} == {"Ulmenkar"}
    assert any(n.startswith("ledger:") and "appended" in n for n in result.notes)
    before = led.read_bytes()
    again = plan(plan_file, tmp_path / "out2")
    assert any("already in" in n for n in again.notes)
    assert led.read_bytes() == before


def test_a_malformed_ledger_stops_the_plan_before_anything_is_written(tmp_path):
    plan_file = _demo_plan(tmp_path, 'file = "ledger.csv"\n')
    led = tmp_path / "ledger.csv"
    led.write_text("not,a,ledger\n", encoding="utf-8")
    res = CliRunner().invoke(main, ["plan", str(plan_file), "--out", str(tmp_path / "out")])
    assert res.exit_code == 2, res.output
    err = [ln for ln in res.output.splitlines() if ln.startswith("error:")]
    assert len(err) == 1 and "ledger" in err[0]
    assert not (tmp_path / "out").exists() and led.read_text(encoding="utf-8") == "not,a,ledger\n"


def test_a_spreadsheet_ledger_with_semicolons_is_read_and_appended_in_kind(tmp_path):
    led = tmp_path / "ledger.csv"
    semi = SYNTHETIC.replace(",", ";")
    semi = "\n".join(";".join(c.replace(".", ",") if c[:1].isdigit() and c.count(".") == 1 else c
                              for c in ln.split(";")) for ln in semi.splitlines()) + "\n"
    led.write_text(semi, encoding="utf-8-sig")
    assert season_totals(read_ledger(led).rows)["totals"]["product"]["kg"] == pytest.approx(16.0)
    append_plan(led, fake_result([2.5]))
    text = led.read_text(encoding="utf-8")
    assert text.startswith(semi) and text.splitlines()[-1].endswith(";2,500;0,000;1,500;plan")
    assert season_totals(read_ledger(led).rows)["totals"]["product"]["kg"] == pytest.approx(18.5)


def test_spread_records_replace_that_days_plan_in_the_season_totals():
    # hand arithmetic: the morning plan said 10 + 20 kg; the crews report 12 kg spread on zone 1 only
    from courseplan.io.ledger import SPREAD_SOURCE, season_totals

    base = dict(venue="", agent="NaCl", area_m2=1000.0, nitrogen_kg=0.0, chloride_kg=0.0, plan_version="v",
                entry_id="e", written_at="")
    rows = [dict(base, date="2027-03-18", plan="GS", zone_id="1", product_kg=10.0, source="plan"),
            dict(base, date="2027-03-18", plan="GS", zone_id="2", product_kg=20.0, source="plan"),
            dict(base, date="2027-03-18", plan="GS", zone_id="1", product_kg=12.0, source=SPREAD_SOURCE),
            dict(base, date="2027-03-19", plan="GS", zone_id="1", product_kg=5.0, source="plan")]
    t = season_totals(rows)
    assert t["totals"]["product"]["kg"] == pytest.approx(12.0 + 5.0)
