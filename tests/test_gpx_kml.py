"""GPX and KML/KMZ inputs: tracks and routes as centreline, closed ones and KML polygons as course.

Reference: GDAL's GPX driver (layers waypoints, routes, tracks, route_points, track_points; tracks
are multi-line strings) and KML/LIBKML drivers (one layer per folder), read through pyogrio.
Hand values: a square of 0.001° × 0.001° at 46° N (about 77 m × 111 m).
"""

from __future__ import annotations

import zipfile
from pathlib import Path

import pytest
import shapely

from courseplan.errors import GeometryError, InputError
from courseplan.io.course import read_centreline, read_course

SQ = [(9.0, 46.0), (9.001, 46.0), (9.001, 46.001), (9.0, 46.001), (9.0, 46.0)]
LINE = [(9.0, 46.002), (9.0005, 46.001), (9.001, 46.0)]


def _pts(tag, coords):
    return "".join(f'<{tag} lat="{y}" lon="{x}"><ele>1500</ele></{tag}>' for x, y in coords)


def gpx(path: Path, *, tracks=(), routes=(), waypoints=()) -> Path:
    body = _pts("wpt", waypoints)
    for name, coords in routes:
        body += f"<rte><name>{name}</name>{_pts('rtept', coords)}</rte>"
    for name, coords in tracks:
        body += f"<trk><name>{name}</name><trkseg>{_pts('trkpt', coords)}</trkseg></trk>"
    path.write_text('<?xml version="1.0" encoding="UTF-8"?>\n<gpx version="1.1" creator="courseplan-tests" '
                    f'xmlns="http://www.topografix.com/GPX/1/1">{body}</gpx>')
    return path


def kml_doc(placemarks: str) -> str:
    return ('<?xml version="1.0" encoding="UTF-8"?><kml xmlns="http://www.opengis.net/kml/2.2"><Document>'
            f'<Folder><name>course</name>{placemarks}</Folder></Document></kml>')


def kml_polygon(name, coords):
    c = " ".join(f"{x},{y},0" for x, y in coords)
    return (f"<Placemark><name>{name}</name><Polygon><outerBoundaryIs><LinearRing><coordinates>{c}"
            "</coordinates></LinearRing></outerBoundaryIs></Polygon></Placemark>")


def test_gpx_track_is_the_centreline_not_the_empty_waypoints(tmp_path):
    p = gpx(tmp_path / "line.gpx", tracks=[("GS run", LINE)])
    line, crs, _ = read_centreline(p)
    assert crs.to_epsg() == 4326
    assert line.geom_type == "LineString"
    assert [c[:2] for c in line.coords] == LINE


def test_gpx_route_is_a_centreline_too(tmp_path):
    p = gpx(tmp_path / "route.gpx", routes=[("planned", LINE)], waypoints=[(9.0, 46.002)])
    line, _, _ = read_centreline(p)
    assert [c[:2] for c in line.coords] == LINE


def test_several_gpx_lines_are_listed_by_name_and_one_can_be_picked(tmp_path):
    p = gpx(tmp_path / "two.gpx", tracks=[("men GS", LINE)], routes=[("ladies GS", LINE[::-1])])
    with pytest.raises(InputError, match="holds 2 lines") as e:
        read_centreline(p)
    assert "men GS" in str(e.value) and "ladies GS" in str(e.value)
    assert "centreline_feature" in str(e.value)
    line, _, _ = read_centreline(p, "ladies GS")
    assert [c[:2] for c in line.coords] == LINE[::-1]


def test_gpx_with_only_waypoints_says_what_it_found(tmp_path):
    p = gpx(tmp_path / "pts.gpx", waypoints=[(9.0, 46.0), (9.001, 46.001)])
    with pytest.raises(InputError, match="holds no line"):
        read_centreline(p)


def test_closed_gpx_track_is_the_course_polygon(tmp_path):
    p = gpx(tmp_path / "outline.gpx", tracks=[("outline", SQ)])
    c = read_course(p)
    assert c.geometry.geom_type == "Polygon"
    assert c.crs.to_epsg() == 4326
    assert c.geometry.area == pytest.approx(1e-6, rel=1e-6)
    assert c.name == "outline"


def test_open_gpx_track_is_refused_as_course_with_a_hint(tmp_path):
    p = gpx(tmp_path / "open.gpx", tracks=[("run", LINE)])
    with pytest.raises(GeometryError, match="no polygon") as e:
        read_course(p)
    assert "centreline" in str(e.value)


@pytest.mark.parametrize("kmz", [False, True], ids=["kml", "kmz"])
def test_kml_and_kmz_polygon_is_the_course(tmp_path, kmz):
    doc = kml_doc(kml_polygon("Ulmenkar GS", SQ))
    if kmz:
        p = tmp_path / "course.kmz"
        with zipfile.ZipFile(p, "w") as z:
            z.writestr("doc.kml", doc)
    else:
        p = tmp_path / "course.kml"
        p.write_text(doc)
    c = read_course(p)
    assert c.geometry.geom_type == "Polygon"
    assert c.crs.to_epsg() == 4326
    assert shapely.equals_exact(shapely.normalize(c.geometry), shapely.normalize(shapely.Polygon(SQ)), 1e-9)
    assert c.name == "Ulmenkar GS"


def test_no_gdal_command_line_tools_in_hints():
    # pip installs no GDAL command-line programs; hints name rasterio's rio or geopandas/pyogrio.
    root = Path(__file__).resolve().parents[1] / "courseplan"
    text = "\n".join(p.read_text(encoding="utf-8") for p in root.rglob("*.py"))
    for tool in ("gdal_edit", "ogr2ogr", "gdalwarp", "gdal_translate", "ogrinfo", "gdalinfo"):
        assert tool not in text, tool
