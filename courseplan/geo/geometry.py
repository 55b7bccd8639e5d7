"""Geometry helpers shared by the readers and the stages (no file access)."""

from __future__ import annotations

import numpy as np
import shapely
from shapely.errors import GEOSException
from shapely.geometry import shape
from shapely.geometry.base import BaseGeometry


def _polygon(rings: list) -> BaseGeometry:
    lr = [shapely.linearrings(np.asarray(r, dtype=np.float64)) for r in rings]
    return shapely.polygons(lr[0], holes=lr[1:] or None)


def geometry_from_geojson(gj: dict) -> BaseGeometry:
    """A shapely geometry from a GeoJSON geometry mapping (RFC 7946 §3.1).

    Polygons and multipolygons are built from coordinate arrays (``shapely.linearrings``,
    ``shapely.polygons``), several times faster than :func:`shapely.geometry.shape`, which walks
    the coordinates in Python; every other case (other types, empty or ragged coordinates) goes to
    :func:`shapely.geometry.shape`, so the result is the same geometry either way.
    """
    kind, coords = gj.get("type"), gj.get("coordinates")
    try:
        if kind == "Polygon" and coords:
            return _polygon(coords)
        if kind == "MultiPolygon" and coords and all(coords):
            return shapely.multipolygons([_polygon(p) for p in coords])
    except (ValueError, TypeError, GEOSException):
        pass
    return shape(gj)
