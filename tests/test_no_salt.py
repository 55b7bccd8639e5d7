"""No-salt areas: cut out before zoning, no dose, area reported, drawn and written (issue: zones).

Hand checks on the demo hill: the zones plus the no-salt areas on the course tile the course."""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd
import pyogrio
import pytest
import shapely
from click.testing import CliRunner
from shapely.geometry import LineString

from courseplan.cli.main import main

ROOT = Path(__file__).resolve().parents[1]
PLAN = ROOT / "sample-geodata" / "plan.toml"


@pytest.fixture(scope="module")
def out(tmp_path_factory):
    o = tmp_path_factory.mktemp("ns") / "o"
    res = CliRunner().invoke(main, ["plan", str(PLAN), "--out", str(o)])
    assert res.exit_code == 0, res.output
    return o


def test_no_zone_overlaps_a_no_salt_area_and_together_they_tile_the_course(out):
    zones = gpd.read_file(out / "zones.gpkg", layer="zones")
    ns = gpd.read_file(out / "zones.gpkg", layer="no_salt")
    course = gpd.read_file(out / "zones.gpkg", layer="course").geometry.iloc[0]
    assert set(ns["name"]) == {"finish area", "Ulmenbach stream crossing"}
    blocked = shapely.union_all(ns.geometry.to_numpy())
    assert shapely.union_all(zones.geometry.to_numpy()).intersection(blocked).area < 1e-3 * blocked.area
    together = zones.geometry.area.sum() + blocked.area
    assert together == pytest.approx(course.area, rel=2e-3)


def test_no_salt_area_is_reported_and_drawn(out):
    import json

    s = json.loads((out / "summary.json").read_text())
    ns = pyogrio.read_dataframe(out / "zones.gpkg", layer="no_salt")
    assert s["no_salt_area_m2"] == pytest.approx(ns["area_m2"].sum(), rel=1e-6)
    assert any(n.startswith("no salt on") for n in s["notes"])
    page = (out / "map.html").read_text(encoding="utf-8")
    assert '"nosalt"' in page and "cp-nosalt" in page


def test_a_line_without_a_buffer_is_one_clear_error(tmp_path):
    line = gpd.GeoDataFrame({"name": ["cable"]}, geometry=[LineString([(9.245, 46.555), (9.252, 46.556)])],
                            crs="EPSG:4326")
    line.to_file(tmp_path / "cable.geojson", driver="GeoJSON")
    res = CliRunner().invoke(main, ["plan", str(PLAN), "--set", f'inputs.no_salt=["{tmp_path / "cable.geojson"}"]',
                                    "--set", "inputs.no_salt_buffer_m=[]", "--out", str(tmp_path / "o")])
    assert res.exit_code == 2, res.output
    assert "no buffer is given" in res.output and not (tmp_path / "o").exists()
