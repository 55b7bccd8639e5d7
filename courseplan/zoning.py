"""Zoning stage: split the course into zones a crew can find on the hill.

A zone is a connected piece of the course with one exposure class (from the sun/shade raster),
one slope class (from the DEM, when given) and one course section (distance band from the start,
or between named markers).  Course first: every step works on the raster window around the course
only.  Steps:

1. classify the cells of the window that touch the course (exposure × slope × section);
2. remove speckle below an eighth of the minimum zone area (``rasterio.features.sieve``);
3. polygonise the class raster (``rasterio.features.shapes``) and take per-region statistics in one
   pass over the window (``numpy.bincount`` on the region raster);
4. clip the regions to the exact course polygon, so that zone areas sum to the course area;
5. merge pieces below the minimum area into the most similar touching neighbour (same exposure
   first, then slope class, then section; ties broken by the longest shared edge);
6. number the zones 1 … n in course order (mean distance from the start).

Distance from the start follows the course: along the centreline when one is given, otherwise the
shortest path inside the course polygon on the cell grid (Dijkstra, ``scipy.sparse.csgraph``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import shapely
from shapely.geometry.base import BaseGeometry

from .columns import ZONING
from .errors import InputError, OverlapError
from .grid import Grid
from .settings import Zoning

ENCODING_RANGE = {"fraction": (0.0, 1.0), "percent": (0.0, 100.0), "wh_m2": (0.0, 20000.0)}
"""Accepted value range of each sun-raster encoding; values outside it are an input error."""


def default_breaks(encoding: str, window_hours: float) -> list[float]:
    """Default exposure-class breaks in the raster's units (see ``Zoning.exposure_breaks``)."""
    if encoding == "fraction":
        return [0.35, 0.70]
    if encoding == "percent":
        return [35.0, 70.0]
    return [150.0 * window_hours, 350.0 * window_hours]


@dataclass(frozen=True)
class ZoningInputs:
    """What the zoning stage needs, all in the working CRS.

    Attributes
    ----------
    course
        Course polygon [m].
    sun
        Sun/shade raster window; values in *encoding* units, NaN = no data.
    encoding
        ``fraction``, ``percent`` or ``wh_m2``.
    slope_deg, aspect_deg, elevation_m
        Optional terrain grids on the same cells as *sun*.
    start_xy
        Start point [m], or None to find it.
    centreline
        Optional line from start to finish [m].
    markers
        Optional named markers ``(name, x, y)`` along the course.
    """

    course: BaseGeometry
    sun: Grid
    encoding: str
    slope_deg: Grid | None = None
    aspect_deg: Grid | None = None
    elevation_m: Grid | None = None
    start_xy: tuple[float, float] | None = None
    centreline: BaseGeometry | None = None
    markers: tuple[tuple[str, float, float], ...] = ()


@dataclass(frozen=True)
class ZoningResult:
    """Zones (GeoDataFrame) plus what the later stages and outputs need."""

    zones: object  # geopandas.GeoDataFrame
    start_xy: tuple[float, float]
    finish_xy: tuple[float, float]
    exposure_breaks: tuple[float, ...]
    uncovered_share: float
    notes: tuple[str, ...] = field(default=())
    exposure_grid: Grid | None = None


def _rasterize(geom: BaseGeometry, grid: Grid, all_touched: bool) -> np.ndarray:
    from rasterio.features import rasterize

    return rasterize([(geom, 1)], out_shape=grid.shape, transform=grid.transform, fill=0,
                     all_touched=all_touched, dtype="uint8").astype(bool)


def _fill_nearest(values: np.ndarray, valid: np.ndarray) -> np.ndarray:
    from scipy.ndimage import distance_transform_edt

    if valid.all():
        return values
    idx = distance_transform_edt(~valid, return_distances=False, return_indices=True)
    return values[tuple(idx)]


