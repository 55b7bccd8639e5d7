"""Regions of a class raster: label, merge the small ones, clip to the course, polygon parts.

Connected-component labelling (``scipy.ndimage.label``), the merge of regions below the minimum
area into their most similar touching neighbour (on the raster, then on clipped vector pieces,
with one shared similarity rule), and the exact clip of polygons to the course outline.
"""

from __future__ import annotations

import numpy as np
import shapely
from shapely.geometry.base import BaseGeometry

from courseplan.grid import Grid


def label_regions(code: np.ndarray) -> tuple[np.ndarray, int]:
    """Number the 4-connected regions of equal non-zero *code* 1 … n (``scipy.ndimage.label`` per code,
    each inside that code's bounding box from ``find_objects``, so the work follows the course)."""
    from scipy import ndimage

    region = np.zeros(code.shape, dtype=np.int32)
    n_reg = 0
    for c, box in enumerate(ndimage.find_objects(code), start=1):
        if box is None:
            continue
        sub = code[box] == c
        lab, n = ndimage.label(sub)
        if n:
            view = region[box]
            view[sub] = lab[sub] + n_reg
            n_reg += n
    return region, n_reg



def clip_to(polys: np.ndarray, course: BaseGeometry) -> np.ndarray:
    """Intersection of each polygon with *course*, exact.

    Polygons that lie inside the course are kept as they are (``contains_properly`` on the
    prepared course); for the others the overlay runs against the course clipped to the polygon's
    bounding box (``clip_by_rect``), not against the whole course outline, on all cores
    (:func:`~courseplan.geo.geometry.in_chunks`).
    """
    from courseplan.geo.geometry import in_chunks

    out = polys.copy()
    shapely.prepare(course)
    cut = ~shapely.contains_properly(course, polys)

    wkb = shapely.to_wkb(course)

    def clip(p: np.ndarray, b: np.ndarray) -> np.ndarray:
        # Each chunk reads its own copy of the course: GEOS geometries are not safe to share
        # between threads (a shared, prepared course crashed).
        mine = shapely.from_wkb(wkb)
        local = np.array([shapely.clip_by_rect(mine, *bb) for bb in b], dtype=object)
        bad = ~shapely.is_valid(local)
        local[bad] = mine
        return shapely.intersection(p, local)

    if cut.any():
        out[cut] = in_chunks(clip, polys[cut], shapely.bounds(polys[cut]))
    return out



