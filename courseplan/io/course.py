"""Read the course outline: one polygon from any vector file GDAL reads, with its CRS checked."""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field
from pathlib import Path

import shapely
from pyproj import CRS
from shapely.geometry.base import BaseGeometry

from courseplan.errors import CRSError, GeometryError, InputError
from courseplan.io.files import check_readable

_SET_CRS = ("with geopandas (on pyogrio): python -c \"import geopandas as g; "
            "g.read_file('in.shp').set_crs({epsg}, allow_override=True).to_file('out.gpkg')\"")
"""Fix hint for a vector file's CRS, with the project's own dependencies (no GDAL command-line tools)."""

MULTI_LAYER = (".gpx", ".kml", ".kmz")
"""Formats whose features are spread over several layers (GPX: waypoints, routes, tracks, …;
KML/KMZ: one layer per folder): every layer is read, not just the first."""

GPX_CLOSE_M = 5.0
"""A GPX track or route whose ends are closer than this [m] is a closed outline (a course polygon);
[P] common practice for a walked outline, no source."""


@dataclass(frozen=True)
class Course:
    """A course outline as read: geometry in its own CRS, plus what was repaired."""

    geometry: BaseGeometry
    crs: CRS
    name: str
    source: str
    warnings: tuple[str, ...] = field(default=())


def check_coordinates_match_crs(bounds: tuple[float, float, float, float], crs: CRS, where: str) -> None:
    """Refuse coordinates that cannot be in *crs* (degrees in a metric CRS or metres in a geographic one)."""
    minx, miny, maxx, maxy = bounds
    if crs.is_geographic:
        if minx < -180.5 or maxx > 360.5 or miny < -90.5 or maxy > 90.5:
            raise CRSError(f"coordinates {minx:.1f}, {miny:.1f} … {maxx:.1f}, {maxy:.1f} are not degrees, "
                           f"but the file says {crs.to_string()}", where=where,
                           fix="set the file's real (projected) CRS, e.g. " + _SET_CRS.format(epsg=32632))
    else:
        if (-181 < minx and maxx < 181 and -91 < miny and maxy < 91
                and (maxx - minx) < 1.0 and (maxy - miny) < 1.0):
            raise CRSError(f"coordinates {minx:.5f}, {miny:.5f} … {maxx:.5f}, {maxy:.5f} look like degrees, "
                           f"but the file says {crs.to_string()} (metres)", where=where,
                           fix="set the file's CRS to EPSG:4326, e.g. " + _SET_CRS.format(epsg=4326))


def read_course(path: Path, feature: str | None = None, layer: str | None = None) -> Course:
    """Read one course polygon.

    Parameters
    ----------
    path
        Vector file (GeoJSON, GeoPackage, Shapefile, KML, ...).
    feature
        Which feature to take when the file holds several polygons: a value of a ``name`` field or
        a 0-based index.
    layer
        Which layer to read from a multi-layer file (GeoPackage): needed when several layers hold
        polygons, which are then listed by name.

    A GeoJSON file (RFC 7946, with or without the legacy ``crs`` member of the 2008 GeoJSON
    specification) is parsed with :mod:`json` and :func:`shapely.geometry.shape`, without GDAL: that
    keeps pandas and geopandas out of the zoning stage.  Every other format, and any GeoJSON the
    direct parser does not understand, goes through GDAL (``geopandas.read_file`` on pyogrio); both
    paths share the selection and checks below.

    Raises
    ------
    MissingInputError, InputError, GeometryError, CRSError
        With one line saying what is wrong and how to fix it.
    """
    p = check_readable(path, "course")
    table = _read_geojson(p) if p.suffix.lower() in (".geojson", ".json") and layer is None else None
    if table is None:
        table = _read_with_gdal(p, layer)
    crs, columns, geoms, props = table
    if crs is None:
        raise CRSError("the course file has no CRS", where=str(p),
                       fix="save it with a CRS, or assign one, e.g. " + _SET_CRS.format(epsg=32632))
    kept = [i for i, g in enumerate(geoms) if g is not None]
    polys = [i for i in kept if geoms[i].geom_type in ("Polygon", "MultiPolygon")]
    if not polys:
        kinds = ", ".join(sorted({geoms[i].geom_type for i in kept})) or "no geometries"
        gpx = p.suffix.lower() == ".gpx"
        raise GeometryError(f"the course file holds no polygon (found: {kinds})", where=str(p),
                            fix="draw the course outline as a closed track or route (ends within "
                                f"{GPX_CLOSE_M:g} m); an open one works as --centreline" if gpx else
                            "draw the course outline as a polygon")
    name_col = next((c for c in columns if c.lower() in ("name", "course", "label")), None)
    names = [props[i].get(name_col) if name_col else None for i in polys]
    if len(polys) > 1 and feature is None:
        shown = [str(v) for v in names] if name_col else [str(i) for i in range(len(polys))]
        raise GeometryError(f"the course file holds {len(polys)} polygons ({', '.join(shown[:8])})",
                            where=str(p),
                            fix="pick one with --course-feature NAME_OR_INDEX or [inputs] course_feature")
    k = _pick(names, feature, name_col, p) if feature is not None else 0
    geom = geoms[polys[k]]
    name = str(names[k]) if name_col and names[k] is not None else p.stem
    check_coordinates_match_crs(tuple(geom.bounds), crs, str(p))
    geom, notes = repair_polygon(geom, str(p))
    geom, more = clean_course(geom, crs, str(p))
    return Course(geometry=geom, crs=crs, name=name, source=str(p), warnings=tuple(notes + more))


