"""The GeoPackage opens ready: a default style in ``layer_styles``, booleans as booleans, ISO times.

Reference: the GeoPackage ``layer_styles`` extension table as desktop GIS reads it (columns
f_table_catalog … update_time), read back here with :mod:`sqlite3` and pyogrio; the SLD is parsed
as XML (OGC Symbology Encoding 1.1 namespaces).
"""

from __future__ import annotations

import sqlite3
import xml.etree.ElementTree as ET
from datetime import datetime
from pathlib import Path

import pyogrio
import pytest

from courseplan.render.gpkg_style import DOSE_CLASSES, zones_qml, zones_sld

ROOT = Path(__file__).resolve().parents[1]
COLUMNS = ["f_table_catalog", "f_table_schema", "f_table_name", "f_geometry_column", "styleName", "styleQML",
           "styleSLD", "useAsDefault", "description", "owner", "ui", "update_time"]


@pytest.fixture(scope="module")
def gpkg(tmp_path_factory):
    from courseplan.io.loader import load_inputs
    from courseplan.io.outputs import write_gpkg
    from courseplan.io.planfile import read_plan
    from courseplan.pipeline import run_plan

    s = read_plan(ROOT / "sample-geodata" / "plan.toml")
    result = run_plan(s, load_inputs(s))
    path = tmp_path_factory.mktemp("gpkg") / "zones.gpkg"
    write_gpkg(path, result)
    return path, result


def test_layer_styles_table_holds_the_default_zones_style(gpkg):
    path, _ = gpkg
    con = sqlite3.connect(path)
    try:
        cols = [r[1] for r in con.execute("PRAGMA table_info(layer_styles)")]
        assert set(COLUMNS) <= set(cols)
        row = con.execute("SELECT f_table_name, f_geometry_column, useAsDefault, styleSLD, styleQML, update_time "
                          "FROM layer_styles").fetchall()
        geom_col = con.execute("SELECT column_name FROM gpkg_geometry_columns WHERE table_name = 'zones'").fetchone()[0]
        registered = con.execute("SELECT data_type FROM gpkg_contents WHERE table_name = 'layer_styles'").fetchone()
    finally:
        con.close()
    name, gcol, default, sld, qml, when = next(r for r in row if r[0] == "zones")
    assert (name, gcol, default) == ("zones", geom_col, 1)
    assert registered == ("attributes",)
    datetime.fromisoformat(when)  # ISO 8601 text
    root = ET.fromstring(sld.encode())
    se = "{http://www.opengis.net/se}"
    titles = [t.text for t in root.iter(f"{se}Title")]
    assert titles[:len(DOSE_CLASSES)] == [t for *_, t in DOSE_CLASSES]
    assert "dose_g_m2" in sld and "<ogc:PropertyName>label</ogc:PropertyName>" in sld
    ET.fromstring(qml.split("\n", 1)[1].encode())  # well-formed after the DOCTYPE line
    assert "&quot;dose_g_m2&quot; &gt; 20 AND" in qml and 'fieldName="label"' in qml


def test_styles_are_well_formed_and_the_classes_are_contiguous():
    ET.fromstring(zones_sld().encode())
    assert zones_qml().count("<rule ") == len(DOSE_CLASSES) + 1   # the classes and "no salt"
    for (_, hi, _, _), (lo, _, _, _) in zip(DOSE_CLASSES, DOSE_CLASSES[1:], strict=False):
        assert hi == lo
    assert DOSE_CLASSES[0][0] == 0 and DOSE_CLASSES[-1][1] is None
    assert DOSE_CLASSES[-1][3] == "> 150 g/m²"


def test_booleans_are_booleans_and_labels_are_written(gpkg):
    path, result = gpkg
    zones = pyogrio.read_dataframe(path, layer="zones")
    bools = [c for c in result.zones.columns if str(result.zones[c].dtype) == "bool"]
    assert bools  # obs_stale, lwc_from_class, lwc_sampled
    for c in bools:
        assert str(zones[c].dtype) == "bool", c
    assert list(zones["label"]) == list(result.zones["label"])
    con = sqlite3.connect(path)
    try:
        types = {r[1]: r[2] for r in con.execute("PRAGMA table_info(zones)")}
    finally:
        con.close()
    assert all(types[c] == "BOOLEAN" for c in bools)
    passes = pyogrio.read_dataframe(path, layer="passes")
    for v in passes["spread_at"]:
        datetime.fromisoformat(v)
    if result.observations is not None and len(result.observations):
        obs = pyogrio.read_dataframe(path, layer="observations")
        for v in obs["time"]:
            assert "T" in v
            datetime.fromisoformat(v)


def test_every_map_layer_has_a_default_style_and_start_finish_is_a_layer(gpkg):
    path, result = gpkg
    con = sqlite3.connect(path)
    try:
        rows = dict(con.execute("SELECT f_table_name, styleSLD FROM layer_styles WHERE useAsDefault").fetchall())
    finally:
        con.close()
    assert {"zones", "no_salt", "crews", "depots", "start_finish"} <= set(rows)
    for layer, sld in rows.items():
        ET.fromstring(sld.encode())
        assert f"<se:Name>{layer}</se:Name>" in sld
    assert "shape://times" in rows["no_salt"]      # cross-hatched, as on the map and the sheets
    sf = pyogrio.read_dataframe(path, layer="start_finish")
    assert list(sf["name"]) == ["start", "finish"]
    assert (sf.geometry.x.iloc[0], sf.geometry.y.iloc[0]) == pytest.approx(result.start_xy)


def test_zone_colours_in_the_gis_are_the_map_colours():
    from courseplan.render.webmap import DOSE_COLOURS, dose_colour

    assert [c for _, _, c, _ in DOSE_CLASSES] == list(DOSE_COLOURS)
    for lo, hi, c, _ in DOSE_CLASSES:  # a dose just inside each class gets the same colour on the map
        assert dose_colour(lo + 0.01) == c
        if hi is not None:
            assert dose_colour(hi) == c


def test_the_settings_are_toml_that_reads_back_to_the_same_plan(gpkg, tmp_path):
    import tomllib

    from courseplan.io.planfile import read_plan

    path, result = gpkg
    text = pyogrio.read_dataframe(path, layer="plan_file")["toml"].iloc[0]
    tomllib.loads(text)
    (tmp_path / "again.toml").write_text(text, encoding="utf-8")
    assert read_plan(tmp_path / "again.toml").to_dict() == result.settings.to_dict()
