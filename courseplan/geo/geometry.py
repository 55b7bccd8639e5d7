"""Geometry helpers shared by the readers and the stages (no file access)."""

from __future__ import annotations

import os

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


def polygonal(g: BaseGeometry) -> BaseGeometry:
    """The polygon parts of *g* (lines and points of a collection dropped), as one geometry."""
    if g.geom_type in ("Polygon", "MultiPolygon"):
        return g
    parts = [p for p in shapely.get_parts(g) if p.geom_type in ("Polygon", "MultiPolygon") and not p.is_empty]
    return shapely.union_all(parts) if parts else shapely.Polygon()


def clean_polygon(geom: BaseGeometry, grid_size: float) -> BaseGeometry:
    """A valid polygon with no part narrower than about *grid_size*: the course as zoning can tile it.

    Steps: ``shapely.make_valid`` when invalid, keep the polygon parts (a zero-width spike comes back
    as a line and is dropped), snap the vertices to a grid of *grid_size* (``shapely.set_precision``,
    which keeps the result valid and removes the parts that collapse), and drop parts whose area is
    below ``grid_size²``.  A multipolygon stays a multipolygon.

    Why the snap: a valid but needle-thin spike (say 0.08 mm wide along a cell edge) has an area
    but touches no raster cell by GDAL's all-touched rule, so no zone can cover it.  A grid of 1 mm
    (1e-8° for a geographic CRS) moves a vertex by at most 0.7 mm, far below what a crew can mark.
    """
    g = geom if geom.is_valid else shapely.make_valid(geom)
    g = polygonal(g)
    if g.is_empty:
        return g
    g = polygonal(shapely.set_precision(g, grid_size))
    parts = [p for p in shapely.get_parts(g) if p.area > grid_size * grid_size]
    if not parts:
        return shapely.Polygon()
    if len(parts) == 1 and geom.geom_type != "MultiPolygon":
        return parts[0]
    return shapely.multipolygons(parts)  # a multipolygon stays one, even with one part left


def _workers() -> int:
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
    try:  # COURSEPLAN_THREADS=1 turns the threads off (one core, as the minimal benchmark script)
        cap = int(os.environ.get("COURSEPLAN_THREADS", "4"))
    except ValueError:
        cap = 4
    return max(1, min(4, cap, cores))


WORKERS = _workers()
"""Threads for :func:`in_chunks` and :func:`in_background`: the cores this process may run on, at most 4
(or ``COURSEPLAN_THREADS``)."""

_POOL: list = []
_PREFIX = "courseplan-geos"


class _Done:
    """A finished result with the ``result()`` of a future."""

    def __init__(self, value):
        self.value = value

    def result(self):
        return self.value


def _serial() -> bool:
    # One core, or already in one of the pool's threads (waiting there on the pool could deadlock).
    import threading

    return WORKERS < 2 or threading.current_thread().name.startswith(_PREFIX)


def _pool():
    # One pool per process: a pool inherited through fork has no threads, so a child makes its own.
    if not _POOL or _POOL[0][0] != os.getpid():
        from concurrent.futures import ThreadPoolExecutor

        _POOL[:] = [(os.getpid(), ThreadPoolExecutor(max_workers=WORKERS - 1, thread_name_prefix=_PREFIX))]
    return _POOL[0][1]


def in_background(fn, *args):
    """Start ``fn(*args)`` on another core and return its future (``result()``).

    For GEOS work that can overlap work holding the GIL (GDAL's polygonise); with one core it runs
    now.  *fn* must not read a geometry that the caller goes on using meanwhile (see :func:`in_chunks`).
    """
    if _serial():
        return _Done(fn(*args))
    return _pool().submit(fn, *args)


def in_chunks(fn, *arrays: np.ndarray, min_items: int = 16) -> np.ndarray:
    """Return ``fn(*arrays)``, computed on :data:`WORKERS` contiguous chunks of the arrays at once.

    For element-wise vectorised shapely functions (``shapely.intersection``,
    ``shapely.line_locate_point``, ``shapely.maximum_inscribed_circle`` …) and numpy loops: both
    release the GIL, so the chunks run on several cores in threads
    (``concurrent.futures.ThreadPoolExecutor``), and the result, concatenated in order, is element
    for element that of one call.  Fewer than *min_items* elements, or one core, and it is one call.
    *fn* must not share a geometry between chunks (GEOS geometries are not safe to read from two
    threads at once: give each chunk its own copy, ``shapely.from_wkb``).
    """
    n = len(arrays[0])
    if n < min_items or _serial():
        return fn(*arrays)
    edges = np.linspace(0, n, WORKERS + 1).astype(np.int64)
    parts = [tuple(a[edges[i]:edges[i + 1]] for a in arrays) for i in range(WORKERS)]
    futures = [_pool().submit(fn, *p) for p in parts[:-1]]
    last = fn(*parts[-1])
    return np.concatenate([f.result() for f in futures] + [np.asarray(last)])