SNAP_M = 1e-3
"""Grid the course vertices are snapped to in a projected CRS [CRS units, metres]; see
:func:`courseplan.geo.geometry.clean_polygon`."""
SNAP_DEG = 1e-8
"""The same grid in a geographic CRS [°] (about 1.1 mm of latitude)."""


def clean_course(geom: BaseGeometry, crs: CRS, where: str) -> tuple[BaseGeometry, list[str]]:
    """Snap the course to a 1 mm grid and drop the zero-width spikes and slivers that collapse.

    Zoning burns the course into the raster by GDAL's all-touched rule; a part a fraction of a
    millimetre wide lying on a cell edge touches no cell and no zone could cover it, so the zones
    would miss the course area by that sliver.  Returns the cleaned polygon and a warning when the
    cleaning changed the area by more than a millionth or dropped a part.
    """
    from courseplan.geo.geometry import clean_polygon

    g = clean_polygon(geom, SNAP_DEG if crs.is_geographic else SNAP_M)
    if g.is_empty or g.area <= 0:
        raise GeometryError("the course polygon is empty or has zero area after dropping zero-width parts",
                            where=where, fix="draw the outline with at least three distinct corners")
    notes = []
    n0, n1 = shapely.get_num_geometries(geom), shapely.get_num_geometries(g)
    change = abs(g.area - geom.area) / g.area
    if n1 != n0 or change > 1e-6:
        notes.append(f"{where}: zero-width spikes or slivers narrower than 1 mm dropped from the course "
                     f"({n0 - n1} part(s), area changed by {100 * change:.4f} %)")
    return g, notes


Table = tuple["CRS | None", list[str], list["BaseGeometry | None"], list[dict]]


def _choose_layer(p: Path, layer: str | None) -> str | None:
    """The layer to read: the one asked for, the only polygon layer, or None for a one-layer file."""
    import pyogrio

    try:
        layers = [(str(n), str(t or "")) for n, t in pyogrio.list_layers(p)]
    except Exception:  # not a multi-layer file GDAL lists: let read_file say what is wrong
        return layer
    names = [n for n, _ in layers]
    if layer is not None:
        if layer not in names:
            raise GeometryError(f"the course file has no layer {layer!r} (layers: {', '.join(names)})",
                                where=str(p), fix="set [inputs] course_layer to one of the names listed")
        return layer
    if len(layers) <= 1:
        return None
    polys = [n for n, t in layers if "polygon" in t.lower() or t.lower() in ("", "unknown")]
    if len(polys) > 1:
        raise GeometryError(f"the course file holds {len(polys)} polygon layers ({', '.join(polys[:12])})",
                            where=str(p), fix=f'pick one with [inputs] course_layer = "{polys[0]}" (or '
                                              f"--set inputs.course_layer={polys[0]})")
    return polys[0] if polys else None


def read_layers(p: Path, what: str, layer: str | None = None):
    """The layers of a vector file as GeoDataFrames, ``[(layer name, frame), …]``.

    The layer asked for; else every non-empty layer for GPX, KML and KMZ (:data:`MULTI_LAYER`);
    else the one polygon layer (several are listed by name: :func:`_choose_layer`).  Read by GDAL
    through pyogrio; KMZ through GDAL's LIBKML driver.
    """
    import geopandas as gpd
    import pyogrio

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            if layer is not None or p.suffix.lower() not in MULTI_LAYER:
                chosen = _choose_layer(p, layer)
                gdf = (gpd.read_file(p, layer=chosen, engine="pyogrio") if chosen is not None
                       else gpd.read_file(p, engine="pyogrio"))
                return [(chosen or "", gdf)]
            out = []
            for name, _kind in pyogrio.list_layers(p):
                gdf = gpd.read_file(p, layer=str(name), engine="pyogrio")
                if len(gdf) and gdf.geometry.notna().any():
                    out.append((str(name), gdf))
            if not out:
                out = [("", gpd.read_file(p, engine="pyogrio"))]
            return out
    except GeometryError:
        raise
    except Exception as exc:  # pyogrio raises several types for unreadable data
        raise InputError(f"cannot read the {what} as a vector file ({type(exc).__name__}: "
                         f"{str(exc).splitlines()[0] if str(exc) else 'no detail'})", where=str(p),
                         fix=f"give a GeoJSON, GeoPackage, Shapefile, KML/KMZ or GPX file holding the {what}") from None