def code_key(code: int, n_exp: int, n_slope: int) -> tuple[int, int, int]:
    """(exposure class, slope class, section) of a zone code (``(section·n_exp + exposure)·n_slope + slope + 1``)."""
    c = code - 1
    return ((c // n_slope) % n_exp, c % n_slope, c // (n_slope * n_exp))



def _similarity(ki: tuple[int, int, int], kj: tuple[int, int, int], shared: float) -> tuple:
    """Merge preference (smaller is better): same exposure first, then slope class, then section,
    then the longest shared edge."""
    return (abs(ki[0] - kj[0]), abs(ki[1] - kj[1]), abs(ki[2] - kj[2]), -shared)



def merge_small_regions(region: np.ndarray, n_reg: int, code: np.ndarray, touch: np.ndarray, grid: Grid,
                         min_area: float, n_exp: int, n_slope: int) -> tuple[np.ndarray, int]:
    """Merge regions below *min_area* into the most similar neighbour, on the raster.

    The same rule as :func:`merge_small_pieces` (exposure class first, then slope class, then section,
    then the longest shared edge), with areas counted in cells and shared edges in cell sides.
    Doing it before polygonising leaves the vector merge only the few pieces that clipping to the
    exact outline makes small.  Returns the relabelled regions, numbered 1 … n again.
    """
    if n_reg < 2:
        return region, n_reg
    cw, ch = grid.cell_size
    region_t = region[touch]
    area = np.bincount(region_t, minlength=n_reg + 1).astype(np.float64) * (cw * ch)
    if not (area[1:] < min_area).any():
        return region, n_reg
    pair_parts, len_parts = [], []
    for a, b, side in ((region[:, :-1], region[:, 1:], ch), (region[:-1, :], region[1:, :], cw)):
        m = a != b
        a, b = a[m], b[m]  # the few cell sides between two regions, then those inside the course
        m = (a > 0) & (b > 0)
        a, b = a[m], b[m]
        lo, hi = np.minimum(a, b).astype(np.int64), np.maximum(a, b).astype(np.int64)
        pair_parts.append(lo * (n_reg + 1) + hi)
        len_parts.append(np.full(lo.size, side))
    keys, inv = np.unique(np.concatenate(pair_parts), return_inverse=True)
    shared = np.bincount(inv, weights=np.concatenate(len_parts))
    nb: list[dict[int, float]] = [{} for _ in range(n_reg + 1)]
    for k, length in zip(keys.tolist(), shared.tolist(), strict=True):
        i, j = divmod(k, n_reg + 1)
        nb[i][j] = nb[i].get(j, 0.0) + length
        nb[j][i] = nb[j].get(i, 0.0) + length
    reg_code = np.zeros(n_reg + 1, dtype=np.int64)
    reg_code[region_t] = code[touch]
    key = [code_key(c, n_exp, n_slope) for c in reg_code.tolist()]
    alive = np.ones(n_reg + 1, dtype=bool)
    alive[0] = False
    target = np.arange(n_reg + 1)
    import heapq

    heap = [(float(area[i]), i) for i in range(1, n_reg + 1) if area[i] < min_area]
    heapq.heapify(heap)
    while heap:
        a_i, i = heapq.heappop(heap)
        if not alive[i] or a_i != area[i]:
            continue
        best, best_score = None, None
        for j, length in nb[i].items():
            if not alive[j]:
                continue
            score = _similarity(key[i], key[j], length)
            if best_score is None or score < best_score:
                best, best_score = j, score
        if best is None:
            continue  # an island: stays a zone of its own
        alive[i] = False
        target[i] = best
        area[best] += area[i]
        for j, length in nb[i].items():
            if j == best:
                continue
            nb[j].pop(i, None)
            if alive[j]:
                nb[j][best] = nb[j].get(best, 0.0) + length
                nb[best][j] = nb[best].get(j, 0.0) + length
        nb[best].pop(i, None)
        nb[i] = {}
        if area[best] < min_area:
            heapq.heappush(heap, (float(area[best]), best))
    # Follow the merge chains to the surviving region, then renumber 1 … n.
    for i in range(1, n_reg + 1):
        j = i
        while target[j] != j:
            j = target[j]
        target[i] = j
    lut = np.zeros(n_reg + 1, dtype=np.int32)
    survivors = np.flatnonzero(alive)
    lut[survivors] = np.arange(1, survivors.size + 1, dtype=np.int32)
    lut = lut[target]
    lut[0] = 0
    out = np.zeros(region.shape, dtype=np.int32)  # regions lie on the course's cells only
    out[touch] = lut[region_t]
    return out, int(survivors.size)



def polygonise(labels: np.ndarray, transform) -> dict[int, BaseGeometry]:
    """One polygon per non-zero label of a raster (``rasterio.features.shapes``, 4-connected).

    A label in several 4-connected pieces comes back as their union.  The rings are built from the
    coordinate lists with ``numpy.fromiter`` (about twice as fast as
    :func:`~courseplan.geo.geometry.geometry_from_geojson`, the same polygons).
    """
    from itertools import chain

    from rasterio.features import shapes

    from courseplan.geo.geometry import geometry_from_geojson

    def ring(r: list) -> np.ndarray:
        return np.fromiter(chain.from_iterable(r), dtype=np.float64, count=2 * len(r)).reshape(-1, 2)

    polys: dict[int, BaseGeometry] = {}
    for gj, val in shapes(labels, mask=labels > 0, connectivity=4, transform=transform):
        coords = gj.get("coordinates")
        if gj.get("type") == "Polygon" and coords and all(len(r) >= 4 for r in coords):
            rings = [shapely.linearrings(ring(r)) for r in coords]
            g = shapely.polygons(rings[0], holes=rings[1:] or None)
        else:
            g = geometry_from_geojson(gj)
        k = int(val)
        polys[k] = shapely.union(polys[k], g) if k in polys else g
    return polys



def polygon_parts(g: BaseGeometry) -> list[BaseGeometry]:
    if g is None or g.is_empty:
        return []
    if g.geom_type == "Polygon":
        return [g]
    if g.geom_type in ("MultiPolygon", "GeometryCollection"):
        out = []
        for p in g.geoms:
            out += polygon_parts(p)
        return out
    return []



def merge_small_pieces(pieces: list[dict], min_area: float, n_exp: int, n_slope: int,
                       thin=None) -> list[dict]:
    """Merge pieces below *min_area*, or slivers (*thin*, a predicate on the geometry), into the most
    similar touching neighbour.

    Similarity: the difference in exposure class counts most, then slope class, then section;
    among equally similar neighbours the one sharing the longest edge wins.  A small piece with no
    neighbour (an island of a multi-part course) stays a zone of its own.  The smallest flagged
    piece goes first; a zone is tested again after it has absorbed a piece.
    """
    zones = [{"geom": p["geom"], "code": p["code"], "regions": [p["region"]], "weights": [p["area"]],
              "alive": True} for p in pieces]
    if not zones:
        return []
    tree = shapely.STRtree([z["geom"] for z in zones])
    neighbours: list[set[int]] = [set() for _ in zones]
    left, right = tree.query([z["geom"] for z in zones], predicate="intersects")
    for a, b in zip(left.tolist(), right.tolist(), strict=True):
        if a != b:
            neighbours[a].add(b)

    def key(z: dict) -> tuple[int, int, int]:
        return code_key(z["code"], n_exp, n_slope)

    def flagged(z: dict) -> bool:
        return z["geom"].area < min_area or (thin is not None and bool(thin(z["geom"])))

    small = np.array([z["geom"].area < min_area for z in zones], dtype=bool)
    if thin is not None and hasattr(thin, "many") and not small.all():
        # The same flags as flagged(), the slivers tested in one vectorised pass.
        big = np.flatnonzero(~small)
        small[big] = thin.many([zones[i]["geom"] for i in big.tolist()])
        flag = set(np.flatnonzero(small).tolist())
    else:
        flag = {i for i, z in enumerate(zones) if flagged(z)}
    while flag:
        i = min(flag, key=lambda j: (zones[j]["geom"].area, j))
        flag.discard(i)
        zi = zones[i]
        ki = key(zi)
        best, best_score = None, None
        for j in neighbours[i]:
            zj = zones[j]
            if not zj["alive"]:
                continue
            shared = zi["geom"].boundary.intersection(zj["geom"].boundary).length
            if shared <= 0:
                continue
            score = _similarity(ki, key(zj), shared)
            if best_score is None or score < best_score:
                best, best_score = j, score
        if best is None:
            continue  # stuck: stays a zone of its own
        zb = zones[best]
        zb["geom"] = shapely.union(zb["geom"], zi["geom"])
        if zb["geom"].geom_type != "Polygon":
            zb["geom"] = max(polygon_parts(shapely.make_valid(zb["geom"])), key=lambda g: g.area) \
                if len(polygon_parts(zb["geom"])) == 1 else shapely.unary_union(polygon_parts(zb["geom"]))
        zb["regions"] += zi["regions"]
        zb["weights"] += zi["weights"]
        zi["alive"] = False
        neighbours[best] |= neighbours[i]
        neighbours[best].discard(best)
        neighbours[best].discard(i)
        for j in neighbours[i]:
            neighbours[j].discard(i)
            if j != best:
                neighbours[j].add(best)
        if flagged(zb):
            flag.add(best)
        else:
            flag.discard(best)
    return [z for z in zones if z["alive"]]



def merge_alike(zones: list[dict], summary, alike) -> list[dict]:
    """Merge touching zones that *alike* says are one, closest pair first (merged zones from
    :func:`merge_small_pieces`, changed in place; the survivors are returned).

    *summary(zone) → tuple* gives what the test compares (for a merged zone, of its whole area);
    *alike(a, b) → float | None* the distance of two summaries, or None when they stay apart.  After
    each merge the new zone is compared again with its neighbours, so a chain of small steps never
    adds up to a big one.  Zones must share an edge, not a point, to merge.
    """
    live = [z for z in zones if z.get("alive", True)]
    if len(live) < 2:
        return live
    geoms = [z["geom"] for z in live]
    tree = shapely.STRtree(geoms)
    left, right = tree.query(geoms, predicate="intersects")
    nb: list[set[int]] = [set() for _ in live]
    for a, b in zip(left.tolist(), right.tolist(), strict=True):
        if a != b:
            nb[a].add(b)
    edge: dict[tuple[int, int], bool] = {}

    def share_edge(i: int, j: int) -> bool:  # only asked of alike pairs: most pairs never pay for it
        key = (i, j)
        if key not in edge:
            edge[key] = shapely.intersection(live[i]["geom"].boundary, live[j]["geom"].boundary).length > 0
        return edge[key]

    summ = [summary(z) for z in live]
    alive = [True] * len(live)
    while True:
        best = None
        for i, js in enumerate(nb):
            if not alive[i]:
                continue
            for j in js:
                if j > i and alive[j]:
                    d = alike(summ[i], summ[j])
                    if d is not None and (best is None or d < best[0]) and share_edge(i, j):
                        best = (d, i, j)
        if best is None:
            break
        _, i, j = best
        zi, zj = live[i], live[j]
        zi["geom"] = shapely.union(zi["geom"], zj["geom"])
        zi["regions"] += zj["regions"]
        zi["weights"] += zj["weights"]
        alive[j] = False
        nb[i] |= nb[j]
        nb[i] -= {i, j}
        for k in nb[j]:
            nb[k].discard(j)
            if k != i:
                nb[k].add(i)
        nb[j] = set()
        for k in nb[i]:  # the merged zone's edges are new
            edge.pop((min(i, k), max(i, k)), None)
        summ[i] = summary(zi)
    return [z for z, a in zip(live, alive, strict=True) if a]

