"""The offline map rendered by headless Chromium: a picture with the zone colours, and no injected script.

Needs ``/usr/bin/chromium`` (Debian package ``chromium``; ``.ci/run`` installs it); the
``chromium`` fixture in ``conftest.py`` skips with that reason when it is absent.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pytest
from shapely.geometry import Point, box

from courseplan.render import webmap as wm
from courseplan.render.context import SUN_RAMP, _hex_rgb, context_from_raster

pytestmark = pytest.mark.browser

UTM = "EPSG:32632"
X0, Y0 = 519_000.0, 5_155_000.0
EVIL = "<script>document.title='pwned'</script><img src=x onerror=\"document.title='pwned'\">"


def _zones() -> gpd.GeoDataFrame:
    # six 150 m squares in two rows, one per fixed dose class (1–20, 20–40, 40–60, 60–100, 100–150,
    # > 150 g/m²)
    doses = [10.0, 30.0, 50.0, 80.0, 120.0, 200.0]
    geoms = [box(X0 + 150 * (i % 3), Y0 + 150 * (i // 3), X0 + 150 * (i % 3 + 1), Y0 + 150 * (i // 3 + 1))
             for i in range(6)]
    return gpd.GeoDataFrame({"zone_id": np.arange(1, 7), "dose_g_m2": doses, "verdict": ["treat"] * 6,
                             "snow_source": ["observation"] * 6, "snow_source_detail": [EVIL] * 6},
                            geometry=geoms, crs=UTM)


def _page(tmp_path, **kw):
    course = gpd.GeoDataFrame(geometry=[box(X0, Y0, X0 + 450, Y0 + 300)], crs=UTM)
    obs = gpd.GeoDataFrame({"obs_id": ["U01"], "note": [EVIL], "lwc_pct": [5.0]},
                           geometry=[Point(X0 + 75, Y0 + 75)], crs=UTM)
    page = wm.render_map_html(_zones(), course, title="Browser test", agent_label="NaCl",
                              cautions=["Planning figures only."], observations=obs, **kw)
    path = tmp_path / "map.html"
    path.write_text(page, encoding="utf-8")
    return path


def _blend(hex_colour: str, alpha: float, under: str) -> np.ndarray:
    top, bottom = np.array(_hex_rgb(hex_colour), float), np.array(_hex_rgb(under), float)
    return alpha * top + (1 - alpha) * bottom


def test_map_renders_with_zone_colours(tmp_path, chromium):
    from PIL import Image

    png = chromium.screenshot(_page(tmp_path), tmp_path / "map.png", size=(1200, 900))
    img = np.asarray(Image.open(png).convert("RGB")).astype(int)
    assert img.shape[:2] == (900, 1200)
    # not blank: many colours, and the map area differs from a flat fill
    assert len(np.unique(img.reshape(-1, 3), axis=0)) > 50
    assert img[:, 400:].std() > 10
    # each dose class shows as its fill blended over the map background (opacity ZONE_FILL_OPACITY)
    flat = img.reshape(-1, 3)
    for colour in wm.DOSE_COLOURS:
        want = _blend(colour, wm.ZONE_FILL_OPACITY, wm.MAP_BACKGROUND)
        n = int((np.abs(flat - want).max(axis=1) <= 4).sum())
        assert n > 2000, f"dose colour {colour} (expected {want.round()}) covers only {n} pixels"


def test_map_renders_on_a_phone_screen(tmp_path, chromium):
    from PIL import Image

    png = chromium.screenshot(_page(tmp_path), tmp_path / "phone.png", size=(390, 844))
    img = np.asarray(Image.open(png).convert("RGB")).astype(int)
    want = _blend(wm.DOSE_COLOURS[5], wm.ZONE_FILL_OPACITY, wm.MAP_BACKGROUND)
    assert int((np.abs(img.reshape(-1, 3) - want).max(axis=1) <= 4).sum()) > 300


def test_script_in_notes_is_text_not_run(tmp_path, chromium):
    page = _page(tmp_path)
    for fragment in ("obs=U01", "zone=3"):
        dom = chromium.dump_dom(page, fragment=fragment)
        assert "<title>Browser test</title>" in dom            # no script changed the title
        assert "pwned</title>" not in dom
        assert '<img src="x"' not in dom and "<img src=x" not in dom
        # the popup is open and shows the text itself, escaped by the browser's serialiser
        assert "&lt;script&gt;document.title='pwned'&lt;/script&gt;" in dom
        assert "leaflet-popup-content" in dom


def test_context_picture_is_drawn(tmp_path, chromium):
    from affine import Affine
    from PIL import Image

    sun = np.zeros((120, 120))
    sun[:, 60:] = 1.0
    ctx = context_from_raster(sun, Affine(5.0, 0, X0 - 75, 0, -5.0, Y0 + 525), UTM, kind="sun")
    png = chromium.screenshot(_page(tmp_path, context=ctx), tmp_path / "ctx.png")
    img = np.asarray(Image.open(png).convert("RGB")).astype(int).reshape(-1, 3)
    # the shade colour of the sun ramp, over the map background, appears outside the zones
    want = _blend(SUN_RAMP[0][1], wm.CONTEXT_OPACITY, wm.MAP_BACKGROUND)
    assert int((np.abs(img - want).max(axis=1) <= 5).sum()) > 1000


def test_print_is_one_a4_page_with_the_map_and_legend(tmp_path, chromium):
    from pypdf import PdfReader

    page = _page(tmp_path)
    pdf = tmp_path / "map.pdf"
    res = chromium._run(["--no-pdf-header-footer", f"--print-to-pdf={pdf}", page.resolve().as_uri()])
    assert pdf.exists(), res.stderr.decode(errors="replace")[-2000:]
    reader = PdfReader(pdf)
    assert len(reader.pages) == 1
    w, h = (float(v) for v in reader.pages[0].mediabox[2:])
    assert abs(w - 595) < 2 and abs(h - 842) < 2  # A4 in points
    text = reader.pages[0].extract_text()
    assert "Dose over the day" in text and "Cautions" in text
    assert "Zones by dose" not in text  # no layer control


def test_untreated_zone_is_drawn_hatched(tmp_path, chromium):
    from PIL import Image

    zones = _zones()
    zones.loc[0, "dose_g_m2"] = 0.0
    course = gpd.GeoDataFrame(geometry=[box(X0, Y0, X0 + 450, Y0 + 300)], crs=UTM)
    path = tmp_path / "u.html"
    path.write_text(wm.render_map_html(zones, course, title="t", agent_label="NaCl", cautions=["c"]),
                    encoding="utf-8")
    img = np.asarray(Image.open(chromium.screenshot(path, tmp_path / "u.png")).convert("RGB")).astype(int)
    dark = (np.abs(img - np.array([0x4d, 0x52, 0x4c])).max(axis=2) <= 12).sum()
    assert dark > 3000  # the hatch's dark stripes, not a faint grey fill


def test_zone_labels_are_drawn_on_the_map(tmp_path, chromium):
    # One permanent label per zone, with the zone's number (no label column: the id) as its text.
    import re

    dom = chromium.dump_dom(_page(tmp_path))
    labels = re.findall(r'class="[^"]*zlbl[^"]*"[^>]*><span>([^<]*)</span>', dom)
    assert sorted(labels) == [str(i) for i in range(1, 7)], labels
