"""What the commands print: 80 columns, no cut numbers, the per-zone table on demand, ``--json``, NO_COLOR."""

from __future__ import annotations

import json
import os
import re
import subprocess
import sys
from pathlib import Path

import pytest
from click.testing import CliRunner

from courseplan.cli.main import main

ROOT = Path(__file__).resolve().parents[1]
PLAN = ROOT / "sample-geodata" / "plan.toml"
ANSI = re.compile(r"\x1b\[[0-9;?]*[A-Za-z]")
NUMBER = re.compile(r"(?<![\w.,])\d[\d,]*(?:\.\d+)?(?![\w])")


def invoke(args, columns=80, **env):
    return CliRunner().invoke(main, [str(a) for a in args], env={"COLUMNS": str(columns), **env})


def assert_narrow(text, width=80):
    long = [ln for ln in text.splitlines() if len(ln) > width]
    assert not long, long


def whole(number: str, text: str) -> bool:
    """*number* appears in *text* with no digit, comma or point glued to either side."""
    return re.search(rf"(?<![\d,.]){re.escape(number)}(?![\d,]|\.\d)", text) is not None


@pytest.fixture(scope="module")
def plan_80(tmp_path_factory):
    out = tmp_path_factory.mktemp("p80") / "o"
    res = invoke(["plan", PLAN, "--out", out])
    assert res.exit_code == 0, res.output
    return res, json.loads((out / "summary.json").read_text())


def test_plan_summary_fits_80_columns_and_keeps_every_number(plan_80):
    res, s = plan_80
    text = res.stdout
    assert_narrow(text)
    assert "product:" in text and "zones —" not in text  # no per-zone table unasked at 80 columns
    o = s["order"]
    expected = [f"{s['total_product_kg']:,.0f}", f"{s['total_product_p90_kg']:,.0f}", f"{o['order_kg']:,.0f}",
                f"{o['tonnes']:.2f}", f"{s['treated_zone_count']}", f"{s['zone_count']}",
                f"{s['course_area_m2']:,.0f}", f"{s['chloride_kg']:,.1f}"]
    expected += [f"{p['count']}" for p in o["packages"] if p["count"]]
    for n in expected:
        assert whole(n, text), n
    assert re.search(rf"\b{s['crews']['count']} crews\b", text)
    # every number in every note survives the wrapping whole
    flat = " ".join(ln.strip() for ln in text.splitlines())
    for verdict, count in s["verdicts"].items():
        assert f"{verdict} {count}" in flat
    for note in s["notes"]:
        for n in NUMBER.findall(note):
            assert whole(n, flat), (n, note)
    assert "caution:" in text and "note:" in text
    assert "planning" not in res.stdout  # the progress line goes to stderr


def test_zones_flag_prints_a_table_within_80_columns(tmp_path):
    res = invoke(["plan", PLAN, "--out", tmp_path / "o", "--zone-table"])
    assert res.exit_code == 0, res.output
    text = res.stdout
    assert_narrow(text)
    s = json.loads((tmp_path / "o" / "summary.json").read_text())
    lines = text.splitlines()
    for z in s["zones"]:
        row = next(ln for ln in lines if re.match(rf"\s*{z['zone_id']} ", ln))
        for n in (f"{z['area_m2']:,.0f}", f"{z['dose_g_m2']:.0f}", f"{z['dose_p90_g_m2']:.0f}",
                  f"{z['product_kg']:,.0f}", f"{z['lwc_pct']:.1f}", z["section"]):
            assert whole(n, row), (n, row)


def test_wide_terminal_shows_the_table_unasked(tmp_path):
    res = invoke(["plan", PLAN, "--out", tmp_path / "o"], columns=160)
    assert res.exit_code == 0, res.output
    assert "zones —" in res.stdout and "treat-in-passes" not in res.stdout.split("product:")[0]
    assert_narrow(res.stdout, 160)


def test_plan_json_is_one_document_equal_to_summary(tmp_path):
    res = invoke(["plan", PLAN, "--out", tmp_path / "o", "--json"])
    assert res.exit_code == 0, res.output
    doc = json.loads(res.stdout)  # nothing else on stdout
    assert doc == json.loads((tmp_path / "o" / "summary.json").read_text())


