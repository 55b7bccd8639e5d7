"""Zone polygons as a coverage of the course: smooth the shared edges, close gaps, remove overlaps.

The zones come from raster cells, so their shared edges are staircases of cell sides.
:func:`smooth_coverage` simplifies only the shared (inner) edges of the region polygons,
topology-preservingly (``shapely.coverage_simplify``), before they are clipped to the course;
:func:`ensure_tiling` checks the result by its areas, and :func:`tile_course` re-clips to the
course and hands any gap to the zone that borders it most when the check fails (no gaps, no
overlaps).  :func:`thin_test` finds slivers by their largest inscribed circle.
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


def smooth_coverage(polys: np.ndarray, tolerance: float) -> tuple[np.ndarray, bool]:
    """Simplify the shared edges of a coverage by about *tolerance* [m], its outer boundary kept.

    ``shapely.coverage_simplify`` (Visvalingam–Whyatt on the coverage's edges, GEOS ≥ 3.12,
    ``simplify_boundary=False``) moves every shared edge once for both polygons, so they stay
    edge-matched: no gaps, no overlaps.  Polygons traced from one raster
    (``rasterio.features.shapes``) are such a coverage.  Returns the polygons and whether they
    were simplified: when a result is invalid or empty, the input is returned as it is.
    """
    if polys.size < 2 or tolerance <= 0:
        return polys, False
    from courseplan.geo.geometry import in_chunks

    simp = shapely.coverage_simplify(polys, tolerance, simplify_boundary=False)
    if shapely.is_empty(simp).any() or (~in_chunks(shapely.is_valid, simp)).any():
        return polys, False
    return simp, True


def ensure_tiling(geoms: list[BaseGeometry], course: BaseGeometry, rel_tol: float = 1e-9
                  ) -> list[BaseGeometry]:
    """The zones as they are when their areas sum to the course area (within *rel_tol*), else
    :func:`tile_course` of them.

    Pieces clipped from one coverage and merged by union can neither overlap nor leave a gap, so
    their areas summing to the course's is the check; any shortfall or excess means a gap or an
    overlap, and the full re-tiling runs.
    """
    total = float(np.sum(shapely.area(np.array(geoms, dtype=object)))) if geoms else 0.0
    if geoms and abs(course.area - total) <= rel_tol * course.area:
        return list(geoms)
    return tile_course(list(geoms), course)


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
    within *min_width* of the zone's bounding box), so that on a stretch of course narrower than twice
    the setting the zones that span it are not all merged into one.  ``thin.many(zones)`` answers for
    an array of zones at once (the same answers, the inscribed circles searched in vectorised calls on
    all cores, :func:`~courseplan.geo.geometry.in_chunks`).
    """
    from courseplan.geo.geometry import in_chunks

    if min_width <= 0:
        return None
    shapely.prepare(course)
    tol = max(0.01, min_width / 100.0)
    coarse = min_width / 4.0
    half = 0.5 * min_width + tol

    def polygons_of(geoms: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        # The non-empty polygon parts of each zone (as _parts) and the zone each belongs to.
        parts, owner = shapely.get_parts(geoms, return_index=True)
        keep = (shapely.get_type_id(parts) == 3) & ~shapely.is_empty(parts)
        return parts[keep], owner[keep]

    def widths(geoms: np.ndarray, tolerance: float) -> np.ndarray:
        # width_m of each zone at one tolerance.
        parts, owner = polygons_of(geoms)
        w = np.zeros(len(geoms))
        if parts.size:
            r = shapely.length(in_chunks(lambda p: shapely.maximum_inscribed_circle(p, tolerance), parts))
            np.maximum.at(w, owner, 2.0 * r)
        return w

    def width(geoms: np.ndarray) -> np.ndarray:
        # GEOS finds the inscribed circle's radius to within its tolerance, from below: a coarse
        # search that already reaches min_width settles it; only the others are searched finely.
        w = widths(geoms, coarse)
        low = w < min_width
        if low.any():
            w[low] = widths(geoms[low], tol)
        return w

    def surely_wide(geoms: np.ndarray) -> np.ndarray:
        # A point inside the outline (``shapely.point_on_surface``, or the centroid when inside) half
        # the width plus the tolerance from its boundary: the search above would find a circle of
        # min_width or more, so the answer is known without it.
        parts, owner = polygons_of(geoms)
        wide = np.zeros(len(geoms), dtype=bool)
        if not parts.size:
            return wide
        rings = shapely.boundary(parts)
        wide[owner[shapely.distance(shapely.point_on_surface(parts), rings) >= half]] = True
        rest = ~wide[owner]
        if rest.any():
            parts, owner, rings = parts[rest], owner[rest], rings[rest]
            cen = shapely.centroid(parts)
            inside = shapely.contains(parts, cen)
            wide[owner[inside][shapely.distance(cen[inside], rings[inside]) >= half]] = True
        return wide

    def many(zones) -> np.ndarray:
        geoms = np.empty(len(zones), dtype=object)
        geoms[:] = list(zones)
        out = np.zeros(len(geoms), dtype=bool)
        idx = np.flatnonzero(~surely_wide(geoms))
        if idx.size:
            w = width(geoms[idx])
            idx, w = idx[w < min_width], w[w < min_width]
        if idx.size:
            local = np.empty(idx.size, dtype=object)
            m = min_width
            local[:] = [shapely.clip_by_rect(course, x0 - m, y0 - m, x1 + m, y1 + m)
                        for x0, y0, x1, y1 in shapely.bounds(geoms[idx]).tolist()]
            out[idx] = w < np.minimum(min_width, 0.5 * width(local))
        return out

    def thin(g: BaseGeometry) -> bool:
        return bool(many([g])[0])

    thin.many = many
    return thin


def split_large_zones(zones: list[dict], max_area: float, region_t: np.ndarray, dist_t: np.ndarray,
                      touch: np.ndarray, transform, tolerance: float, cells: dict[str, np.ndarray],
                      per_region: dict[str, np.ndarray]) -> tuple[list[dict], dict[str, np.ndarray]]:
    """Cut zones above *max_area* [m²] across the course into ``ceil(area / max_area)`` parts of
    about equal area, at quantiles of their cells' distance from the start, so every part is a
    stretch of the course from edge to edge.

    The cut follows the distance field: the window's course cells are banded at the quantiles,
    the bands polygonised (``rasterio.features.shapes``) and smoothed as one coverage
    (:func:`~courseplan.geo.coverage.smooth_coverage`, *tolerance* [m]), and the zone intersected
    with each band, so the parts tile the zone (that GEOS work on another core while the next zone
    is polygonised, :func:`~courseplan.geo.geometry.in_background`).  Each part gets a new
    pseudo-region whose values are the means of *cells* (one array per name, a value per course
    cell in *touch* order) over its own cells, appended to *per_region*; returns the zones and the
    extended *per_region*.
    """
    import math

    from affine import Affine

    from courseplan.geo.geometry import in_background
    from courseplan.geo.regions import polygon_parts, polygonise

    if max_area <= 0 or not any(z["geom"].area > max_area for z in zones):
        return zones, per_region
    # Position of a course cell in the *_t arrays (row-major): the course cells of the rows above
    # plus those to its left; computed per zone window, not for the whole course.
    row_start = np.concatenate([[0], np.cumsum(touch.sum(axis=1))])
    inv = ~transform
    extra: dict[str, list[float]] = {k: [] for k in per_region}
    n_reg = len(next(iter(per_region.values())))
    tasks = {}  # zone index → (own cells, their band, band numbers, the cut job)
    for j, z in enumerate(zones):
        if z["geom"].area <= max_area:
            continue
        # Only the zone's bounding box of cells (plus 3), as flat course cells.
        x0, y0, x1, y1 = z["geom"].bounds
        ca, ra = inv * (x0, y1)
        cb, rb = inv * (x1, y0)
        r0, r1 = max(int(ra) - 3, 0), min(int(rb) + 4, touch.shape[0])
        c0, c1 = max(int(ca) - 3, 0), min(int(cb) + 4, touch.shape[1])
        inside = touch[r0:r1, c0:c1]
        ids = np.cumsum(inside, axis=1) - 1
        ids += (row_start[r0:r1] + touch[r0:r1, :c0].sum(axis=1))[:, None]
        ids[~inside] = -1
        sub = ids[inside]
        own = np.isin(region_t[sub], np.asarray(z["regions"]))
        n = int(math.ceil(z["geom"].area / max_area))
        cuts = np.quantile(dist_t[sub][own], np.arange(1, n) / n)
        band_s = (np.searchsorted(cuts, dist_t[sub], side="right") + 1).astype(np.int32)
        win = np.zeros(ids.shape, dtype=np.int32)
        near = np.zeros(ids.shape, dtype=bool)
        near[inside] = own
        # The zone lies within about a cell of its own cells: band only those, grown by two cells.
        near = _grow(_grow(near)) & inside
        win[near] = band_s[near[inside]]
        polys = polygonise(win, transform @ Affine.translation(c0, r0))
        keys = sorted(polys)
        # Smoothing and cutting are GEOS work: on another core while the next zone is polygonised.
        tasks[j] = (sub[own], band_s[own], keys,
                    in_background(_cut, z["geom"], (x0, y0, x1, y1), [polys[k] for k in keys], tolerance))
    out = []
    for j, z in enumerate(zones):
        if j not in tasks:
            out.append(z)
            continue
        mine_all, band_own, keys, job = tasks[j]
        for k, part in zip(keys, job.result(), strict=True):
            parts = polygon_parts(part)
            if not parts or part.area <= 0:
                continue
            geom = parts[0] if len(parts) == 1 else shapely.multipolygons(parts)
            mine = mine_all[band_own == k]
            if mine.size:
                for name, arr in cells.items():
                    extra[name].append(float(np.mean(arr[mine])))
                regions, weights = [n_reg], [geom.area]
                n_reg += 1
            else:  # a sliver with no cell centre of its own: the zone's values
                regions, weights = list(z["regions"]), list(z["weights"])
            out.append({**z, "geom": geom, "regions": regions, "weights": weights})
    grown = {k: np.concatenate([v, np.asarray(extra[k], dtype=float)]) for k, v in per_region.items()}
    return out, grown


def _cut(zone: BaseGeometry, bounds: tuple, bands: list, tolerance: float) -> list:
    """Smooth a zone's bands as one coverage, intersect the zone with each (:func:`split_large_zones`)."""
    x0, y0, x1, y1 = bounds
    smooth, _ = smooth_coverage(np.array(bands, dtype=object), tolerance)
    return [shapely.intersection(zone, shapely.clip_by_rect(bp, x0, y0, x1, y1)) for bp in smooth]


def _grow(m: np.ndarray) -> np.ndarray:
    """Grow *m* by one cell to its four neighbours.

    The same as ``scipy.ndimage.binary_dilation`` with the cross, in five numpy operations.
    """
    out = m.copy()
    out[1:] |= m[:-1]
    out[:-1] |= m[1:]
    out[:, 1:] |= m[:, :-1]
    out[:, :-1] |= m[:, 1:]
    return out
