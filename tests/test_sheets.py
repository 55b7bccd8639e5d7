"""Tests of the printable sheets: page counts, figures equal to ``summary()``, safe writing.

Zones are tiny synthetic rectangles; the agent is a stand-in object (made-up numbers).  The PDFs
are read back with pypdf; the figures on the pages are compared with the summary that goes into
``summary.json``.
"""

from __future__ import annotations

import dataclasses
import re
import shutil
import subprocess
import types

import geopandas as gpd
import pytest
import shapely
from pypdf import PdfReader

from courseplan.cautions import cautions_for
from courseplan.errors import OutputError
from courseplan.io.outputs import write_crews_pdf, write_order_pdf
from courseplan.pipeline import plan_logistics
from courseplan.render.sheets import num
from courseplan.settings import PlanSettings

AGENT = types.SimpleNamespace(name="NH4NO3", label="Ammonium nitrate (test)", formula="NH4NO3",
                              molar_mass_g_mol=80.043, nitrogen_fraction=0.35, chloride_fraction=0.0,
                              purity=0.97, bulk_density_kg_m3=1000.0, bag_sizes_kg=(25.0,), big_bag_kg=500.0,
                              bags_per_pallet=40, oxidiser=True)


def zones_along_a_bend(n=12):
    """N zones, 30 m wide, 60 m long, stepping down and sideways; zone 5 untreated."""
    rows = []
    for i in range(n):
        x = 15.0 * i
        y0, y1 = -60.0 * i, -60.0 * (i + 1)
        geom = shapely.Polygon([(x, y0), (x + 30, y0), (x + 45, y1), (x + 15, y1)])
        area = geom.area * 1.04
        dose = 0.0 if i == 4 else 20.0 + 4.0 * i
        kg = area * dose / 1000
        rows.append(dict(zone_id=i + 1, course_order=i + 1, section=f"{i // 4 * 250}-{i // 4 * 250 + 250} m",
                         area_m2=area, dose_g_m2=dose, dose_p90_g_m2=dose * 1.4, passes=2 if dose > 50 else 1,
                         product_kg=kg, product_p90_kg=kg * 1.4, nitrogen_kg=kg * 0.97 * 0.35,
                         chloride_kg=0.0,
                         verdict="treat" if dose else "too-dry",
                         advice="Spread evenly; turn apex first." if dose else "Too dry: water first.",
                         geometry=geom))
    z = gpd.GeoDataFrame(rows, geometry="geometry", crs="EPSG:32632")
    course = shapely.union_all(z.geometry.to_numpy()).buffer(8.0, join_style=2)
    return z, course


def settings(**kw):
    s = PlanSettings()
    return s.replace(logistics=dataclasses.replace(s.logistics, **kw))


def page_texts(path):
    return [" ".join(p.extract_text().split()) for p in PdfReader(str(path)).pages]


@pytest.fixture(scope="module")
def result():
    z, course = zones_along_a_bend()
    r = plan_logistics(z, settings(crews=3, price_per_kg=0.9, first_start="10:30"), AGENT)
    return r, course


@pytest.fixture(scope="module")
def pdfs(result, tmp_path_factory):
    r, course = result
    out = tmp_path_factory.mktemp("sheets")
    c = cautions_for(AGENT.name, AGENT.nitrogen_fraction)
    kw = dict(plan_name="Test downhill", plan_date="2027-03-14", agent_label=AGENT.label, cautions=c)
    write_order_pdf(out / "order.pdf", r, **kw)
    write_crews_pdf(out / "crews.pdf", r, course, **kw)
    return out


def test_one_page_per_crew(result, pdfs):
    r, _ = result
    assert len(PdfReader(str(pdfs / "crews.pdf")).pages) == len(r.crews) == 3


