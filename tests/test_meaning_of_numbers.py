"""Numbers mean what they say: CRS areas, raster orientation and units, bands, forecast and
observation plausibility.  Each case: one line and exit 2, or a note where the plan can be trusted.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from affine import Affine
from pyproj import Transformer
from test_bad_input import CRS_32632, DATE, SQUARE, X0, Y0, feature, geojson, good, polygon, refused, run  # noqa: F401


def tif(path, arrays, transform, crs="EPSG:32632", descriptions=None, units=None, nodata=-9999.0):
    import rasterio

    arrays = [np.asarray(a, dtype=np.float32) for a in arrays]
    with rasterio.open(path, "w", driver="GTiff", height=arrays[0].shape[0], width=arrays[0].shape[1],
                       count=len(arrays), dtype="float32", crs=crs, transform=transform, nodata=nodata) as ds:
        for i, a in enumerate(arrays, start=1):
            ds.write(a, i)
            if descriptions:
                ds.set_band_description(i, descriptions[i - 1])
            if units:
                ds.set_band_unit(i, units[i - 1])
    return path


NORTH_UP = Affine(5, 0, X0 - 50, 0, -5, Y0 + 350)
RAMP = np.tile(np.linspace(0, 1, 60, dtype=np.float32), (80, 1))


def summary(out):
    return json.loads((out / "summary.json").read_text())


def geodesic_square() -> float:
    from courseplan.io.loader import geodesic_area_m2
    from shapely.geometry import Polygon
    from pyproj import CRS

    return geodesic_area_m2(Polygon(SQUARE), CRS.from_epsg(32632))


# ---------------------------------------------------------------- CRS and areas

def test_web_mercator_course_and_raster_are_reprojected_to_utm(good, tmp_path):
    tr = Transformer.from_crs(32632, 3857, always_xy=True)
    ring = [list(tr.transform(x, y)) for x, y in SQUARE]
    crs = {"type": "name", "properties": {"name": "EPSG:3857"}}
    course = geojson(tmp_path / "merc.geojson", [feature(polygon(ring))], crs=crs)
    x0, y0 = tr.transform(X0 - 60, Y0 + 360)
    sun = tif(tmp_path / "merc.tif", [np.tile(np.linspace(0, 1, 90), (130, 1))], Affine(6, 0, x0, 0, -6, y0),
              crs="EPSG:3857")
    res = run(good.args(course=course, sun=sun))
    assert res.exit_code == 0, res.output
    s = summary(good.out)
    assert s["crs"] == "EPSG:32632"
    assert s["course_area_m2"] == pytest.approx(geodesic_square(), rel=0.005)
    assert sum(z["area_m2"] for z in s["zones"]) == pytest.approx(geodesic_square(), rel=0.005)


def test_distorting_working_crs_setting_refused(good):
    refused(run(good.args("--set", "inputs.crs=EPSG:3857")), good.out, "distorts the course area", "UTM")


# ---------------------------------------------------------------- raster orientation and units

def test_rotated_raster_refused(good, tmp_path):
    p = tif(tmp_path / "rot.tif", [RAMP], Affine(5, 0.5, X0 - 50, 0.5, -5, Y0 + 350))
    refused(run(good.args(sun=p)), good.out, "rotated", "rio warp")


def test_south_up_raster_refused_as_south_up(good, tmp_path):
    p = tif(tmp_path / "south.tif", [RAMP], Affine(5, 0, X0 - 50, 0, 5, Y0 - 50))
    text = refused(run(good.args(sun=p)), good.out, "south-up")
    assert "does not overlap" not in text


def test_dem_in_feet_is_converted_to_metres(tmp_path):
    from courseplan.io.rasters import read_dem

    p = tif(tmp_path / "ft.tif", [np.full((20, 20), 1000.0)], NORTH_UP, units=["ft"])
    assert np.allclose(read_dem(p).values, 304.8)
    q = tif(tmp_path / "usft.tif", [np.full((20, 20), 3937.0)], NORTH_UP, units=["us-ft"])
    assert np.allclose(read_dem(q).values, 1200.0, rtol=1e-6)


def test_dem_unknown_unit_refused(good, tmp_path):
    dem = tif(tmp_path / "dem.tif", [np.full((80, 60), 1500.0)], NORTH_UP, units=["furlong"])
    refused(run(good.args("--dem", dem)), good.out, "furlong", "unit")


def test_dem_nodata_share_over_the_limit_refused(good, tmp_path):
    a = np.full((80, 60), 1500.0, dtype=np.float32)
    a[:40] = -9999.0
    dem = tif(tmp_path / "dem.tif", [a], NORTH_UP)
    refused(run(good.args("--dem", dem)), good.out, "DEM covers only", "max_uncovered_pct")


# ---------------------------------------------------------------- bands and Wh/m²

def _two_band(tmp_path, ours=True):
    wh = 1500.0 + 500.0 * RAMP
    return tif(tmp_path / "sun2.tif", [RAMP, wh], NORTH_UP,
               descriptions=["sun_fraction", "irradiation_wh_m2"] if ours else ["a", "b"])


@pytest.mark.parametrize("encoding, band", [("fraction", 1), ("wh_m2", 2)])
def test_courseplan_sun_raster_band_follows_the_encoding(good, tmp_path, encoding, band):
    from courseplan.io.loader import load_inputs
    from courseplan.settings import settings_from_mapping

    p = _two_band(tmp_path)
    s = settings_from_mapping({"plan": {"date": DATE}, "inputs": {"course": str(good.course), "sun": str(p),
                                                                   "sun_encoding": encoding}})
    sun = load_inputs(s).sun
    assert f"band {band}" in sun.source
    assert (np.nanmax(sun.values) <= 1.0) if band == 1 else (np.nanmin(sun.values) >= 1500.0)
    res = run(good.args("--sun-encoding", encoding, sun=p))
    assert res.exit_code == 0, res.output


def test_courseplan_sun_raster_percent_refused(good, tmp_path):
    refused(run(good.args("--sun-encoding", "percent", sun=_two_band(tmp_path))), good.out,
            "sun_fraction (band 1)", "irradiation_wh_m2 (band 2)")


def test_sun_band_contradicting_the_encoding_refused(good, tmp_path):
    refused(run(good.args("--set", "inputs.sun_band=1", "--sun-encoding", "wh_m2", sun=_two_band(tmp_path))),
            good.out, "band 1", "sun_fraction", "sun_encoding")


def test_unknown_multi_band_raster_needs_sun_band(good, tmp_path):
    p = _two_band(tmp_path, ours=False)
    refused(run(good.args(sun=p)), good.out, "2 bands", "sun_band")
    res = run(good.args("--set", "inputs.sun_band=1", sun=p))
    assert res.exit_code == 0, res.output


@pytest.mark.parametrize("scale, words", [(1e-3, ["kWh/m²"]), (1e3, ["J/m²"])])
def test_wh_m2_raster_a_thousand_times_off_refused(good, tmp_path, scale, words):
    p = tif(tmp_path / "wh.tif", [(1500.0 + 500.0 * RAMP) * scale], NORTH_UP)
    refused(run(good.args("--sun-encoding", "wh_m2", sun=p)), good.out, "clear sky", *words)


# ---------------------------------------------------------------- forecast

FC_HEAD = "time,air_temp_c,rh_pct,wind_m_s,cloud_fraction\n"


def forecast(tmp_path, hours, temp=2.0, name="fc.csv", temps=None):
    rows = [f"{DATE}T{h:02d}:00,{(temps[i] if temps else temp)},80,2,0.2\n" for i, h in enumerate(hours)]
    p = tmp_path / name
    p.write_text(FC_HEAD + "".join(rows), encoding="utf-8")
    return p


def test_forecast_baseline(good, tmp_path):
    res = run(good.args("--forecast", forecast(tmp_path, range(4, 16))))
    assert res.exit_code == 0, res.output


def test_forecast_in_fahrenheit_refused(good, tmp_path):
    p = forecast(tmp_path, range(4, 16), temps=[34 + i for i in range(12)])
    refused(run(good.args("--forecast", p)), good.out, "°F?")


def test_forecast_hot_value_hints_fahrenheit(good, tmp_path):
    p = forecast(tmp_path, range(4, 16), temps=[2.0] * 11 + [50.0])
    refused(run(good.args("--forecast", p)), good.out, "air_temp_c 50", "°F?")


def test_forecast_gap_inside_the_race_day_refused(good, tmp_path):
    p = forecast(tmp_path, [4, 5, 6, 7, 8, 12, 13, 14, 15])
    refused(run(good.args("--forecast", p)), good.out, "gap of 4.0 h", "08:00", "12:00")


# ---------------------------------------------------------------- observations

OBS_HEAD = "obs_id,time,lon,lat,wetness,lwc_pct,snow_temp_c,density_kg_m3\n"


def _lonlat():
    return Transformer.from_crs(32632, 4326, always_xy=True).transform(X0 + 100, Y0 + 150)


def obs(tmp_path, rows, name="obs.csv", encoding="utf-8", head=OBS_HEAD):
    lon, lat = _lonlat()
    p = tmp_path / name
    p.write_bytes((head + "".join(r.format(lon=lon, lat=lat) + "\n" for r in rows)).encode(encoding))
    return p


def test_old_observations_left_out_with_a_note(good, tmp_path):
    p = obs(tmp_path, ["A,2027-03-18T07:30+01:00,{lon},{lat},wet,4.0,0.0,560",
                       "B,2027-03-10T07:30+01:00,{lon},{lat},wet,4.0,0.0,560",
                       "C,2027-03-01T07:30+01:00,{lon},{lat},wet,4.0,0.0,560"])
    res = run(good.args("--observations", p))
    assert res.exit_code == 0, res.output
    notes = " ".join(summary(good.out)["notes"])
    assert "2 of 3 observations are dated more than 2 days" in notes


def test_all_observations_old_refused(good, tmp_path):
    p = obs(tmp_path, ["B,2026-03-10T07:30+01:00,{lon},{lat},wet,4.0,0.0,560"])
    refused(run(good.args("--observations", p)), good.out, "all 1 observations", "race day")


def test_observations_far_away_with_swapped_lon_lat(good, tmp_path):
    p = obs(tmp_path, ["A,2027-03-18T07:30+01:00,{lat},{lon},wet,4.0,0.0,560"])
    refused(run(good.args("--observations", p)), good.out, "1 of 1 observations", "km from the course",
            "swapped", "swap the lon and lat")


def test_observations_far_away_without_swap_hint(good, tmp_path):
    p = obs(tmp_path, ["A,2027-03-18T07:30+01:00,10.5,47.9,wet,4.0,0.0,560"])
    text = refused(run(good.args("--observations", p)), good.out, "km from the course")
    assert "swap" not in text


# ---------------------------------------------------------------- course layers

def test_geopackage_with_several_polygon_layers(good, tmp_path):
    import geopandas as gpd
    from shapely.geometry import Polygon, box

    p = tmp_path / "course.gpkg"
    gpd.GeoDataFrame({"name": ["c"]}, geometry=[Polygon(SQUARE)], crs=32632).to_file(p, layer="slalom")
    gpd.GeoDataFrame({"name": ["f"]}, geometry=[box(X0, Y0, X0 + 50, Y0 + 50)], crs=32632).to_file(p, layer="finish")
    refused(run(good.args(course=p)), good.out, "2 polygon layers", "slalom", "finish", "course_layer")
    res = run(good.args("--set", "inputs.course_layer=slalom", course=p))
    assert res.exit_code == 0, res.output
    assert summary(good.out)["course_area_m2"] == pytest.approx(60_000, rel=0.01)
    import shutil

    shutil.rmtree(good.out)
    refused(run(good.args("--set", "inputs.course_layer=gs", course=p)), good.out, "no layer 'gs'")
