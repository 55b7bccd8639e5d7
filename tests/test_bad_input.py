"""Bad input at the command line: one clear line, exit code 2, no traceback, no output folder.

Every case builds a tiny input in ``tmp_path``: a 200 m × 300 m course in UTM 32N (EPSG:32632)
and a 5 m sun raster around it (values 0–1, a fraction), then spoils one thing.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from courseplan.cli.main import main

X0, Y0 = 500_000.0, 5_150_000.0  # metres in EPSG:32632
SQUARE = [[X0, Y0], [X0 + 200, Y0], [X0 + 200, Y0 + 300], [X0, Y0 + 300], [X0, Y0]]
CRS_32632 = {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::32632"}}
DATE = "2027-03-18"


def geojson(path: Path, features: list[dict], crs: dict | None = CRS_32632) -> Path:
    fc: dict = {"type": "FeatureCollection", "features": features}
    if crs is not None:
        fc["crs"] = crs
    path.write_text(json.dumps(fc))
    return path


def feature(geometry: dict, name: str | None = "c") -> dict:
    return {"type": "Feature", "properties": {"name": name} if name else {}, "geometry": geometry}


def polygon(ring) -> dict:
    return {"type": "Polygon", "coordinates": [ring]}


def sun_tif(path: Path, *, values: np.ndarray | None = None, crs: str | None = "EPSG:32632",
            x0: float = X0 - 50, y0: float = Y0 + 350, nodata: float = -9999.0) -> Path:
    import rasterio
    from rasterio.transform import from_origin

    a = values if values is not None else np.tile(np.linspace(0, 1, 60, dtype=np.float32), (80, 1))
    kw = dict(driver="GTiff", height=a.shape[0], width=a.shape[1], count=1, dtype="float32",
              transform=from_origin(x0, y0, 5, 5), nodata=nodata)
    if crs is not None:
        kw["crs"] = crs
    with rasterio.open(path, "w", **kw) as ds:
        ds.write(a.astype(np.float32), 1)
    return path


@pytest.fixture
def good(tmp_path):
    """Make a valid course and sun raster; ``good.args()`` gives the command line."""

    class Good:
        course = geojson(tmp_path / "course.geojson", [feature(polygon(SQUARE))])
        sun = sun_tif(tmp_path / "sun.tif")
        out = tmp_path / "out"

        def args(self, *extra, course=None, sun=None):
            return ["plan", "--course", str(course or self.course), "--sun", str(sun or self.sun),
                    "--date", DATE, *extra, "--out", str(self.out)]

    return Good()


def run(args):
    return CliRunner().invoke(main, [str(a) for a in args])


def refused(res, out: Path, *words: str) -> str:
    """Assert the one-line refusal: exit 2, the key words, no traceback, no output folder."""
    text = res.output
    assert res.exit_code == 2, text
    for w in words:
        assert w in text, (w, text)
    assert "Traceback" not in text
    assert "internal error" not in text
    assert not out.exists()
    assert not [p for p in out.parent.iterdir() if p.name.startswith(f".{out.name}.")]
    errors = [ln for ln in text.splitlines() if ln.startswith("error:")]
    assert errors, text
    return text


def test_valid_tiny_inputs_plan(good):
    # the baseline each case below spoils in one place
    res = run(good.args())
    assert res.exit_code == 0, res.output
    assert (good.out / "summary.json").exists()


# ---------------------------------------------------------------- missing or unreadable files

def test_missing_course(good, tmp_path):
    refused(run(good.args(course=tmp_path / "nope.geojson")), good.out, "course file not found",
            "nope.geojson", "check the path")


def test_course_is_a_folder(good, tmp_path):
    (tmp_path / "dir.geojson").mkdir()
    refused(run(good.args(course=tmp_path / "dir.geojson")), good.out, "folder, not a file")


def test_course_not_a_vector_file(good, tmp_path):
    p = tmp_path / "junk.geojson"
    p.write_bytes(b"\x00\x01 this is not GeoJSON {")
    refused(run(good.args(course=p)), good.out, "cannot read the course", "junk.geojson", "GeoJSON")


@pytest.mark.skipif(hasattr(os, "geteuid") and os.geteuid() == 0, reason="root reads any file")
def test_course_unreadable(good):
    good.course.chmod(0)
    try:
        refused(run(good.args()), good.out, "cannot be read", "permissions")
    finally:
        good.course.chmod(0o644)


def test_missing_sun(good, tmp_path):
    refused(run(good.args(sun=tmp_path / "nope.tif")), good.out, "sun file not found", "nope.tif")


def test_sun_not_a_raster(good, tmp_path):
    p = tmp_path / "junk.tif"
    p.write_bytes(b"not a tiff at all")
    refused(run(good.args(sun=p)), good.out, "cannot read the sun raster", "junk.tif", "GeoTIFF")


def test_missing_plan_file(good, tmp_path):
    refused(run(["plan", tmp_path / "nope.toml", "--out", good.out]), good.out, "plan file not found")


def test_missing_observations(good, tmp_path):
    refused(run(good.args("--observations", tmp_path / "nope.csv")), good.out,
            "observations file not found", "nope.csv")


def test_no_course_given(good):
    refused(run(["plan", "--sun", good.sun, "--date", DATE, "--out", good.out]), good.out,
            "no course outline given", "--course")


def test_neither_sun_nor_dem(good):
    refused(run(["plan", "--course", good.course, "--date", DATE, "--out", good.out]), good.out,
            "neither a sun raster nor a DEM", "--sun")


# ---------------------------------------------------------------- course polygon

def test_no_polygon(good, tmp_path):
    p = geojson(tmp_path / "pts.geojson", [feature({"type": "Point", "coordinates": [X0, Y0]})])
    refused(run(good.args(course=p)), good.out, "holds no polygon", "Point", "draw the course outline")


def two_polygons(tmp_path: Path) -> Path:
    features = [feature(polygon(SQUARE), "upper"), feature(polygon(SQUARE), "lower")]
    return geojson(tmp_path / "two.geojson", features)


def test_several_polygons_say_how_to_pick(good, tmp_path):
    p = two_polygons(tmp_path)
    text = refused(run(good.args(course=p)), good.out, "2 polygons", "upper", "lower", "--course-feature")
    assert "course_feature" in text


def test_several_polygons_unknown_pick(good, tmp_path):
    p = two_polygons(tmp_path)
    refused(run(good.args("--course-feature", "middle", course=p)), good.out,
            "no course polygon matches 'middle'", "use one of", "upper")


def test_several_polygons_pick_by_name_works(good, tmp_path):
    p = two_polygons(tmp_path)
    res = run(good.args("--course-feature", "lower", "--quiet", course=p))
    assert res.exit_code == 0, res.output


def test_self_intersecting_polygon_refused(good, tmp_path):
    bowtie = [[X0, Y0], [X0 + 200, Y0 + 300], [X0 + 200, Y0], [X0, Y0 + 300], [X0, Y0]]
    p = geojson(tmp_path / "bowtie.geojson", [feature(polygon(bowtie))])
    refused(run(good.args(course=p)), good.out, "invalid", "Self-intersection", "cannot be repaired",
            "bowtie.geojson", "redraw")


def test_slightly_invalid_polygon_repaired_with_warning(good, tmp_path):
    # a 1 m spike crossing back over the edge: make_valid changes the area by far less than 1 %
    ring = [[X0, Y0], [X0 + 200, Y0], [X0 + 200, Y0 + 300], [X0 + 100, Y0 + 300], [X0 + 101, Y0 + 299],
            [X0 + 101, Y0 + 301], [X0, Y0 + 300], [X0, Y0]]
    p = geojson(tmp_path / "spike.geojson", [feature(polygon(ring))])
    res = run(good.args(course=p))
    assert res.exit_code == 0, res.output
    flat = " ".join(res.output.split())
    assert "spike.geojson" in flat and "was invalid" in flat and "repaired" in flat
    assert "Self-intersection" in flat or "Ring Self-intersection" in flat


def test_zero_area_polygon(good, tmp_path):
    line_ring = [[X0, Y0], [X0 + 100, Y0 + 100], [X0 + 200, Y0 + 200], [X0, Y0]]
    p = geojson(tmp_path / "flat.geojson", [feature(polygon(line_ring))])
    refused(run(good.args(course=p)), good.out, "empty or has zero area", "three distinct corners")


def test_empty_polygon(good, tmp_path):
    p = geojson(tmp_path / "empty.geojson", [feature({"type": "Polygon", "coordinates": []})])
    text = refused(run(good.args(course=p)), good.out, "empty.geojson")
    assert "zero area" in text or "no polygon" in text


def test_course_without_crs(good, tmp_path):
    import geopandas as gpd
    from shapely.geometry import Polygon

    p = tmp_path / "nocrs.shp"
    gpd.GeoDataFrame({"name": ["c"]}, geometry=[Polygon(SQUARE)]).to_file(p)
    assert not p.with_suffix(".prj").exists()
    refused(run(good.args(course=p)), good.out, "has no CRS", "nocrs.shp", "set_crs")


def test_metres_in_a_degree_file(good, tmp_path):
    # GeoJSON without a crs member is WGS84 by definition; these are UTM metres
    p = geojson(tmp_path / "metres.geojson", [feature(polygon(SQUARE))], crs=None)
    refused(run(good.args(course=p)), good.out, "are not degrees", "EPSG:4326", "metres.geojson", "set_crs")


def test_degrees_in_a_metre_file(good, tmp_path):
    ring = [[9.0, 46.0], [9.002, 46.0], [9.002, 46.003], [9.0, 46.003], [9.0, 46.0]]
    p = geojson(tmp_path / "deg.geojson", [feature(polygon(ring))])
    refused(run(good.args(course=p)), good.out, "look like degrees", "EPSG:32632", "EPSG:4326")


# ---------------------------------------------------------------- sun raster

def test_raster_without_crs(good, tmp_path):
    p = sun_tif(tmp_path / "nocrs.tif", crs=None)
    refused(run(good.args(sun=p)), good.out, "sun raster has no CRS", "nocrs.tif", "rio edit-info --crs")


def test_raster_not_overlapping(good, tmp_path):
    p = sun_tif(tmp_path / "far.tif", x0=X0 + 50_000)
    refused(run(good.args(sun=p)), good.out, "does not overlap", "raster extent", "course extent",
            "EPSG:32632")


def test_raster_partly_covering_is_refused_above_threshold(good, tmp_path):
    # the raster stops at the course's mid line: half the course has no data
    a = np.tile(np.linspace(0, 1, 60, dtype=np.float32), (40, 1))
    p = sun_tif(tmp_path / "half.tif", values=a)
    text = refused(run(good.args(sun=p)), good.out, "covers only", "% of the course", "5 % allowed")
    share = float(text.split("(")[1].split("%")[0])
    assert 40 < share < 60


def test_raster_partly_covering_warns_below_threshold(good, tmp_path):
    a = np.tile(np.linspace(0, 1, 60, dtype=np.float32), (40, 1))
    p = sun_tif(tmp_path / "half.tif", values=a)
    res = run(good.args("--set", "inputs.max_uncovered_pct=80", sun=p))
    assert res.exit_code == 0, res.output
    flat = " ".join(res.output.split())
    assert "of the course has no sun data" in flat and "half.tif" in flat


def test_raster_all_nodata_over_course(good, tmp_path):
    p = sun_tif(tmp_path / "nodata.tif", values=np.full((80, 60), -9999.0, dtype=np.float32))
    refused(run(good.args(sun=p)), good.out, "only nodata", "nodata.tif")


def test_raster_values_outside_declared_encoding(good, tmp_path):
    a = np.tile(np.linspace(0, 100, 60, dtype=np.float32), (80, 1))  # percent, declared a fraction
    p = sun_tif(tmp_path / "pct.tif", values=a)
    refused(run(good.args(sun=p)), good.out, "outside the range", "'fraction'", "sun_encoding", "percent")


def test_raster_negative_values_for_percent(good, tmp_path):
    a = np.tile(np.linspace(-50, 50, 60, dtype=np.float32), (80, 1))
    p = sun_tif(tmp_path / "neg.tif", values=a)
    refused(run(good.args("--sun-encoding", "percent", sun=p)), good.out, "outside the range", "'percent'")


# ---------------------------------------------------------------- observations

OBS_HEAD = "obs_id,time,lon,lat,wetness,lwc_pct,snow_temp_c,density_kg_m3\n"


def _lonlat():
    from pyproj import Transformer

    tr = Transformer.from_crs(32632, 4326, always_xy=True)
    return tr.transform(X0 + 100, Y0 + 150)


def obs_csv(path: Path, rows: list[str]) -> Path:
    lon, lat = _lonlat()
    path.write_text(OBS_HEAD + "".join(r.format(lon=lon, lat=lat) + "\n" for r in rows))
    return path


GOOD_ROW = "A,2027-03-18T07:30+01:00,{lon},{lat},wet,4.0,0.0,560"


def test_observations_good_rows_plan(good, tmp_path):
    p = obs_csv(tmp_path / "obs.csv", [GOOD_ROW])
    res = run(good.args("--observations", p, "--quiet"))
    assert res.exit_code == 0, res.output


@pytest.mark.parametrize("row, words", [
    ("B,2027-03-18T07:30+01:00,{lon},{lat},wet,140,0.0,560", ["obs.csv:3", "lwc_pct 140", "0 … 100"]),
    ("B,2027-03-18T07:30+01:00,{lon},{lat},wet,4.0,0.0,990", ["obs.csv:3", "density_kg_m3 990", "ice"]),
    ("B,2027-03-18T07:30+01:00,{lon},{lat},dry,,0.3,400", ["obs.csv:3", "snow_temp_c 0.3", "positive",
                                                           "dry"]),
    ("B,yesterday morning,{lon},{lat},wet,4.0,0.0,560", ["obs.csv:3", "time 'yesterday morning'",
                                                         "ISO 8601"]),
    ("B,2027-03-18T07:30+01:00,{lon},{lat},damp,,0.0,560", ["obs.csv:3", "wetness 'damp'", "very-wet"]),
    ("B,2027-03-18T07:30+01:00,{lon},{lat},wet,four,0.0,560", ["obs.csv:3", "lwc_pct 'four'",
                                                               "not a number"]),
    ("B,2027-03-18T07:30+01:00,,,wet,4.0,0.0,560", ["obs.csv:3", "position is missing"]),
    ("B,2027-03-18T07:30+01:00,{lon},{lat},wet,4.0,-80,560", ["obs.csv:3", "snow_temp_c -80"]),
])
def test_bad_observation_row_names_its_line(good, tmp_path, row, words):
    p = obs_csv(tmp_path / "obs.csv", [GOOD_ROW, row])
    text = refused(run(good.args("--observations", p)), good.out, *words)
    assert "obs.csv:2" not in text  # the good row is not blamed


def test_every_bad_observation_row_listed_at_once(good, tmp_path):
    p = obs_csv(tmp_path / "obs.csv", [
        GOOD_ROW,
        "B,2027-03-18T07:30+01:00,{lon},{lat},wet,140,0.0,560",
        "C,2027-03-18T07:30+01:00,{lon},{lat},wet,4.0,0.0,1000",
        "D,2027-03-18T07:30+01:00,{lon},{lat},dry,,0.4,400",
        "E,noon-ish,{lon},{lat},wet,4.0,0.0,560",
    ])
    text = refused(run(good.args("--observations", p)), good.out,
                   "obs.csv:3", "obs.csv:4", "obs.csv:5", "obs.csv:6")
    lines = [ln for ln in text.splitlines() if ln.startswith("error:")]
    assert len(lines) == 4


def test_observations_without_position_columns(good, tmp_path):
    p = tmp_path / "obs.csv"
    p.write_text("time,wetness\n2027-03-18T07:30+01:00,wet\n")
    refused(run(good.args("--observations", p)), good.out, "no position columns", "lon and lat")


def test_observations_xy_without_crs(good, tmp_path):
    p = tmp_path / "obs.csv"
    p.write_text(f"time,x,y,wetness\n2027-03-18T07:30+01:00,{X0 + 100},{Y0 + 100},wet\n")
    refused(run(good.args("--observations", p)), good.out, "no CRS is given", "observations_crs")


def test_observations_header_only(good, tmp_path):
    p = obs_csv(tmp_path / "obs.csv", [])
    refused(run(good.args("--observations", p)), good.out, "holds no rows")


# ---------------------------------------------------------------- plan file and settings

def plan_file(tmp_path: Path, good, text: str) -> Path:
    p = tmp_path / "plan.toml"
    p.write_text(f'[plan]\ndate = "{DATE}"\n[inputs]\n'
                 f'course = "{good.course.name}"\nsun = "{good.sun.name}"\n'
                 + text)
    return p


def test_plan_file_baseline(good, tmp_path):
    res = run(["plan", plan_file(tmp_path, good, ""), "--out", good.out, "--quiet"])
    assert res.exit_code == 0, res.output


@pytest.mark.parametrize("text, words", [
    ("[dosing]\ndepht_m = 0.05\n", ["unknown key 'depht_m'", "did you mean 'depth_m'?", "[dosing]"]),
    ("[dosng]\ndepth_m = 0.05\n", ["unknown table [dosng]", "did you mean 'dosing'?"]),
    ("[logistics]\ncrew = 3\n", ["unknown key 'crew'", "did you mean 'crews'?"]),
    ('[dosing]\ndepth_m = "deep"\n', ["depth_m", "expected a number", "'deep'"]),
    ("[logistics]\ncrews = 2.5\n", ["crews", "expected a whole number"]),
    ('[zoning]\nexposure_labels = "shade"\n', ["exposure_labels", "expected a list"]),
    ("[dosing]\ndepth_m = -0.04\n", ["depth_m", "outside the accepted range", "0.005 to 0.5 m"]),
    ("[dosing]\nsamples = 1000000000\n", ["samples", "outside the accepted range"]),
    ("[logistics]\ncrews = 0\n", ["crews", "outside the accepted range"]),
    ("[forecast]\nair_temp_c = 400\n", ["air_temp_c", "outside the accepted range", "°C"]),
    ("[forecast]\nrh_pct = nan\n", ["rh_pct", "NaN"]),
    ('[window]\nstart = "13:00"\nend = "10:00"\n', ["window ends (10:00) before it starts (13:00)"]),
    ('[window]\nstart = "25:00"\n', ["'25:00' is not HH:MM"]),
    ('[inputs]\nsun_encoding = "percentage"\n', ["'percentage' is not one of", "did you mean 'percent'?"]),
    ('[dosing]\nlwc_min_pct = 10.0\nlwc_max_pct = 5.0\n', ["lwc_min_pct", "below lwc_max_pct"]),
    ('[zoning]\nexposure_breaks = [0.7, 0.3]\n', ["not ascending"]),
])
def test_bad_setting(good, tmp_path, text, words):
    p = plan_file(tmp_path, good, text)
    if text.startswith("[inputs]"):  # a second [inputs] table is invalid TOML; merge instead
        p.write_text(p.read_text().replace(text, "").replace("[inputs]\n", text, 1))
    refused(run(["plan", p, "--out", good.out]), good.out, *words)


def test_plan_file_not_toml(good, tmp_path):
    p = tmp_path / "plan.toml"
    p.write_text("[plan\nname = 'x'\n")
    refused(run(["plan", p, "--out", good.out]), good.out, "not valid TOML", "plan.toml")


def test_plan_date_not_iso(good):
    refused(run(good.args("--date", "18.03.2027")), good.out, "'18.03.2027' is not YYYY-MM-DD")


def test_unknown_time_zone(good):
    refused(run(good.args("--set", 'plan.timezone="Europe/Zurch"')), good.out, "unknown time zone",
            "Europe/Zurch", "IANA")


def test_unknown_agent_lists_valid_ones(good):
    text = refused(run(good.args("--agent", "sugar")), good.out, "sugar", "NaCl")
    assert "CaCl2" in text or "urea" in text.lower()


def test_negative_crews_flag(good):
    refused(run(good.args("--crews", "-2")), good.out, "crews", "outside the accepted range")


def test_set_override_bad_shape(good):
    refused(run(good.args("--set", "depth_m=0.05")), good.out, "is not table.key=value",
            "--set dosing.depth_m")


def test_set_override_unknown_key(good):
    refused(run(good.args("--set", "dosing.depthm=0.05")), good.out, "unknown key 'depthm'", "depth_m")


def test_debug_shows_the_traceback(good, tmp_path):
    res = CliRunner().invoke(main, good.args("--debug", course=tmp_path / "nope.geojson"))
    assert res.exit_code != 0
    assert res.exception is not None and "course file not found" in str(res.exception)
    assert not good.out.exists()
