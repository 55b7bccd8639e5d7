"""Zone polygons as a coverage of the course: smooth the shared edges, close gaps, remove overlaps.

The zones come from raster cells, so their shared edges are staircases of cell sides.
:func:`smooth_edges` simplifies only the shared (inner) edges, topology-preservingly
(``shapely.coverage_simplify``, Visvalingam–Whyatt on the coverage's edges, GEOS ≥ 3.12), and keeps
the course outline as it is; :func:`tile_course` then re-clips to the course and hands any gap
to the zone that borders it most, so the zones tile the course again (no gaps, no overlaps).
"""

from __future__ import annotations

import numpy as np
import shapely
from shapely.geometry.base import BaseGeometry


def _parts(g: BaseGeometry) -> list[BaseGeometry]:
    return [p for p in shapely.get_parts(g) if p.geom_type == "Polygon" and not p.is_empty]


def _polygonal(g: BaseGeometry) -> BaseGeometry:
    if g.geom_type in ("Polygon", "MultiPolygon"):
        return g
    parts = _parts(g)
    return shapely.union_all(parts) if parts else shapely.Polygon()


def tile_course(geoms: list[BaseGeometry], course: BaseGeometry) -> list[BaseGeometry]:
    """The zones clipped to *course*, overlaps cut from the later zone, gaps given to a neighbour.

    A gap (a part of the course no zone covers) goes to the zone sharing the longest edge with it,
    or, when it touches none, the nearest zone.  Zone geometries stay polygons when they were.
    """
    from courseplan.geo.regions import clip_to

    out = [_polygonal(g) for g in clip_to(np.array(geoms, dtype=object), course)] if geoms else []
    if len(out) < 2:
        return out if not out else [_polygonal(course) if out[0].is_empty else out[0]]
    tree = shapely.STRtree(out)
    left, right = tree.query(out, predicate="overlaps")
    for a, b in zip(left.tolist(), right.tolist(), strict=True):
        if a < b and shapely.intersection(out[a], out[b]).area > 0:
            out[b] = _polygonal(shapely.difference(out[b], out[a]))
    # No overlaps left, so the gaps' area is what the zones' areas miss: skip the overlay when
    # that is rounding only.
    if course.area - float(np.sum(shapely.area(np.array(out, dtype=object)))) <= 1e-9 * course.area:
        return out
    covered = shapely.union_all([g for g in out if not g.is_empty])
    gaps = _parts(shapely.difference(course, covered)) if not covered.is_empty else _parts(course)
    if not gaps:
        return out
    tree = shapely.STRtree(out)
    for gap in gaps:
        near = tree.query(gap, predicate="intersects").tolist()
        shared = [(shapely.intersection(gap.boundary, out[i].boundary).length, i) for i in near]
        shared = [s for s in shared if s[0] > 0]
        j = max(shared)[1] if shared else int(tree.query_nearest(gap)[0])
        merged = shapely.union(out[j], gap)
        parts = _parts(merged)
        out[j] = parts[0] if len(parts) == 1 else shapely.multipolygons(parts)
    return out


def noded_faces(geoms: list[BaseGeometry]) -> tuple[np.ndarray, np.ndarray]:
    """The zones cut into faces along every zone boundary, and each face's zone.

    Zones clipped and merged one by one are not quite a coverage: two zones may meet with vertices
    1e-10 m apart, or one has a vertex where its neighbour's edge runs straight through (a
    T-junction).  Noding all boundaries together (``shapely.union_all``) and polygonising them
    (``shapely.polygonize``) gives faces that are edge-matched by construction; a face belongs to
    the zone its interior point lies in (faces in no zone — holes of the course, slits — are dropped).
    """
    arr = np.array(geoms, dtype=object)
    lines = shapely.union_all(shapely.boundary(arr))
    faces = shapely.get_parts(shapely.polygonize(shapely.get_parts(lines)))
    if faces.size == 0:
        return faces, np.zeros(0, dtype=np.int64)
    pts = shapely.point_on_surface(faces)
    hit_pt, hit_zone = shapely.STRtree(arr).query(pts, predicate="within")
    owner = np.full(faces.size, -1, dtype=np.int64)
    owner[hit_pt[::-1]] = hit_zone[::-1]  # first zone wins on a (degenerate) double hit
    keep = owner >= 0
    return faces[keep], owner[keep]


def smooth_edges(geoms: list[BaseGeometry], course: BaseGeometry, tolerance: float
                 ) -> tuple[list[BaseGeometry], bool]:
    """Simplify the zones' shared edges by about *tolerance* [m], keep the course outline, then
    :func:`tile_course`.

    The zones are first cut into edge-matched faces (:func:`noded_faces`), the faces simplified as
    one coverage (``shapely.coverage_simplify`` with ``simplify_boundary=False``), and each zone
    put together again from its faces (``shapely.coverage_union_all``).  Returns the zones and
    whether they were smoothed: when the simplification yields an invalid or empty face, or a zone
    loses a face, the zones are only re-tiled, not smoothed.
    """
    if len(geoms) < 2 or tolerance <= 0:
        return tile_course(list(geoms), course), False
    faces, owner = noded_faces(geoms)
    smoothed = False
    out = list(geoms)
    if faces.size and np.unique(owner).size == len(geoms):
        simp = shapely.coverage_simplify(faces, tolerance, simplify_boundary=False)
        if not (shapely.is_empty(simp).any() or (~shapely.is_valid(simp)).any()):
            order = np.argsort(owner, kind="stable")
            cuts = np.flatnonzero(np.diff(owner[order])) + 1
            rebuilt = []
            for grp in np.split(order, cuts):
                g = _polygonal(shapely.coverage_union_all(simp[grp]))
                parts = _parts(g)
                rebuilt.append(parts[0] if len(parts) == 1 else shapely.multipolygons(parts))
            if all(g.is_valid and not g.is_empty for g in rebuilt):
                out, smoothed = rebuilt, True
    return tile_course(out, course), smoothed


def width_m(g: BaseGeometry, tolerance: float = 0.05) -> float:
    """Width of a polygon [m]: the diameter of its largest inscribed circle
    (``shapely.maximum_inscribed_circle``; for a multipolygon, of its widest part)."""
    parts = _parts(g)
    if not parts:
        return 0.0
    return max(2.0 * shapely.maximum_inscribed_circle(p, tolerance).length for p in parts)


def thin_test(course: BaseGeometry, min_width: float):
    """A predicate *zone → bool*: True when the zone is a sliver narrower than *min_width* [m].

    The width asked of a zone is capped at half the width of the course around it (the course
    within *min_width* of the zone's bounding box), so that on a stretch of course narrower than twice the
    setting the zones that span it are not all merged into one.
    """
    if min_width <= 0:
        return None
    shapely.prepare(course)
    tol = max(0.01, min_width / 100.0)

    def thin(g: BaseGeometry) -> bool:
        w = width_m(g, tol)
        if w >= min_width:
            return False
        x0, y0, x1, y1 = g.bounds
        local = shapely.clip_by_rect(course, x0 - min_width, y0 - min_width, x1 + min_width, y1 + min_width)
        return w < min(min_width, 0.5 * width_m(local, tol))

    return thin
