"""Tests of the offline HTML map (courseplan.render.webmap, courseplan.io.webmap) without a browser."""

from __future__ import annotations

import json
import math
import re

import geopandas as gpd
import numpy as np
import pytest
from affine import Affine
from pyproj import Transformer
from shapely.geometry import Point, Polygon, box

from courseplan.errors import GeometryError, InputError, OutputError
from courseplan.io.files import write_text_atomic
from courseplan.render import webmap as wm
from courseplan.render.context import SUN_RAMP, _hex_rgb, context_from_raster, hillshade
from courseplan.render.layers import format_value, json_for_script, simplify_for_display, zone_popup_sections

UTM = "EPSG:32632"
X0, Y0 = 519_000.0, 5_155_000.0  # near 46.55° N, 9.25° E


def _zones(n: int = 4, doses=(0.0, 15.0, 55.0, 118.0)) -> gpd.GeoDataFrame:
    geoms = [box(X0 + 100 * i, Y0, X0 + 100 * (i + 1), Y0 + 100) for i in range(n)]
    return gpd.GeoDataFrame({
        "zone_id": np.arange(1, n + 1),
        "exposure_class": ["shaded", "part-sun", "full-sun", "full-sun"][:n],
        "map_area_m2": [10_000.0] * n,
        "area_m2": [10_353.0] * n,
        "dose_g_m2": list(doses)[:n],
        "product_kg": [d * 10.353 for d in doses][:n],
        "verdict": ["no treatment needed", "treat", "treat", "several passes"][:n],
        "snow_source": ["class-default", "observation", "nearby", "observation"][:n],
        "snow_source_detail": ["class default", "U01", "U02, 80 m", "<script>alert('z')</script>"][:n],
        "obs_stale": [False, False, True, False][:n],
        "lwc_pct": [1.0, 4.0, 6.5, float("nan")][:n],
        "crew_note": ["a", "b", "c", "d"][:n],
    }, geometry=geoms, crs=UTM)


def _course() -> gpd.GeoDataFrame:
    return gpd.GeoDataFrame({"name": ["test"]}, geometry=[box(X0 - 5, Y0 - 5, X0 + 405, Y0 + 105)], crs=UTM)


def _obs(note: str = "wet at apex") -> gpd.GeoDataFrame:
    return gpd.GeoDataFrame({"obs_id": ["U01", "U02"], "time": ["2027-03-18T08:00+01:00"] * 2,
                             "wetness": ["wet", ""], "lwc_pct": [float("nan"), 9.5],
                             "hand_hardness": [3.0, float("nan")], "note": [note, ""]},
                            geometry=[Point(X0 + 150, Y0 + 50), Point(X0 + 250, Y0 + 50)], crs=UTM)


def _page(**kw) -> str:
    args = dict(title="Test plan", agent_label="NaCl", cautions=["Caution one.", "Caution two."])
    args.update(kw)
    zones = args.pop("zones", _zones())
    course = args.pop("course", _course())
    return wm.render_map_html(zones, course, **args)


def _data(page: str) -> dict:
    m = re.search(r'<script type="application/json" id="plan-data">(.*?)</script>', page, re.S)
    assert m, "page holds no plan data"
    return json.loads(m.group(1))


# --------------------------------------------------------------------------- offline, no web links

def test_no_remote_script_or_stylesheet():
    page = _page(observations=_obs())
    assert not re.search(r"<script[^>]*\bsrc\s*=", page, re.I)
    assert not re.search(r"<link\b", page, re.I)
    assert not re.search(r"@import", page, re.I)
    assert not re.search(r"url\(\s*['\"]?\s*(https?:)?//", page, re.I)
    assert not re.search(r"url\(\s*['\"]?images/", page)  # Leaflet's own images are inlined
    assert "sourceMappingURL" not in page
    # Leaflet itself is inlined (its licence header travels with it)
    assert "Leaflet 1.9" in page and "L.map(" in page


def test_no_tile_layer_by_default():
    page = _page()
    assert "L.tileLayer(" not in page and "{z}/{x}/{y}" not in page