def _closed_lines_as_polygons(gdf):
    """GPX has no polygons: a track or route whose ends meet (within :data:`GPX_CLOSE_M`) is one."""
    from shapely.geometry import Polygon

    from courseplan.geo.geometry import polygonal

    def as_poly(g):
        if g is None or g.geom_type not in ("LineString", "MultiLineString"):
            return g
        line = shapely.line_merge(g) if g.geom_type == "MultiLineString" else g
        if line.geom_type != "LineString" or len(line.coords) < 4:
            return g
        (x0, y0), (x1, y1) = line.coords[0][:2], line.coords[-1][:2]
        import math
        gap_m = math.hypot((x1 - x0) * 111320.0 * math.cos(math.radians(y0)), (y1 - y0) * 110540.0)
        if gap_m > GPX_CLOSE_M:
            return g
        poly = Polygon([c[:2] for c in line.coords])
        return poly if poly.is_valid else polygonal(shapely.make_valid(poly))

    gdf = gdf.copy()
    gdf[gdf.geometry.name] = [as_poly(g) for g in gdf.geometry]
    return gdf


def _read_with_gdal(p: Path, layer: str | None = None) -> Table:
    """CRS, property names, geometries and properties of a vector file read by GDAL (pyogrio)."""
    import pandas as pd

    layers = read_layers(p, "course", layer)
    if p.suffix.lower() == ".gpx":
        layers = [(n, _closed_lines_as_polygons(g)) for n, g in layers]
    gdf = layers[0][1] if len(layers) == 1 else pd.concat([g.to_crs(layers[0][1].crs) if g.crs is not None
                                                           and layers[0][1].crs is not None else g
                                                           for _, g in layers], ignore_index=True)
    crs = CRS.from_user_input(gdf.crs) if gdf.crs is not None else None
    columns = [str(c) for c in gdf.columns if c != gdf.geometry.name]
    geoms = list(gdf.geometry)
    props = gdf[columns].to_dict("records") if columns else [{} for _ in geoms]
    return crs, columns, geoms, props


def _read_geojson(p: Path) -> Table | None:
    """CRS, property names, geometries and properties of a GeoJSON file, or None to let GDAL try.

    Without a ``crs`` member the coordinates are WGS 84 longitude/latitude (RFC 7946 §4), reported
    as EPSG:4326 in x = longitude order, as GDAL does.
    """
    import json

    from courseplan.geo.geometry import geometry_from_geojson

    try:
        doc = json.loads(p.read_bytes())
        kind = doc.get("type")
        if kind == "FeatureCollection":
            feats = doc["features"]
        elif kind == "Feature":
            feats = [doc]
        else:
            return None
        crs_member = doc.get("crs")
        if crs_member is None:
            crs = CRS.from_epsg(4326)
        elif crs_member.get("type") == "name":
            crs = CRS.from_user_input(crs_member["properties"]["name"])
        else:
            return None
        columns: list[str] = []
        geoms: list[BaseGeometry | None] = []
        props: list[dict] = []
        for f in feats:
            if not isinstance(f, dict) or f.get("type") != "Feature":
                return None
            g = f.get("geometry")
            geoms.append(geometry_from_geojson(g) if g else None)
            pr = f.get("properties") or {}
            if not isinstance(pr, dict):
                return None
            columns.extend(c for c in pr if c not in columns)
            props.append(pr)
    except Exception:  # anything unusual: GDAL reads it, or says clearly why it cannot
        return None
    return crs, columns, geoms, props


def _pick(names: list, feature: str, name_col: str | None, p: Path) -> int:
    """Index among the polygons of the one named *feature* (a name-field value or a 0-based index)."""
    if name_col is not None:
        hit = [i for i, v in enumerate(names) if str(v) == str(feature)]
        if len(hit) == 1:
            return hit[0]
    if str(feature).isdigit() and int(feature) < len(names):
        return int(feature)
    valid = ([str(v) for v in names] if name_col else []) + [str(i) for i in range(len(names))]
    raise GeometryError(f"no course polygon matches {feature!r}", where=str(p),
                        fix="use one of: " + ", ".join(valid[:12]))


