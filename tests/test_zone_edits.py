"""Zone edits that survive a re-run (issue 18, point 3).

The chief of course edits the zones layer in a GIS; ``courseplan plan … --zones edited.gpkg`` keeps the
zones and overrides and computes the rest.
The coverage checker is tested on hand-made squares (areas by hand); the round trip on the demo hill.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pytest
from affine import Affine
from click.testing import CliRunner
from shapely.geometry import box

from courseplan.cli.main import main
from courseplan.errors import InputError
from courseplan.geo.edits import cells_of_zones, fit_to_course
from courseplan.io.outputs import read_summary

ROOT = Path(__file__).resolve().parents[1]
PLAN = ROOT / "sample-geodata" / "plan.toml"
MERGED, SKIPPED, FIXED, FIXED_G_M2 = (15, 16), 8, 9, 12.5  # 15 and 16: one section, one crew, 8,615 m² together


# ---- the coverage checker, on squares -------------------------------------------------------------

COURSE = box(0, 0, 20, 10)  # 200 m²


def test_two_halves_tile_the_course_without_a_note():
    geoms, notes = fit_to_course([box(0, 0, 10, 10), box(10, 0, 20, 10)], [1, 2], COURSE)
    assert notes == []
    assert [g.area for g in geoms] == [100.0, 100.0]


@pytest.mark.parametrize("zones, ids, words", [
    ([box(0, 0, 10, 10), box(8, 0, 20, 10)], [4, 7], "zones 4 and 7 overlap by 20 m²"),
    ([box(0, 0, 9, 10), box(10, 0, 20, 10)], [3, 5], "a gap of 10 m² next to zones 3 and 5"),
    ([box(0, 0, 10, 10), box(10, 0, 22, 10)], [1, 9], "zone 9 lies 20 m² outside the course"),
])
def test_overlap_gap_and_outside_name_the_zones_and_the_area(zones, ids, words):
    with pytest.raises(InputError) as e:
        fit_to_course(zones, ids, COURSE, where="edited.gpkg")
    msg = str(e.value)
    assert words in msg and "\n" not in msg
    assert "edited.gpkg" in msg and "snap" in msg  # where, and what to do


def test_a_small_overlap_is_mended_with_a_note_and_the_result_tiles_the_course():
    # 0.5 m² of overlap: below 1 m² and, on this course, below 1e-4 of it (10 m²)
    course = box(0, 0, 1000, 100)  # 100 000 m²: 1e-4 of it is 10 m²
    a, b = box(0, 0, 500, 100), box(499.995, 0, 1000, 100)  # overlap 0.005 × 100 = 0.5 m²
    geoms, notes = fit_to_course([a, b], [1, 2], course)
    assert len(notes) == 1 and "mended 1 sliver" in notes[0] and "0.5 m²" in notes[0]
    assert sum(g.area for g in geoms) == pytest.approx(course.area, abs=1e-6)
    assert geoms[0].intersection(geoms[1]).area == pytest.approx(0.0, abs=1e-9)


def test_slivers_each_small_but_together_above_the_course_share_are_refused():
    # 0.5 m² of overlap on a 200 m² course: below 1 m², above 1e-4 × 200 = 0.02 m²
    with pytest.raises(InputError, match="slivers .* add up to 0.5 m²"):
        fit_to_course([box(0, 0, 10, 10), box(9.95, 0, 20, 10)], [1, 2], COURSE)


def test_a_zone_too_small_for_a_cell_centre_gets_the_cell_it_lies_in():
    touch = np.ones((4, 4), dtype=bool)
    tr = Affine(1.0, 0.0, 0.0, 0.0, -1.0, 4.0)  # 1 m cells, top-left (0, 4)
    small = box(1.1, 1.1, 1.4, 1.4)              # no cell centre (they sit at .5)
    big = box(0, 0, 4, 4).difference(small)
    zi, ci = cells_of_zones([big, small], touch, tr)
    assert np.bincount(zi).tolist() == [16, 1]
    assert ci[zi == 1].tolist() == [2 * 4 + 1]   # row 2 (y 1–2), column 1 (x 1–2)


# ---- the round trip on the demo ---------------------------------------------------------------------

def _plan(*args):
    return CliRunner().invoke(main, ["plan", str(PLAN), *map(str, args)])


def _zones(path) -> gpd.GeoDataFrame:
    return gpd.read_file(path, layer="zones")


def _write(z: gpd.GeoDataFrame, path: Path) -> Path:
    z.to_file(path, layer="zones", driver="GPKG", engine="pyogrio")
    return path


def _edit(z: gpd.GeoDataFrame) -> gpd.GeoDataFrame:
    """Merge two neighbouring zones (GIS 'merge features'), skip one, fix the dose of another."""
    keep, gone = MERGED
    z = z.copy()
    z.loc[z.zone_id == keep, "geometry"] = z[z.zone_id.isin(MERGED)].geometry.union_all()
    z = z[z.zone_id != gone].reset_index(drop=True)
    z["edit_skip"] = pd.array([True if i == SKIPPED else None for i in z.zone_id], dtype="boolean")
    z["edit_dose_g_m2"] = [FIXED_G_M2 if i == FIXED else np.nan for i in z.zone_id]
    return z


@pytest.fixture(scope="module")
def trip(tmp_path_factory):
    d = tmp_path_factory.mktemp("edits")
    res = _plan("--out", d / "base")
    assert res.exit_code == 0, res.output
    edited = _write(_edit(_zones(d / "base" / "zones.gpkg")), d / "edited.gpkg")
    res2 = _plan("--out", d / "kept", "--zones", edited)
    assert res2.exit_code == 0, res2.output
    return d, read_summary(d / "base"), read_summary(d / "kept"), res2.output


def _by_id(summary) -> dict:
    return {z["zone_id"]: z for z in summary["zones"]}


def test_a_fresh_plan_writes_the_override_columns_empty(trip):
    d, base, _, _ = trip
    info = pyogrio.read_info(d / "base" / "zones.gpkg", layer="zones")
    kind = dict(zip(info["fields"], info["ogr_subtypes"], strict=True))
    assert kind["edit_skip"] == "OFSTBoolean"
    z = _zones(d / "base" / "zones.gpkg")
    assert not z["edit_skip"].any() and z["edit_dose_g_m2"].isna().all() and z["edit_agent"].isna().all()
    assert all(r["edit_skip"] is False and r["edit_dose_g_m2"] is None for r in base["zones"])


def test_merged_zones_become_one_with_the_summed_area(trip):
    _, base, kept, _ = trip
    assert kept["zone_count"] == base["zone_count"] - 1
    b, k = _by_id(base), _by_id(kept)
    assert MERGED[1] not in k
    assert k[MERGED[0]]["map_area_m2"] == pytest.approx(sum(b[i]["map_area_m2"] for i in MERGED), rel=1e-6)
    assert k[MERGED[0]]["label"] == b[MERGED[0]]["label"]  # ids and labels kept
    assert sorted(k) == sorted(i for i in b if i != MERGED[1])


def test_a_skipped_zone_gets_no_salt_and_says_why(trip):
    _, base, kept, _ = trip
    assert _by_id(base)[SKIPPED]["product_kg"] > 0  # it would have been salted
    z = _by_id(kept)[SKIPPED]
    assert z["product_kg"] == 0 and z["passes"] == 0 and z["verdict"] == "left-out"
    assert "chief of course" in z["advice"]
    assert z["edit_skip"] is True
    assert not [p for p in kept["passes"] if p["zone_id"] == SKIPPED]


def test_a_fixed_dose_is_the_dose_of_every_pass(trip):
    _, base, kept, _ = trip
    assert _by_id(base)[FIXED]["max_pass_g_m2"] != pytest.approx(FIXED_G_M2)
    passes = [p for p in kept["passes"] if p["zone_id"] == FIXED]
    assert passes
    assert all(p["dose_g_m2"] == FIXED_G_M2 and p["dose_p90_g_m2"] == FIXED_G_M2 for p in passes)
    z = _by_id(kept)[FIXED]
    assert z["dose_g_m2"] == pytest.approx(FIXED_G_M2 * len(passes), rel=1e-12)
    assert z["product_kg"] == pytest.approx(z["dose_g_m2"] * z["area_m2"] / 1000.0, rel=1e-12)
    assert z["edit_dose_g_m2"] == FIXED_G_M2
    assert kept["total_product_kg"] == pytest.approx(sum(r["product_kg"] for r in kept["zones"]), rel=1e-12)


def test_untouched_zones_keep_their_figures(trip):
    # Not to 1e-9: the kept zones' means are over the cells whose centre they hold, the zoning's over its
    # raster regions, so sun and slope move by up to about 1 %; and a zone whose crew's round changed
    # (a zone left out, two merged) is spread at another time.  Zones spread at the same times keep
    # their dose to 1 %.
    _, base, kept, _ = trip
    b, k = _by_id(base), _by_id(kept)
    same = [i for i in k if i not in (*MERGED, SKIPPED, FIXED) and k[i]["pass_times"] == b[i]["pass_times"]]
    assert len(same) >= (len(k) - 3) // 2   # at least half of the zones nobody touched
    for i in same:
        assert k[i]["map_area_m2"] == pytest.approx(b[i]["map_area_m2"], rel=1e-6), i
        assert k[i]["irradiation_wh_m2"] == pytest.approx(b[i]["irradiation_wh_m2"], rel=0.03), i
        assert k[i]["dose_g_m2"] == pytest.approx(b[i]["dose_g_m2"], rel=0.01, abs=1e-9), i


def test_the_plan_says_what_it_kept(trip):
    _, _, kept, output = trip
    note = next(n for n in kept["notes"] if n.startswith("kept "))
    assert f"kept {kept['zone_count']} edited zones from" in note
    assert f"1 left out (zone {SKIPPED})" in note and f"1 fixed dose (zone {FIXED})" in note
    assert f"kept {kept['zone_count']} edited zones" in " ".join(output.split())


def test_a_chief_edits_the_plans_own_zones_and_replaces_the_folder(trip, tmp_path):
    d, _, _, _ = trip
    out = tmp_path / "demo-plan"
    shutil.copytree(d / "base", out)
    z = _zones(out / "zones.gpkg")
    z["edit_skip"] = pd.array([True if i == SKIPPED else None for i in z.zone_id], dtype="boolean")
    _write(z, out / "zones.gpkg")  # edited in place, as in a GIS
    res = _plan("--zones", out / "zones.gpkg", "--out", out, "--overwrite")
    assert res.exit_code == 0, res.output
    again = _zones(out / "zones.gpkg")
    assert again.loc[again.zone_id == SKIPPED, "edit_skip"].tolist() == [True]
    assert again.loc[again.zone_id == SKIPPED, "product_kg"].tolist() == [0.0]


def test_an_edited_zones_file_elsewhere_in_the_folder_is_not_destroyed(trip, tmp_path):
    d, _, _, _ = trip
    out = tmp_path / "demo-plan"
    shutil.copytree(d / "base", out)
    shutil.copy(d / "edited.gpkg", out / "edited.gpkg")
    res = _plan("--zones", out / "edited.gpkg", "--out", out, "--overwrite")
    assert res.exit_code == 2 and "edited zones" in res.output
    assert (out / "edited.gpkg").exists()


@pytest.mark.parametrize("how, words", [
    ("overlap", "overlap by"),
    ("gap", "a gap of"),
    ("outside", "outside the course"),
])
def test_a_bad_edit_exits_2_with_one_line_naming_the_zones_and_writes_nothing(trip, tmp_path, how, words):
    d, _, _, _ = trip
    z = _zones(d / "base" / "zones.gpkg")
    i = z.index[z.zone_id == 5][0]
    g = z.geometry[i]
    z.loc[i, "geometry"] = {"overlap": g.buffer(6.0).intersection(z.geometry.union_all()),
                            "gap": g.buffer(-3.0), "outside": g.buffer(25.0)}[how]
    bad = _write(z, tmp_path / "bad.gpkg")
    out = tmp_path / "o"
    res = _plan("--out", out, "--zones", bad)
    assert res.exit_code == 2, res.output
    lines = [ln for ln in res.output.splitlines() if ln.startswith("error")]
    assert len(lines) == 1 and words in res.output and "zone" in lines[0]
    assert " 5" in " ".join(res.output.split())  # the zone edited is named
    assert not out.exists()


def test_the_plans_own_zones_unedited_give_the_same_plan(trip, tmp_path):
    # the zone means move by a fraction of a percent (cells by centre against raster regions); the
    # verdicts, the passes, the crews' rounds and the order must not move with them
    d, base, _, _ = trip
    res = _plan("--out", tmp_path / "o", "--zones", d / "base" / "zones.gpkg")
    assert res.exit_code == 0, res.output
    again = read_summary(tmp_path / "o")
    b, a = _by_id(base), _by_id(again)
    assert {i: r["verdict"] for i, r in a.items()} == {i: r["verdict"] for i, r in b.items()}
    def minutes(r):
        return [int(t[:2]) * 60 + int(t[3:]) for t in r["pass_times"].split("; ") if t]
    for i in b:  # the same passes, each within 2 min (a pass's minutes follow its dose)
        assert len(minutes(a[i])) == len(minutes(b[i])), i
        assert np.allclose(minutes(a[i]), minutes(b[i]), atol=2), i
    assert again["total_product_kg"] == pytest.approx(base["total_product_kg"], rel=0.01)
    assert again["order"]["bags_handed_out"] == pytest.approx(base["order"]["bags_handed_out"], rel=0.02)


OWN_ZONE = 4  # given urea in a rock-salt plan


@pytest.fixture(scope="module")
def own_agent(trip, tmp_path_factory):
    d, _, _, _ = trip
    z = _zones(d / "base" / "zones.gpkg")
    z["edit_agent"] = ["urea" if i == OWN_ZONE else None for i in z.zone_id]
    out = tmp_path_factory.mktemp("agent") / "o"
    res = _plan("--out", out, "--zones", _write(z, out.parent / "agent.gpkg"))
    assert res.exit_code == 0, res.output
    return out, read_summary(out), res.output


def test_a_zone_with_its_own_agent_is_dosed_with_it_and_gets_its_own_order_line(own_agent):
    out, s, output = own_agent
    z = _by_id(s)
    assert z[OWN_ZONE]["agent"] == "urea" and z[OWN_ZONE]["product_kg"] > 0
    assert {r["agent"] for i, r in z.items() if i != OWN_ZONE} == {"NaCl"}
    assert {p["agent"] for p in s["passes"] if p["zone_id"] == OWN_ZONE} == {"urea"}
    assert {p["agent"] for p in s["passes"] if p["zone_id"] != OWN_ZONE} == {"NaCl"}
    # one order line per agent, each the sum of its zones; the bags are the zones' bags
    assert [o["agent"] for o in s["other_orders"]] == ["urea"]
    urea, salt = s["other_orders"][0], s["order"]
    assert urea["p50_kg"] == pytest.approx(z[OWN_ZONE]["product_kg"], abs=0.06)
    assert salt["p50_kg"] == pytest.approx(sum(r["product_kg"] for i, r in z.items() if i != OWN_ZONE), abs=0.06)
    assert urea["bags_handed_out"] == z[OWN_ZONE]["bags"]
    assert urea["bags_handed_out"] + salt["bags_handed_out"] == sum(r["bags"] for r in z.values())
    assert sum(v["product_kg"] for v in s["by_agent"].values()) == pytest.approx(s["total_product_kg"], rel=1e-9)
    # urea is delivered to the depot of the zone's crew only
    crew = z[OWN_ZONE]["crew"]
    assert [(d["crew"], d["bags"], d["agent"]) for d in urea["deliveries"]] == [(crew, z[OWN_ZONE]["bags"], "urea")]
    assert all(d["agent"] == "NaCl" for d in salt["deliveries"])
    # only urea brings nitrogen: N = product × purity 0.99 × 28.014/60.056 (IUPAC atomic weights)
    assert s["nitrogen_kg"] == pytest.approx(z[OWN_ZONE]["product_kg"] * 0.99 * 28.014 / 60.056, rel=1e-3)
    assert any("Nitrogen agents" in c for c in s["cautions"])
    assert f"1 own agent (zone {OWN_ZONE} urea)" in next(n for n in s["notes"] if n.startswith("kept "))
    assert "of urea (CO(NH2)2)" in output and "of rock salt (NaCl)" in output


def test_the_sheets_and_the_map_name_the_zones_own_agent(own_agent, trip):
    from pypdf import PdfReader

    out, s, _ = own_agent
    def text(f):
        return " ".join(" ".join(p.extract_text().split()) for p in PdfReader(out / f).pages)
    label = _by_id(s)[OWN_ZONE]["label"]
    assert f"Zone {label}: urea (CO(NH2)2) from its own bags, not rock salt (NaCl)." in text("crews.pdf")
    assert "Order: urea (CO(NH2)2)" in text("order.pdf") and "Order: rock salt (NaCl)" in text("order.pdf")
    page = (out / "map.html").read_text(encoding="utf-8")
    assert "urea, chosen by the chief of course" in page and f"zone {OWN_ZONE} urea (CO(NH2)2)" in page
    d = trip[0]
    assert "Order: urea" not in " ".join(p.extract_text() for p in PdfReader(d / "base" / "order.pdf").pages)


# ---- the reader ----------------------------------------------------------------------------------

def _tiny(tmp_path, **cols) -> Path:
    g = gpd.GeoDataFrame({"zone_id": [1, 2], **cols}, geometry=[box(0, 0, 10, 10), box(10, 0, 20, 10)],
                         crs=32632)
    return _write(g, tmp_path / "z.gpkg")


@pytest.mark.parametrize("cols, words", [
    ({"edit_agent": ["NaCl", "unobtainium"]},
     "zone 2: edit_agent 'unobtainium' is not in the catalogue (known: "),
    ({"edit_dose_g_m2": [-3.0, np.nan]}, "zone 1: edit_dose_g_m2 is -3, a dose cannot be negative"),
    ({"edit_skip": [True, False], "edit_dose_g_m2": [5.0, np.nan]},
     "zone 1: edit_skip and edit_dose_g_m2 are both set"),
])
def test_bad_overrides_are_one_line_naming_the_zone(tmp_path, cols, words):
    from courseplan.io.zonefile import read_zones

    with pytest.raises(InputError) as e:
        read_zones(_tiny(tmp_path, **cols), "EPSG:32632")
    assert words in str(e.value) and "\n" not in str(e.value)


def test_repeated_ids_are_renumbered_with_a_note_and_labels_kept(tmp_path):
    from courseplan.io.zonefile import read_zones

    p = _tiny(tmp_path, label=["1A", None])
    g = gpd.read_file(p)
    g["zone_id"] = [3, 3]  # a split in a GIS copies the attributes
    z = read_zones(_write(g, tmp_path / "split.gpkg"), "EPSG:32632")
    assert z.zone_id == (1, 2) and z.label == ("1A", "")
    assert any("numbered 1 … 2" in n for n in z.notes)
    kept = read_zones(p, "EPSG:3857")  # reprojected to the working CRS
    assert kept.zone_id == (1, 2) and kept.geometries[0].area > 100.0


def test_a_file_without_a_zones_layer_and_two_polygon_layers_lists_them(tmp_path):
    from courseplan.io.zonefile import read_zones

    g = gpd.GeoDataFrame({"zone_id": [1]}, geometry=[box(0, 0, 1, 1)], crs=32632)
    p = tmp_path / "two.gpkg"
    g.to_file(p, layer="north", engine="pyogrio")
    g.to_file(p, layer="south", engine="pyogrio")
    with pytest.raises(InputError, match=r"no layer 'zones' but 2 polygon layers \(north, south\)"):
        read_zones(p, "EPSG:32632")


def test_plan_file_key_and_the_flag_wins(tmp_path):
    from courseplan.cli.plan import build_settings

    f = tmp_path / "p.toml"
    f.write_text('[inputs]\nzones = "edited.gpkg"\n', encoding="utf-8")
    assert build_settings(f).inputs.zones == tmp_path / "edited.gpkg"
    assert build_settings(f, zones=Path("/x/other.gpkg")).inputs.zones == Path("/x/other.gpkg")


def test_the_map_and_the_crew_sheets_say_the_dose_was_fixed(trip):
    from pypdf import PdfReader

    d, _, _, _ = trip
    assert "fixed by the chief of course" in (d / "kept" / "map.html").read_text(encoding="utf-8")
    assert "fixed by the chief of course" not in (d / "base" / "map.html").read_text(encoding="utf-8")
    text = " ".join(" ".join(p.extract_text().split()) for p in PdfReader(d / "kept" / "crews.pdf").pages)
    assert f"{FIXED_G_M2:g} g/m² every pass, fixed by the chief of course" in text