def test_viewport_for_phones():
    assert '<meta name="viewport" content="width=device-width, initial-scale=1">' in _page()


# --------------------------------------------------------------------------- escaping

def test_user_text_is_escaped():
    evil = "<script>alert('x')</script><img src=x onerror=alert(2)>"
    page = _page(title="Plan <b>&</b>", agent_label="Agent <i>", observations=_obs(evil),
                 crews=gpd.GeoDataFrame({"crew": [1], "label": [evil]},
                                        geometry=[box(X0, Y0, X0 + 200, Y0 + 100)], crs=UTM),
                 cautions=["Mind <u>this</u>"])
    # only the page's own three script elements: plan data, Leaflet, page script
    assert page.count("<script") == 3
    assert "<img" not in page
    assert "Plan &lt;b&gt;&amp;&lt;/b&gt;" in page and "Agent &lt;i&gt;" in page
    assert "<li>Mind &lt;u&gt;this&lt;/u&gt;</li>" in page
    data = _data(page)  # the text survives intact as data, shown by the page as text nodes
    assert data["obs"]["features"][0]["properties"]["note"] == evil
    assert data["crews"]["features"][0]["properties"]["label"] == evil
    assert "textContent" in page and "innerHTML" not in page.split("<script>")[-1]


def test_json_for_script_has_no_markup_characters():
    s = json_for_script({"a": "</script><!-- & \u2028"})
    assert "<" not in s and ">" not in s and "&" not in s and "\u2028" not in s
    assert json.loads(s) == {"a": "</script><!-- & \u2028"}


# --------------------------------------------------------------------------- content

def test_popups_show_every_column_with_units():
    zones = _zones()
    page = _page(zones=zones)
    feats = _data(page)["zones"]["features"]
    assert len(feats) == 4
    p = feats[2]["properties"]
    rows = {k: v for _, sec in p["sections"] for k, v in sec}
    assert set(rows) == set(zones.columns) - {"geometry"}
    assert rows["dose_g_m2"] == "55.0 g/m²"            # unit from courseplan.columns
    assert rows["area_m2"] == "10353 m²"
    assert rows["obs_stale"] == "yes"
    assert rows["snow_source"] == "nearby" and rows["snow_source_detail"] == "U02, 80 m"
    titles = [t for t, _ in p["sections"]]
    assert titles == ["Zone", "Snow state", "Dose", "Other"]
    assert dict(feats[3]["properties"]["sections"][1][1])["lwc_pct"] == "—"   # NaN shown as missing


def test_units_override():
    rows = {k: v for _, sec in zone_popup_sections({"dose_g_m2": 12.5, "extra": 2.0},
                                                    {"dose_g_m2": "g m⁻²", "extra": "h"}) for k, v in sec}
    assert rows == {"dose_g_m2": "12.5 g m⁻²", "extra": "2.0 h"}


def test_cautions_title_and_agent_shown():
    page = _page(title="Ulmenkar GS", agent_label="NH4NO3 (fertiliser grade)",
                 cautions=["First caution.", "Second caution."])
    assert "<title>Ulmenkar GS</title>" in page and "<h1>Ulmenkar GS</h1>" in page
    assert "NH4NO3 (fertiliser grade)" in page
    assert "<li>First caution.</li>" in page and "<li>Second caution.</li>" in page


def test_zone_colours_follow_the_dose_scale():
    feats = _data(_page())["zones"]["features"]
    # doses 0, 15, 55, 118 g/m² in the fixed classes 1–20, 20–40, 40–60, 60–100, 100–150, > 150
    assert [f["properties"]["c_dose"] for f in feats] == [wm.NO_DOSE_COLOUR, wm.DOSE_COLOURS[0],
                                                          wm.DOSE_COLOURS[2], wm.DOSE_COLOURS[4]]
    assert [f["properties"]["treated"] for f in feats] == [False, True, True, True]
    vc = [f["properties"]["c_verdict"] for f in feats]
    assert vc[1] == vc[2] and len({vc[0], vc[1], vc[3]}) == 3


