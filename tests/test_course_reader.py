"""The direct GeoJSON reader of the course agrees with GDAL on the same files.

Reference: GDAL's GeoJSON driver through pyogrio/geopandas (the path every other format takes);
GeoJSON semantics from RFC 7946 (no ``crs`` member: WGS 84 longitude/latitude) and the legacy
``crs`` member of the 2008 GeoJSON specification.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
import shapely
from pyproj import CRS

from courseplan.errors import GeometryError
from courseplan.io import course as course_io

ROOT = Path(__file__).resolve().parents[1]
CRS_32632 = {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::32632"}}
SQ = [[400000.0, 5200000.0], [400100.0, 5200000.0], [400100.0, 5200050.0], [400000.0, 5200050.0],
      [400000.0, 5200000.0]]
HOLE = [[400010.0, 5200010.0], [400020.0, 5200010.0], [400020.0, 5200020.0], [400010.0, 5200010.0]]


def shifted(ring, dx):
    return [[x + dx, y] for x, y in ring]


def write(path: Path, doc: dict) -> Path:
    path.write_text(json.dumps(doc))
    return path


def feat(geom, **props):
    return {"type": "Feature", "properties": props, "geometry": geom}


def both(path: Path, feature=None):
    """read_course through the direct parser and through GDAL."""
    direct = course_io.read_course(path, feature)
    orig = course_io._read_geojson
    course_io._read_geojson = lambda p: None  # force the GDAL path
    try:
        gdal = course_io.read_course(path, feature)
    finally:
        course_io._read_geojson = orig
    return direct, gdal


def same(a, b):
    assert a.name == b.name
    assert a.crs == b.crs
    assert shapely.equals_exact(a.geometry, b.geometry, tolerance=1e-9), (a.geometry.wkt[:80], b.geometry.wkt[:80])
    assert a.warnings == b.warnings


def test_sample_course_same_both_ways():
    same(*both(ROOT / "sample-geodata" / "course.geojson"))


def test_direct_path_does_not_import_geopandas():
    import subprocess
    import sys

    code = ("import sys; from courseplan.io.course import read_course; "
            f"read_course({str(ROOT / 'sample-geodata' / 'course.geojson')!r}); "
            "print('geopandas' in sys.modules, 'pandas' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.split() == ["False", "False"]


@pytest.mark.parametrize("crs", [CRS_32632, None], ids=["crs-member", "rfc7946"])
def test_named_features_and_null_geometry(tmp_path, crs):
    ring = SQ if crs else [[9.0, 46.0], [9.001, 46.0], [9.001, 46.001], [9.0, 46.0]]
    doc = {"type": "FeatureCollection",
           "features": [feat(None, name="nothing"),
                        feat({"type": "Point", "coordinates": ring[0]}, name="start"),
                        feat({"type": "Polygon", "coordinates": [ring, HOLE] if crs else [ring]}, name="upper"),
                        feat({"type": "MultiPolygon", "coordinates": [[shifted(ring, 0.01 if not crs else 500)]]},
                             name="lower")]}
    if crs:
        doc["crs"] = crs
    p = write(tmp_path / "two.geojson", doc)
    for pick in ("upper", "lower", "1", "0"):
        a, b = both(p, pick)
        same(a, b)
    assert both(p, "lower")[0].geometry.geom_type == "MultiPolygon"
    assert both(p, "upper")[0].crs == (CRS.from_epsg(32632) if crs else CRS.from_epsg(4326))
    for reader in (lambda: course_io.read_course(p), lambda: both(p)[1]):
        with pytest.raises(GeometryError, match="holds 2 polygons"):
            reader()
    with pytest.raises(GeometryError, match="no course polygon matches 'middle'"):
        course_io.read_course(p, "middle")


def test_single_feature_without_name_takes_file_stem(tmp_path):
    p = write(tmp_path / "piste.geojson", {**feat({"type": "Polygon", "coordinates": [SQ]}), "crs": CRS_32632})
    a, b = both(p)
    same(a, b)
    assert a.name == "piste"


def test_invalid_polygon_repaired_the_same_way(tmp_path):
    spike = SQ[:2] + [[400100.0, 5200050.0], [400050.0, 5200049.0], [400050.0, 5200051.0],
                      [400050.0, 5200049.5]] + SQ[3:]
    doc = {"type": "FeatureCollection", "crs": CRS_32632,
           "features": [feat({"type": "Polygon", "coordinates": [spike]}, name="c")]}
    a, b = both(write(tmp_path / "spike.geojson", doc))
    same(a, b)
    assert a.warnings and "was invalid" in a.warnings[0]


def test_unusual_geojson_falls_back_to_gdal(tmp_path):
    # A bare geometry is not a feature collection: the direct parser declines, GDAL reads it.
    p = write(tmp_path / "bare.geojson", {"type": "Polygon", "coordinates": [SQ], "crs": CRS_32632})
    assert course_io._read_geojson(p) is None
    c = course_io.read_course(p)
    assert c.geometry.area == pytest.approx(100 * 50)


@pytest.mark.parametrize("gj", [
    {"type": "Polygon", "coordinates": [SQ, HOLE]},
    {"type": "Polygon", "coordinates": [[p + [1800.0] for p in SQ]]},
    {"type": "MultiPolygon", "coordinates": [[SQ], [shifted(SQ, 500.0), shifted(HOLE, 500.0)]]},
    {"type": "Polygon", "coordinates": []},
    {"type": "MultiPolygon", "coordinates": []},
    {"type": "Point", "coordinates": [1.0, 2.0]},
    {"type": "LineString", "coordinates": SQ[:3]},
], ids=["hole", "3d", "multi", "empty", "empty-multi", "point", "line"])
def test_array_built_geometry_equals_shapely_shape(gj):
    # Reference: shapely.geometry.shape, the general GeoJSON-to-geometry constructor.
    from shapely.geometry import shape

    from courseplan.geo.geometry import geometry_from_geojson

    got, ref = geometry_from_geojson(gj), shape(gj)
    assert got.geom_type == ref.geom_type
    assert got.has_z == ref.has_z
    assert shapely.equals_exact(got, ref, tolerance=0.0) or (got.is_empty and ref.is_empty)


def test_needle_thin_spike_is_dropped_at_the_reader(tmp_path):
    # A valid outline with a needle 0.08 mm wide: the reader snaps to 1 mm, the needle collapses
    # and is dropped; what is left is valid and its area is the square's (hand value 100 × 50 m²).
    ring = SQ[:2] + [[400100.0, 5200025.0], [400160.0, 5200025.00008], [400100.0, 5200025.00016]] + SQ[2:]
    doc = {"type": "FeatureCollection", "crs": CRS_32632,
           "features": [feat({"type": "Polygon", "coordinates": [ring]}, name="c")]}
    a, b = both(write(tmp_path / "needle.geojson", doc))
    same(a, b)
    assert shapely.Polygon(ring).is_valid
    assert a.geometry.is_valid
    assert a.geometry.area == pytest.approx(5000.0, abs=1e-6)
    assert a.geometry.bounds[2] == pytest.approx(400100.0)


def test_zero_width_spike_and_line_parts_are_dropped():
    from courseplan.geo.geometry import clean_polygon

    spike = shapely.Polygon([(0, 0), (10, 0), (10, 5), (20, 5), (10, 5), (10, 10), (0, 10)])
    assert not spike.is_valid
    g = clean_polygon(spike, 1e-3)
    assert g.is_valid and g.geom_type == "Polygon"
    assert g.area == pytest.approx(100.0)
    assert clean_polygon(shapely.box(0, 0, 1e-4, 1e-4), 1e-3).is_empty