def test_check_json_ok_and_problems(tmp_path):
    res = invoke(["check", PLAN, "--json"])
    assert res.exit_code == 0, res.output
    doc = json.loads(res.stdout)
    assert doc["ok"] is True and doc["problems"] == [] and isinstance(doc["warnings"], list)
    assert doc["zones"] > 0
    bad = tmp_path / "bad.toml"
    bad.write_text('[dosing]\ndepht_m = 0.05\n')
    res = invoke(["check", bad, "--json"])
    assert res.exit_code == 2
    doc = json.loads(res.stdout)
    assert doc["ok"] is False and any("depth_m" in p for p in doc["problems"])
    assert "error:" in res.stderr and "error:" not in res.stdout


def test_agents_narrow_at_80_and_wide_on_request():
    res = invoke(["agents"])
    assert res.exit_code == 0, res.output
    assert_narrow(res.stdout)
    assert "NH4NO3" in res.stdout and "-21.1 / 23.3" in res.stdout and "ΔsolH" not in res.stdout
    res = invoke(["agents", "--wide"])
    assert res.exit_code == 0 and "ΔsolH" in res.stdout and "58.443" in res.stdout
    assert "…" not in res.stdout
    res = invoke(["agents", "--json"])
    assert json.loads(res.stdout)["NaCl"]["eutectic_c"] == -21.12


def test_sun_json(tmp_path):
    import numpy as np
    import rasterio
    from affine import Affine

    dem = tmp_path / "dem.tif"
    with rasterio.open(dem, "w", driver="GTiff", width=8, height=8, count=1, dtype="float32",
                       crs="EPSG:32632", transform=Affine(10.0, 0, 499_900.0, 0, -10.0, 5_150_100.0)) as ds:
        ds.write(np.full((8, 8), 1500.0, dtype="float32"), 1)
    res = invoke(["sun", dem, "--date", "2025-03-15", "--start", "09:00", "--end", "10:00",
                  "--timezone", "Europe/Zurich", "--out", tmp_path / "s.tif", "--json"])
    assert res.exit_code == 0, res.output
    doc = json.loads(res.stdout)
    assert doc["rows"] == 8 and doc["steps"] >= 4 and doc["path"].endswith("s.tif")


def _on_pty(args, columns, env_extra=()):
    """Run the CLI with stdout on a pseudo-terminal of *columns* columns; return its stdout text."""
    import fcntl
    import pty
    import struct
    import termios

    master, slave = pty.openpty()
    fcntl.ioctl(slave, termios.TIOCSWINSZ, struct.pack("HHHH", 50, columns, 0, 0))
    env = {k: v for k, v in os.environ.items() if k not in ("COLUMNS", "LINES", "NO_COLOR", "FORCE_COLOR")}
    env.update(dict(env_extra), PYTHONPATH=str(ROOT), TERM="xterm-256color")
    cmd = [sys.executable, "-c", "from courseplan.cli.main import main; main()", *map(str, args)]
    proc = subprocess.Popen(cmd, stdout=slave, stderr=subprocess.DEVNULL, stdin=subprocess.DEVNULL, env=env)
    os.close(slave)
    chunks = []
    while True:
        try:
            data = os.read(master, 65536)
        except OSError:
            break
        if not data:
            break
        chunks.append(data)
    proc.wait(timeout=120)
    os.close(master)
    assert proc.returncode == 0
    return b"".join(chunks).decode("utf-8", "replace").replace("\r\n", "\n")


@pytest.mark.skipif(sys.platform == "win32", reason="needs a POSIX pseudo-terminal")
def test_real_terminal_of_80_columns_and_no_color(tmp_path):
    raw = _on_pty(["plan", PLAN, "--out", tmp_path / "o"], 80)
    colour = re.compile(r"\x1b\[[0-9;]*3[0-9](;[0-9]+)*m")
    assert colour.search(raw)  # a terminal gets colour (the note prefixes) ...
    assert_narrow(ANSI.sub("", raw))
    assert "zones —" not in raw
    raw = _on_pty(["plan", PLAN, "--out", tmp_path / "o2", "--zone-table"], 80, {"NO_COLOR": "1"})
    assert not colour.search(raw)  # ... but none with NO_COLOR
    plain = ANSI.sub("", raw)
    assert_narrow(plain)
    assert "zones —" in plain
    raw = _on_pty(["agents"], 80)
    assert_narrow(ANSI.sub("", raw))