def test_legend_has_units():
    page = _page()
    assert "Dose over the day (P50, g/m²)" in page
    for label in ("1–20 g/m²", "20–40 g/m²", "40–60 g/m²", "60–100 g/m²", "100–150 g/m²",
                  "&gt; 150 g/m²", "0: no salt (not treated)"):
        assert label in page, label


def test_coordinates_reprojected_to_wgs84():
    data = _data(_page(start_xy=(X0, Y0), finish_xy=(X0 + 400, Y0 + 100)))
    ring = np.array(data["zones"]["features"][0]["geometry"]["coordinates"][0])
    tr = Transformer.from_crs(UTM, "EPSG:4326", always_xy=True)
    lon0, lat0 = tr.transform(X0, Y0)
    lon1, lat1 = tr.transform(X0 + 100, Y0 + 100)
    assert ring[:, 0].min() == pytest.approx(min(lon0, tr.transform(X0, Y0 + 100)[0]), abs=2e-6)
    assert ring[:, 1].max() == pytest.approx(max(lat1, tr.transform(X0, Y0 + 100)[1]), abs=2e-6)
    assert data["start"] == pytest.approx([lat0, lon0], abs=1e-6)
    assert data["finish"][0] > lat0 and data["finish"][1] > lon0


def test_layer_without_crs_is_refused():
    z = _zones()
    z = z.set_crs(None, allow_override=True)
    with pytest.raises(GeometryError):
        wm.render_map_html(z, _course(), title="t", agent_label="a", cautions=[])


def test_observation_wetness_colour_from_lwc():
    feats = _data(_page(observations=_obs()))["obs"]["features"]
    # U01 gives wetness "wet"; U02 gives only 9.5 % vol → very wet (8–15 %, Fierz et al. 2009)
    assert feats[0]["properties"]["colour"] == wm.WETNESS_COLOURS["wet"]
    assert feats[1]["properties"]["colour"] == wm.WETNESS_COLOURS["very-wet"]
    rows = dict(feats[0]["properties"]["rows"])
    assert rows["hand_hardness"] == "3 (1–6)"


# --------------------------------------------------------------------------- scale and formatting

def test_dose_classes_are_fixed():
    assert wm.DOSE_BREAKS[:5] == (20.0, 40.0, 60.0, 100.0, 150.0) and wm.DOSE_BREAKS[5] == float("inf")
    assert wm.dose_class_labels() == ["1–20", "20–40", "40–60", "60–100", "100–150", "> 150"]
    # the same dose gets the same colour whatever else the plan holds
    a = _data(_page(zones=_zones(doses=(0.0, 15.0, 55.0, 118.0))))["zones"]["features"]
    b = _data(_page(zones=_zones(doses=(0.0, 15.0, 55.0, 900.0))))["zones"]["features"]
    assert [f["properties"]["c_dose"] for f in a][:3] == [f["properties"]["c_dose"] for f in b][:3]
    assert wm.dose_colour(150.0) == wm.DOSE_COLOURS[4] and wm.dose_colour(150.5) == wm.DOSE_COLOURS[5]
    assert wm.dose_colour(1e6) == wm.DOSE_COLOURS[5] and wm.dose_colour(0.5) == wm.DOSE_COLOURS[0]


def test_dose_colour_edges():
    b = [20.0, 40.0, 60.0, 80.0, 100.0, 120.0]
    assert wm.dose_colour(20.0, b) == wm.DOSE_COLOURS[0]
    assert wm.dose_colour(20.01, b) == wm.DOSE_COLOURS[1]
    assert wm.dose_colour(500.0, b) == wm.DOSE_COLOURS[5]
    assert wm.dose_colour(0.0, b) == wm.dose_colour(float("nan"), b) == wm.dose_colour(None, b) \
        == wm.NO_DOSE_COLOUR