def distance_along_course(mask: np.ndarray, grid: Grid, start_xy: tuple[float, float] | None,
                          centreline: BaseGeometry | None = None, elevation: np.ndarray | None = None,
                          max_nodes: int = 250_000) -> tuple[np.ndarray, tuple[float, float], tuple[float, float],
                                                             list[str]]:
    """Distance from the start [m] of every masked cell, following the course.

    With a centreline: the position of each cell centre projected on the line.  Otherwise the
    shortest 8-connected path inside the mask (Dijkstra) on a grid coarsened to at most
    *max_nodes* cells.  Without a start point the two ends of the course are found by a double
    sweep (farthest cell from any cell, then farthest from that); the start is the higher end
    when elevations are given, else the northern end.

    Returns
    -------
    distance, start_xy, finish_xy, notes
        Distance grid (NaN outside the mask) and the start and finish used.
    """
    notes: list[str] = []
    xs, ys = grid.cell_centres()
    rows, cols = np.nonzero(mask)
    px, py = xs[cols], ys[rows]
    dist = np.full(mask.shape, np.nan, dtype=np.float64)
    if centreline is not None:
        pts = shapely.points(px, py)
        d = shapely.line_locate_point(centreline, pts)
        dist[rows, cols] = d
        s = centreline.interpolate(0.0)
        f = centreline.interpolate(centreline.length)
        return dist, (s.x, s.y), (f.x, f.y), notes

    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import dijkstra

    n_cells = int(mask.sum())
    k = max(1, int(math.ceil(math.sqrt(n_cells / max_nodes))))
    R, C = mask.shape
    Rc, Cc = -(-R // k), -(-C // k)
    pad = np.zeros((Rc * k, Cc * k), dtype=bool)
    pad[:R, :C] = mask
    cm = pad.reshape(Rc, k, Cc, k).any(axis=(1, 3))
    node = -np.ones(cm.shape, dtype=np.int64)
    node[cm] = np.arange(int(cm.sum()))
    cw, ch = grid.cell_size[0] * k, grid.cell_size[1] * k
    src, dst, wt = [], [], []
    for dr, dc in ((0, 1), (1, 0), (1, 1), (1, -1)):
        a = node[0:Rc - dr, max(0, -dc):Cc - max(0, dc)]
        b = node[dr:Rc, max(0, dc):Cc - max(0, -dc)]
        ok = (a >= 0) & (b >= 0)
        src.append(a[ok])
        dst.append(b[ok])
        wt.append(np.full(int(ok.sum()), math.hypot(cw * dc, ch * dr)))
    src_a, dst_a, wt_a = np.concatenate(src), np.concatenate(dst), np.concatenate(wt)
    nn = int(cm.sum())
    g = coo_matrix((wt_a, (src_a, dst_a)), shape=(nn, nn)).tocsr()
    crow, ccol = np.nonzero(cm)
    t = grid.transform
    cx = t.c + t.a * (ccol * k + k / 2.0)
    cy = t.f + t.e * (crow * k + k / 2.0)

    def far(start_node: int) -> tuple[np.ndarray, int]:
        d = dijkstra(g, directed=False, indices=start_node)
        d_f = np.where(np.isfinite(d), d, -1)
        return d, int(np.argmax(d_f))

    if start_xy is None:
        _, a_node = far(0)
        d_a, b_node = far(a_node)
        ends = [a_node, b_node]
        if elevation is not None:
            ez = []
            for e in ends:
                r0, c0 = crow[e] * k, ccol[e] * k
                block = elevation[r0:r0 + k, c0:c0 + k]
                ez.append(np.nanmean(block) if np.isfinite(block).any() else -np.inf)
            start_node = ends[int(np.argmax(ez))]
            notes.append("start taken as the higher end of the course (set [zoning] start_xy to choose)")
        else:
            start_node = ends[int(np.argmax(cy[ends]))]
            notes.append("start taken as the northern end of the course: no DEM and no start point "
                         "(set [zoning] start_xy to choose)")
    else:
        start_node = int(np.argmin((cx - start_xy[0]) ** 2 + (cy - start_xy[1]) ** 2))
    d_nodes = dijkstra(g, directed=False, indices=start_node)
    unreachable = ~np.isfinite(d_nodes)
    if unreachable.any():
        d_nodes[unreachable] = np.nanmax(np.where(unreachable, np.nan, d_nodes))
    finish_node = int(np.argmax(d_nodes))
    # The geodesic distance from one point has round level sets; sections must cut across the
    # course.  Derive a centreline from the centroids of equal-distance bands (they follow the
    # middle of the course through bends), then measure every cell along that line.
    band = max(2.0 * max(cw, ch), min(20.0, float(np.max(d_nodes)) / 20.0))
    bidx = np.floor(d_nodes / band).astype(np.int64)
    nb = int(bidx.max()) + 1
    bc = np.bincount(bidx, minlength=nb).astype(float)
    has = bc > 0
    # Bands at the far end hold only the corner cells: their centroids would bend the line.
    full = np.nonzero(bc >= 0.5 * np.median(bc[has]))[0]
    has[: full.min()] = False
    has[full.max() + 1:] = False
    mx = np.bincount(bidx, weights=cx, minlength=nb)[has] / bc[has]
    my = np.bincount(bidx, weights=cy, minlength=nb)[has] / bc[has]
    start = (float(cx[start_node]), float(cy[start_node]))
    if start_xy is not None:
        start = (float(start_xy[0]), float(start_xy[1]))
    finish = (float(cx[finish_node]), float(cy[finish_node]))
    coords = list(zip(mx.tolist(), my.tolist(), strict=True))
    if start_xy is not None:
        coords = [start] + coords
    if len(coords) < 2:
        coords = [start, finish]
    coords = _extend_ends(coords, px, py, extend_start=start_xy is None)
    line = shapely.LineString(coords).simplify(0.5 * max(cw, ch))
    start, finish = coords[0], coords[-1]
    pts = shapely.points(px, py)
    dist[rows, cols] = shapely.line_locate_point(line, pts)
    return dist, start, finish, notes


def _extend_ends(coords: list[tuple[float, float]], px: np.ndarray, py: np.ndarray,
                 extend_start: bool) -> list[tuple[float, float]]:
    """Prolong the end segments of a line so that every cell projects inside it."""
    c = np.asarray(coords, dtype=float)
    if len(c) < 2:
        return coords

    def ext(a: np.ndarray, b: np.ndarray) -> tuple[float, float] | None:
        u = b - a
        n = float(np.hypot(*u))
        if n == 0:
            return None
        u = u / n
        t = (px - b[0]) * u[0] + (py - b[1]) * u[1]
        tmax = float(t.max()) if t.size else 0.0
        return (float(b[0] + u[0] * tmax), float(b[1] + u[1] * tmax)) if tmax > 0 else None

    out = [tuple(x) for x in c.tolist()]
    e = ext(c[-2], c[-1])
    if e is not None:
        out.append(e)
    if extend_start:
        s0 = ext(c[1], c[0])
        if s0 is not None:
            out.insert(0, s0)
    return out


def zone_course(inp: ZoningInputs, settings: Zoning, *, window_hours: float,
                max_uncovered_pct: float = 5.0) -> ZoningResult:
    """Split the course into zones (see the module docstring for the steps).

    Parameters
    ----------
    inp
        Course, rasters and optional centreline / markers in the working CRS.
    settings
        The ``[zoning]`` settings.
    window_hours
        Length of the hold window [h] (default breaks of an irradiation raster scale with it).
    max_uncovered_pct
        Refuse when more than this share of the course has no raster data [%].

    Returns
    -------
    ZoningResult
        ``zones`` has the columns declared in :data:`courseplan.columns.ZONING`, plus ``aspect_deg``
        and ``geometry``.
    """
    import geopandas as gpd
    from rasterio.features import rasterize as rio_rasterize
    from rasterio.features import shapes, sieve

    grid = inp.sun
    notes: list[str] = []
    touch = _rasterize(inp.course, grid, all_touched=True)
    inside = _rasterize(inp.course, grid, all_touched=False)
    if not inside.any():
        inside = touch
    if not touch.any():
        raise OverlapError("the sun raster window holds no cell of the course", where=grid.source,
                           fix="check that the raster covers the course")
    v = grid.values
    valid = np.isfinite(v)
    n_in = int(inside.sum())
    uncovered = float((inside & ~valid).sum()) / n_in
    if not (valid & touch).any():
        raise InputError("the sun raster holds only nodata over the course", where=grid.source,
                         fix="give a raster with values over the course")
    if 100 * uncovered > max_uncovered_pct:
        raise OverlapError(f"the sun raster covers only {100 * (1 - uncovered):.1f} % of the course "
                           f"({100 * uncovered:.1f} % has no data, more than the {max_uncovered_pct:g} % "
                           "allowed)", where=grid.source, fix="give a raster that covers the whole course")
    if uncovered > 0:
        notes.append(f"{grid.source}: {100 * uncovered:.1f} % of the course has no sun data; filled from the "
                     "nearest cells")
    lo, hi = ENCODING_RANGE[inp.encoding]
    vv = v[touch & valid]
    tol = 1e-6 * max(1.0, hi)
    if vv.min() < lo - tol or vv.max() > hi + tol:
        raise InputError(f"sun raster values {vv.min():.4g} … {vv.max():.4g} are outside the range "
                         f"{lo:g} … {hi:g} of the declared encoding {inp.encoding!r}", where=grid.source,
                         fix="set [inputs] sun_encoding to fraction (0–1), percent (0–100) or wh_m2")
    vals = _fill_nearest(np.where(valid, v, 0.0), valid).astype(np.float64)

    breaks = list(settings.exposure_breaks or default_breaks(inp.encoding, window_hours))
    labels = settings.exposure_labels
    if len(labels) != len(breaks) + 1:
        raise InputError(f"{len(breaks)} exposure breaks need {len(breaks) + 1} labels, got {len(labels)}",
                         where="[zoning]", fix="give one label more than breaks")
    n_exp = len(labels)
    exp_idx = np.digitize(vals, breaks).astype(np.int64)

    if inp.slope_deg is not None:
        slope = _fill_nearest(np.nan_to_num(inp.slope_deg.values, nan=0.0), np.isfinite(inp.slope_deg.values))
        slope = slope.astype(np.float64)
        sbreaks = list(settings.slope_breaks_deg)
        slope_idx = np.digitize(slope, sbreaks).astype(np.int64)
        n_slope = len(sbreaks) + 1
        edges = [0.0] + sbreaks + [90.0]
        slope_labels = [f"{edges[i]:g}–{edges[i + 1]:g}°" for i in range(n_slope)]
    else:
        slope = np.zeros(grid.shape)
        slope_idx = np.zeros(grid.shape, dtype=np.int64)
        n_slope = 1
        slope_labels = ["n/a"]
    aspect = (inp.aspect_deg.values.astype(np.float64) if inp.aspect_deg is not None else None)

    elev = inp.elevation_m.values if inp.elevation_m is not None else None
    dist, start_xy, finish_xy, dnotes = distance_along_course(touch, grid, inp.start_xy, inp.centreline, elev)
    notes += dnotes
    dist = np.where(touch, dist, 0.0)
    L = settings.section_length_m
    if inp.markers:
        mk = sorted((_nearest_dist(dist, touch, grid, x, y), name) for name, x, y in inp.markers)
        mdist = np.array([m[0] for m in mk])
        sec_idx = np.searchsorted(mdist, dist, side="right").astype(np.int64)
        sec_names = ["start"] + [m[1] for m in mk]
    else:
        sec_idx = np.floor(dist / L).astype(np.int64)
        sec_names = None
    n_sec = int(sec_idx[touch].max()) + 1

    code = (sec_idx * n_exp + exp_idx) * n_slope + slope_idx + 1
    code = np.where(touch, code, 0).astype(np.int32)
    speckle = int(max(2, (settings.min_zone_area_m2 / 8.0) / grid.cell_area_m2))
    if speckle > 1 and touch.sum() > speckle:
        code = sieve(code, size=speckle, mask=touch, connectivity=4)
        code = np.where(touch, code, 0).astype(np.int32)

    polys, pcodes = [], []
    for gj, val in shapes(code, mask=touch & (code > 0), connectivity=4, transform=grid.transform):
        polys.append(shapely.geometry.shape(gj))
        pcodes.append(int(val))
    region = rio_rasterize([(g, i + 1) for i, g in enumerate(polys)], out_shape=grid.shape,
                          transform=grid.transform, fill=0, dtype="int32")
    nreg = len(polys) + 1
    rflat = region.ravel()
    cnt = np.bincount(rflat, minlength=nreg).astype(np.float64)
    cnt[cnt == 0] = np.nan

    def mean(a: np.ndarray) -> np.ndarray:
        return np.bincount(rflat, weights=a.ravel(), minlength=nreg) / cnt

    r_sun = mean(vals)
    r_slope = mean(slope)
    r_sec = mean(1.0 / np.cos(np.radians(np.clip(slope, 0, 85))))
    r_dist = mean(dist)
    if aspect is not None:
        a_ok = np.nan_to_num(aspect, nan=0.0)
        r_as = np.bincount(rflat, weights=np.sin(np.radians(a_ok)).ravel(), minlength=nreg)
        r_ac = np.bincount(rflat, weights=np.cos(np.radians(a_ok)).ravel(), minlength=nreg)
        r_aspect = np.degrees(np.arctan2(r_as, r_ac)) % 360.0
    else:
        r_aspect = np.full(nreg, np.nan)

    # Clip the regions to the exact course and split multi-part pieces.
    reg_geoms = np.array(polys, dtype=object)
    clipped = shapely.intersection(reg_geoms, inp.course)
    pieces = []
    for i, g in enumerate(clipped):
        for part in _polygons(g):
            if part.area > 0:
                pieces.append({"geom": part, "region": i + 1, "code": pcodes[i], "area": part.area})
    merged = _merge_small(pieces, settings.min_zone_area_m2, n_exp, n_slope)

    rows = []
    for z in merged:
        regs = np.array(z["regions"])
        w = np.array(z["weights"])
        wsum = w.sum()
        code0 = z["code"] - 1
        sl = code0 % n_slope
        ex = (code0 // n_slope) % n_exp
        sc = code0 // (n_slope * n_exp)
        sun_mean = float(np.sum(w * np.nan_to_num(r_sun[regs])) / wsum)
        sec_mean = float(np.sum(w * np.nan_to_num(r_sec[regs], nan=1.0)) / wsum)
        asp = r_aspect[regs]
        if np.isfinite(asp).any():
            ang = np.radians(np.nan_to_num(asp))
            aspect_mean = float(np.degrees(np.arctan2(np.sum(w * np.sin(ang)), np.sum(w * np.cos(ang)))) % 360)
        else:
            aspect_mean = float("nan")
        if sec_names is not None:
            section = sec_names[min(sc, len(sec_names) - 1)]
        else:
            section = f"{sc * L:g}–{(sc + 1) * L:g} m"
        rows.append({
            "exposure_class": labels[ex], "exposure_rank": int(ex), "slope_class": slope_labels[sl],
            "section": section, "section_index": int(sc),
            "sun_fraction": (sun_mean if inp.encoding == "fraction" else
                             sun_mean / 100.0 if inp.encoding == "percent" else float("nan")),
            "irradiation_wh_m2": sun_mean if inp.encoding == "wh_m2" else float("nan"),
            "slope_deg": float(np.sum(w * np.nan_to_num(r_slope[regs])) / wsum),
            "aspect_deg": aspect_mean,
            "distance_from_start_m": float(np.sum(w * np.nan_to_num(r_dist[regs])) / wsum),
            "map_area_m2": float(z["geom"].area),
            "area_m2": float(z["geom"].area * sec_mean),
            "geometry": z["geom"],
        })
    zones = gpd.GeoDataFrame(rows, geometry="geometry", crs=grid.crs)
    zones = zones.sort_values(["distance_from_start_m", "exposure_rank"], kind="stable").reset_index(drop=True)
    zones.insert(0, "course_order", np.arange(1, len(zones) + 1, dtype=np.int64))
    zones.insert(0, "zone_id", np.arange(1, len(zones) + 1, dtype=np.int64))
    exposure_grid = Grid(values=np.where(touch, exp_idx, -1).astype(np.float32), transform=grid.transform,
                         crs=grid.crs, source="exposure class index")
    missing = [c.name for c in ZONING if c.name not in zones.columns]
    assert not missing, missing  # internal contract; tests check it too
    return ZoningResult(zones=zones, start_xy=start_xy, finish_xy=finish_xy, exposure_breaks=tuple(breaks),
                        uncovered_share=uncovered, notes=tuple(notes), exposure_grid=exposure_grid)


def _nearest_dist(dist: np.ndarray, mask: np.ndarray, grid: Grid, x: float, y: float) -> float:
    xs, ys = grid.cell_centres()
    rows, cols = np.nonzero(mask)
    i = int(np.argmin((xs[cols] - x) ** 2 + (ys[rows] - y) ** 2))
    return float(dist[rows[i], cols[i]])


def _polygons(g: BaseGeometry) -> list[BaseGeometry]:
    if g is None or g.is_empty:
        return []
    if g.geom_type == "Polygon":
        return [g]
    if g.geom_type in ("MultiPolygon", "GeometryCollection"):
        out = []
        for p in g.geoms:
            out += _polygons(p)
        return out
    return []


def _merge_small(pieces: list[dict], min_area: float, n_exp: int, n_slope: int) -> list[dict]:
    """Merge pieces below *min_area* into the most similar touching neighbour.

    Similarity: the difference in exposure class counts most, then slope class, then section;
    among equally similar neighbours the one sharing the longest edge wins.  A small piece with no
    neighbour (an island of a multi-part course) stays a zone of its own.
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
    # Parent pointers: merged zones live on in the absorbing zone.
    def key(z: dict) -> tuple[int, int, int]:
        c = z["code"] - 1
        return ((c // n_slope) % n_exp, c % n_slope, c // (n_slope * n_exp))

    stuck: set[int] = set()
    while True:
        small = [i for i, z in enumerate(zones) if z["alive"] and z["geom"].area < min_area and i not in stuck]
        if not small:
            break
        i = min(small, key=lambda j: zones[j]["geom"].area)
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
            kj = key(zj)
            score = (abs(ki[0] - kj[0]), abs(ki[1] - kj[1]), abs(ki[2] - kj[2]), -shared)
            if best_score is None or score < best_score:
                best, best_score = j, score
        if best is None:
            stuck.add(i)
            continue
        zb = zones[best]
        zb["geom"] = shapely.union(zb["geom"], zi["geom"])
        if zb["geom"].geom_type != "Polygon":
            zb["geom"] = max(_polygons(shapely.make_valid(zb["geom"])), key=lambda g: g.area) \
                if len(_polygons(zb["geom"])) == 1 else shapely.unary_union(_polygons(zb["geom"]))
        zb["regions"] += zi["regions"]
        zb["weights"] += zi["weights"]
        zi["alive"] = False
        neighbours[best] |= neighbours[i]
        neighbours[best].discard(best)
        for j in neighbours[i]:
            neighbours[j].discard(i)
            if j != best:
                neighbours[j].add(best)
    return [z for z in zones if z["alive"]]