def test_crew_pages_show_the_summary_figures(result, pdfs):
    r, _ = result
    s = r.summary()["crews"]
    texts = page_texts(pdfs / "crews.pdf")
    for text, c in zip(texts, s["crews"], strict=True):
        assert c["label"] in text and "Test downhill" in text and "2027-03-14" in text
        for z in c["zones"]:
            row = (f"{z['zone_id']} {z['section']} {num(z['area_m2'], 0)} {num(z['dose_g_m2'])} "
                   f"{num(z['dose_p90_g_m2'])} {z['passes']} {z['bags']} {num(z['handfuls_m2'], 2)}")
            assert row in text, row
        assert f"Total {len(c['zones'])} zones {num(c['area_m2'], 0)} {num(c['product_kg'])} kg" in text
        assert f"{num(c['product_p90_kg'])} kg" in text
        assert f"{c['bags']} × {num(c['bag_kg'])} kg" in text
        assert f"start {c['start']}" in text and c["done_by"] in text and s["first_start"] in text
        if c["second_pass"]:
            assert f"Second pass starts at {c['second_pass']}" in text
        assert f"{num(c['depot_x'])} / {num(c['depot_y'])}" in text
        assert f"{num(c['work_min'], 0)} min" in text
        assert "Hand spreading (an estimate)" in text
        assert "Planning figures only" in text and "Ammonium nitrate is an oxidiser" in text
    # zone 5 is untreated and on no sheet's table
    assert not any(z["zone_id"] == 5 for c in s["crews"] for z in c["zones"])


def test_order_sheet_shows_the_summary_figures(result, pdfs):
    r, _ = result
    o = r.summary()["order"]
    text = " ".join(page_texts(pdfs / "order.pdf"))
    for key in ("p50_kg", "p90_kg", "needed_kg", "handed_out_kg", "order_kg", "nitrogen_kg",
                "nitrogen_p90_kg", "chloride_kg"):
        assert f"{num(o[key])} kg" in text, key
    assert f"{num(o['tonnes'], 3)} t" in text
    assert f"{num(o['cost'], 2)} EUR" in text
    assert f"{o['bags_handed_out']} × {num(o['bag_kg'])} kg" in text
    for p in o["packages"]:
        assert f"{p['count']} × {num(p['size_kg'])} kg = {num(p['kg'])} kg" in text
    assert re.search(rf"Pallets .*? {o['pallets']}\b", text)
    assert "chloride" in text.lower() and "2019/1148" in text  # storage cautions
    for c in r.summary()["crews"]["crews"]:
        assert f"{c['label']} " in text and f"{num(c['depot_x'])} {num(c['depot_y'])} {c['bags']}" in text


def test_many_zones_still_one_page_per_crew(tmp_path):
    z, course = zones_along_a_bend(70)
    r = plan_logistics(z, settings(crews=2), AGENT)
    write_crews_pdf(tmp_path / "crews.pdf", r, course, plan_name="Long", plan_date=None,
                    agent_label="x", cautions=cautions_for("NaCl"))
    assert len(PdfReader(str(tmp_path / "crews.pdf")).pages) == 2


def test_written_atomically_and_errors(result, tmp_path):
    r, course = result
    target = tmp_path / "order.pdf"
    target.write_text("old")
    write_order_pdf(target, r, plan_name="P", plan_date=None, agent_label="A", cautions=[])
    assert target.read_bytes().startswith(b"%PDF")
    assert [p.name for p in tmp_path.iterdir()] == ["order.pdf"]  # no temporary file left
    with pytest.raises(OutputError, match="does not exist"):
        write_crews_pdf(tmp_path / "nowhere" / "crews.pdf", r, course, plan_name="P", plan_date=None,
                        agent_label="A", cautions=[])


def test_user_text_is_escaped(result, tmp_path):
    r, course = result
    write_crews_pdf(tmp_path / "c.pdf", r, None, plan_name="A <b>&</b> B", plan_date=None, agent_label="x",
                    cautions=[])
    assert "A <b>&</b> B" in page_texts(tmp_path / "c.pdf")[0]


def test_no_crews_gives_one_page(tmp_path):
    z, course = zones_along_a_bend(3)
    z["product_kg"] = 0.0
    r = plan_logistics(z, PlanSettings(), AGENT)
    write_crews_pdf(tmp_path / "c.pdf", r, course, plan_name="P", plan_date=None, agent_label="x",
                    cautions=[])
    texts = page_texts(tmp_path / "c.pdf")
    assert len(texts) == 1 and "No zone needs treatment" in texts[0]


@pytest.mark.skipif(shutil.which("pdftoppm") is None, reason="poppler-utils (pdftoppm) not installed")
def test_pages_render(pdfs, tmp_path):
    subprocess.run(["pdftoppm", "-png", "-r", "30", str(pdfs / "crews.pdf"), str(tmp_path / "p")], check=True,
                   capture_output=True)
    assert len(list(tmp_path.glob("p-*.png"))) == 3