def repair_polygon(geom: BaseGeometry, where: str, max_change: float = 0.01) -> tuple[BaseGeometry, list[str]]:
    """Check a course polygon; repair an invalid one when the repair changes its area by < 1 %.

    Returns the (possibly repaired) geometry and warnings that say where it was invalid.
    """
    notes: list[str] = []
    zero = GeometryError("the course polygon is empty or has zero area", where=where,
                         fix="draw the outline with at least three distinct corners")
    # a self-intersecting "bow tie" has zero signed area but is not empty: judge it after repair
    if geom.is_empty or (geom.area <= 0 and geom.is_valid):
        raise zero
    if not geom.is_valid:
        reason = shapely.is_valid_reason(geom)
        fixed = shapely.make_valid(geom)
        if fixed.geom_type == "GeometryCollection":
            fixed = shapely.unary_union([g for g in fixed.geoms if g.geom_type in ("Polygon", "MultiPolygon")])
        if fixed.is_empty or fixed.area <= 0:
            raise zero
        change = abs(fixed.area - abs(geom.area)) / max(fixed.area, 1e-12) if not fixed.is_empty else 1.0
        if fixed.is_empty or fixed.geom_type not in ("Polygon", "MultiPolygon") or change > max_change:
            raise GeometryError(f"the course polygon is invalid ({reason}) and cannot be repaired safely",
                                where=where, fix="redraw the outline without crossing edges")
        notes.append(f"{where}: the course polygon was invalid ({reason}); repaired, area changed by "
                     f"{100 * change:.2f} %")
        geom = fixed
    return geom, notes


def read_centreline(path: Path, feature: str | None = None) -> tuple[BaseGeometry, CRS, str]:
    """Read the course centreline: one line from start to finish, with its CRS.

    Any vector format GDAL reads; in a GPX file the tracks and routes (not the waypoints), in a
    KML/KMZ file every folder.  A multi-segment track is merged into one line when its segments
    join.  When the file holds several lines, *feature* (a ``name`` value or a 0-based index) picks
    one; without it the error lists their names.

    Returns
    -------
    (line, crs, source)
    """
    p = check_readable(path, "centreline")
    layers = read_layers(p, "centreline")
    found: list[tuple[str, str, BaseGeometry, CRS | None]] = []  # (layer, name, line, crs)
    seen = []
    for layer, gdf in layers:
        crs = CRS.from_user_input(gdf.crs) if gdf.crs is not None else None
        name_col = next((c for c in gdf.columns if str(c).lower() in ("name", "label")), None)
        kinds = sorted({g.geom_type for g in gdf.geometry if g is not None})
        seen.append(f"{layer or p.stem}: {len(gdf)} × {'/'.join(kinds) or 'nothing'}")
        for i, g in enumerate(gdf.geometry):
            if g is not None and g.geom_type in ("LineString", "MultiLineString") and not g.is_empty:
                nm = gdf[name_col].iloc[i] if name_col is not None else None
                found.append((layer, str(nm) if nm is not None and str(nm) not in ("", "None", "nan")
                              else f"{layer or 'line'} {i}", g, crs))
    if not found:
        raise InputError(f"the centreline file holds no line ({'; '.join(seen)})", where=str(p),
                         fix="draw the centreline as one line (a GPX track or route) from start to finish")
    if len(found) > 1:
        names = [f[1] for f in found]
        if feature is None:
            raise InputError(f"the centreline file holds {len(found)} lines ({', '.join(names[:8])})",
                             where=str(p), fix="pick one with [inputs] centreline_feature NAME_OR_INDEX")
        hit = [i for i, n in enumerate(names) if n == str(feature)]
        if len(hit) != 1 and str(feature).isdigit() and int(feature) < len(found):
            hit = [int(feature)]
        if len(hit) != 1:
            raise InputError(f"no centreline matches {feature!r}", where=str(p),
                             fix="use one of: " + ", ".join(names[:12]))
        found = [found[hit[0]]]
    _, _, g, crs = found[0]
    if crs is None:
        raise CRSError("the centreline file has no CRS", where=str(p), fix="save it with a CRS, or assign one, e.g. "
                       + _SET_CRS.format(epsg=32632))
    line = shapely.line_merge(g) if g.geom_type != "LineString" else g
    if line.geom_type != "LineString":
        raise InputError("the centreline is not one connected line", where=str(p),
                         fix="join its parts (track segments) into one line from start to finish")
    return line, crs, str(p)