@pytest.mark.parametrize("value, unit, kind, text", [
    (12.345, "g/m²", None, "12.3 g/m²"), (3.4, "% vol", None, "3.4 % vol"), (0.0, "°C", None, "0.0 °C"),
    (1234.6, "m²", None, "1235 m²"), (0.75, "0–1", None, "0.75 (0–1)"), (float("nan"), "m", None, "—"),
    (None, "", None, "—"), (True, "", None, "yes"), (np.int64(7), "", None, "7"), (3.0, "", "int", "3"),
    ("treat", "", None, "treat"), ("", "", None, "—"),
])
def test_format_value(value, unit, kind, text):
    assert format_value(value, unit, kind) == text


# --------------------------------------------------------------------------- size and simplification

def _staircase_course(length_m: float = 3000.0, width_m: float = 50.0, cell: float = 0.5):
    """Make a winding 3 km course polygonised from a 0.5 m label raster (staircase edges, many vertices)."""
    from rasterio import features
    from shapely.geometry import shape

    nx, ny = int(length_m / cell), int(300 / cell)
    xs = (np.arange(nx) + 0.5) * cell
    ys = (np.arange(ny) + 0.5) * cell
    X, Y = np.meshgrid(xs, ys)
    centre = 150 + 100 * np.sin(2 * np.pi * X / 700)
    inside = np.abs(Y - centre) < width_m / 2
    lab = np.where(inside, (X // 25).astype(np.int32) * 2 + (Y > centre) + 1, 0).astype(np.int32)
    t = Affine(cell, 0, X0, 0, -cell, Y0 + 300)
    shapes = list(features.shapes(lab, mask=lab > 0, transform=t))
    geoms = [shape(g) for g, _ in shapes]
    n = len(geoms)
    zones = gpd.GeoDataFrame({"zone_id": np.arange(1, n + 1), "dose_g_m2": np.linspace(5, 90, n),
                              "verdict": ["treat"] * n, "area_m2": [g.area for g in geoms]},
                             geometry=geoms, crs=UTM)
    course = gpd.GeoDataFrame(geometry=[zones.union_all()], crs=UTM)
    return zones, course


def test_three_km_course_map_under_one_megabyte():
    zones, course = _staircase_course()
    n_vertices = int(sum(len(p.exterior.coords) for p in zones.geometry))
    assert n_vertices > 20_000                              # the test input is heavy enough to matter
    page = _page(zones=zones, course=course)
    size = len(page.encode("utf-8"))
    assert size < 1_000_000, f"map is {size} bytes"
    data = _data(page)
    assert len(data["zones"]["features"]) == len(zones)
    tol = float(re.search(r"tolerance ([\d.]+) m", page).group(1))
    assert tol == wm.DEFAULT_TOLERANCE_M          # it fitted without coarser simplification
    # display geometry stays close to the plan's: an edge moves by about the tolerance at most,
    # so a zone's area changes by less than tolerance × perimeter
    tr = Transformer.from_crs("EPSG:4326", UTM, always_xy=True)
    for f, g in zip(data["zones"]["features"], zones.geometry, strict=True):
        ring = np.array(f["geometry"]["coordinates"][0])
        x, y = tr.transform(ring[:, 0], ring[:, 1])
        assert abs(Polygon(np.column_stack([x, y])).area - g.area) < tol * g.length


def test_simplify_keeps_a_coverage_shared():
    import shapely

    a = Polygon([(0, 0), (10, 0), (10, 0.2), (10, 10), (0, 10)])
    b = Polygon([(10, 0), (20, 0), (20, 10), (10, 10), (10, 0.2)])
    out = simplify_for_display([a, b], 1.0)
    assert shapely.coverage_is_valid(out)
    assert out[0].union(out[1]).area == pytest.approx(200.0)
    assert len(out[0].exterior.coords) <= len(a.exterior.coords)


# --------------------------------------------------------------------------- context picture

def test_hillshade_hand_values():
    flat = np.zeros((5, 5))
    assert hillshade(flat, 1, 1)[2, 2] == pytest.approx(math.sin(math.radians(45)))
    # a plane rising to the south-east faces the north-west light; its slope 45° → normal along the light
    x, y = np.meshgrid(np.arange(5.0), np.arange(5.0))  # y = row, grows southward
    g = 1 / math.sqrt(2)                                 # gradient 1 → 45° slope
    z = g * x + g * y                                    # rises east and south
    assert hillshade(z, 1, 1)[2, 2] == pytest.approx(1.0, abs=1e-9)


def test_context_from_sun_raster_colours_and_bounds():
    vals = np.zeros((100, 200))
    vals[:, 100:] = 1.0
    t = Affine(4.0, 0, X0, 0, -4.0, Y0 + 400)
    img = context_from_raster(vals, t, UTM, kind="sun")
    assert img.rgba.dtype == np.uint8 and img.rgba.shape[2] == 4
    h, w, _ = img.rgba.shape
    left, right = img.rgba[h // 2, w // 4], img.rgba[h // 2, 3 * w // 4]
    assert tuple(left[:3]) == pytest.approx(_hex_rgb(SUN_RAMP[0][1]), abs=2)
    assert tuple(right[:3]) == pytest.approx(_hex_rgb(SUN_RAMP[-1][1]), abs=2)
    assert left[3] == right[3] == 255
    (s, wst), (n, e) = img.latlon_bounds()
    tr = Transformer.from_crs(UTM, "EPSG:4326", always_xy=True)
    lon_c, lat_c = tr.transform(X0 + 400, Y0 + 200)
    assert wst < lon_c < e and s < lat_c < n
    assert (n - s) * 111_320 == pytest.approx(400, rel=0.03)    # 400 m of latitude
    assert img.png_data_uri().startswith("data:image/png;base64,")


def test_context_terrain_nodata_transparent():
    z = np.linspace(1500, 1700, 120 * 80).reshape(120, 80)
    z[:40, :] = -9999.0
    img = context_from_raster(z, Affine(2.0, 0, X0, 0, -2.0, Y0 + 240), UTM, kind="terrain",
                              nodata=-9999.0)
    h = img.rgba.shape[0]
    assert img.rgba[h // 8, img.rgba.shape[1] // 2, 3] == 0
    assert img.rgba[7 * h // 8, img.rgba.shape[1] // 2, 3] == 255


def test_context_refuses_bad_input():
    with pytest.raises(InputError):
        context_from_raster(np.zeros((3, 3)), Affine.identity(), UTM, kind="photo")
    with pytest.raises(InputError):
        context_from_raster(np.full((3, 3), np.nan), Affine.identity(), UTM)


def test_page_with_context_embeds_png():
    img = context_from_raster(np.random.default_rng(0).normal(size=(50, 50)),
                              Affine(10.0, 0, X0, 0, -10.0, Y0 + 500), UTM)
    data = _data(_page(context=img))
    assert data["context"]["uri"].startswith("data:image/png;base64,")
    (s, w), (n, e) = data["context"]["bounds"]
    assert s < n and w < e


# --------------------------------------------------------------------------- writing

def test_write_map_html_atomic(tmp_path):
    # the map writer of the plan is io.files.write_text_atomic over render_map_html
    page = wm.render_map_html(_zones(), _course(), title="T", agent_label="A", cautions=["C"])
    out = write_text_atomic(tmp_path / "map.html", page, what="map")
    assert out.read_text(encoding="utf-8").startswith("<!DOCTYPE html>")
    assert [p.name for p in tmp_path.iterdir()] == ["map.html"]   # no temporary file left
    with pytest.raises(OutputError):
        write_text_atomic(tmp_path / "missing" / "map.html", "<html></html>", what="map")


# --------------------------------------------------------------------------- for people on the hill

def test_popup_leads_with_the_crew_facts():
    from courseplan.render.layers import zone_lead

    row = {"zone_id": 7, "section": "250–500 m", "verdict": "treat-in-passes",
           "advice": "Salt again at the times shown.",
           "passes": 2, "pass_times": "06:42; 12:13", "max_pass_g_m2": 77.9, "dose_g_m2": 114.1,
           "dose_p90_g_m2": 123.4, "hard_until": "12:50", "bags": 72, "crew": 1}
    lead = zone_lead(row)
    assert lead["title"] == "Zone 7 · 250–500 m" and lead["treated"] is True
    assert dict(lead["lines"]) == {"What to do": "Salt again at the times shown.",
                                   "Passes": "2 — spread at 06:42 and 12:13", "Per pass": "up to 78 g/m²",
                                   "Hard until": "12:50", "Day total": "114 g/m² (P90 123 g/m²)",
                                   "Bags": "72 at the depot of crew 1"}
    held = zone_lead({**row, "passes": 3, "pass_times": "06:00; 10:00; 12:00", "hard_until": "end of day"})
    assert dict(held["lines"])["Passes"] == "3 — spread at 06:00, 10:00 and 12:00"
    assert dict(held["lines"])["Hard until"].startswith("the end of the day")
    none = zone_lead({"zone_id": 3, "dose_g_m2": 0.0, "passes": 0, "verdict": "water-first",
                      "advice": "Drain."})
    assert none["treated"] is False and ("Salt", "none in this zone") in none["lines"]


def test_popup_page_folds_the_details_and_fits_small_screens():
    page = _page()
    feats = _data(page)["zones"]["features"]
    assert feats[1]["properties"]["title"] == "Zone 2" and feats[1]["properties"]["lead"]
    script = page.split("<script>")[-1]
    assert 'el("details")' in script and 'el("summary"' in script       # details folded below the lead
    assert "window.innerWidth-70" in script                               # popups narrower than the screen
    assert "max-width:calc(100vw - 80px)" in page
    vp = re.search(r'<meta name="viewport" content="([^"]+)">', page).group(1)
    assert "user-scalable=no" not in vp and "maximum-scale=1" not in vp   # pinch zoom stays allowed


def test_untreated_zones_are_hatched_and_outlined():
    page = _page()
    assert 'id="cp-hatch"' in page and wm.HATCH_SVG in page
    assert 'fillColor:"url(#cp-hatch)"' in page and 'dashArray:"4 3"' in page
    assert '<span class="sw hatch"></span>0: no salt' in page


def test_print_stylesheet_one_a4_page_without_controls():
    css = page_css = _page()
    css = page_css[page_css.index("@media print"):]
    assert "@page{size:A4 portrait" in css
    for hidden in (".leaflet-control-zoom", ".leaflet-control-layers", ".maplegend"):
        assert hidden in css.split("{display:none!important}")[0]
    assert ".leaflet-control-scale{display:block!important}" in css and "#legend{" in css
    assert 'addEventListener("beforeprint", refit)' in page_css


def test_zone_labels_sit_inside_their_zones_and_lead_the_popup_title():
    # An L-shaped zone, whose centroid (and bounding-box centre) lies outside it: its label point must
    # be inside, and the label text is the zone's label column.
    from shapely.geometry import shape

    ell = box(X0, Y0, X0 + 300, Y0 + 40).union(box(X0, Y0, X0 + 40, Y0 + 300))
    assert not ell.contains(ell.centroid)
    zones = gpd.GeoDataFrame({"zone_id": [1, 2], "label": ["1A", "1B"], "dose_g_m2": [20.0, 40.0],
                              "verdict": ["treat", "treat"], "section": ["0–250 m"] * 2},
                             geometry=[ell, box(X0 + 40, Y0 + 40, X0 + 300, Y0 + 300)], crs=UTM)
    feats = _data(_page(zones=zones))["zones"]["features"]
    for f, want in zip(feats, ["1A", "1B"], strict=True):
        p = f["properties"]
        assert p["label"] == want
        lat, lon = p["at"]
        assert shape(f["geometry"]).buffer(1e-6).contains(Point(lon, lat)), (want, p["at"])
    assert feats[0]["properties"]["title"] == "Zone 1A (1) · 0–250 m"
    page = _page(zones=zones)
    assert 'overlays["Zone labels"]' in page and "zlbl" in page
