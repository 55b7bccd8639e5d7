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
from functools import cached_property

import numpy as np
import shapely
from shapely.geometry.base import BaseGeometry

from courseplan.columns import ZONING
from courseplan.errors import InputError, OverlapError
from courseplan.geo.geometry import geometry_from_geojson
from courseplan.grid import Grid
from courseplan.settings import Zoning

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
    """The zones plus what the later stages and outputs need.

    ``table`` (column name → values, in course order) and ``geometries`` are plain Python and
    shapely objects; ``zones`` joins them into a GeoDataFrame on first use, so that the zoning
    stage itself needs neither pandas nor geopandas.
    """

    table: dict
    geometries: tuple
    crs: object  # pyproj.CRS
    start_xy: tuple[float, float]
    finish_xy: tuple[float, float]
    exposure_breaks: tuple[float, ...]
    uncovered_share: float
    notes: tuple[str, ...] = field(default=())
    exposure_grid: Grid | None = None

    @property
    def n_zones(self) -> int:
        """Number of zones."""
        return len(self.geometries)

    @cached_property
    def zones(self):  # -> geopandas.GeoDataFrame
        """The zones as a GeoDataFrame (columns of ``table`` plus ``geometry``)."""
        import geopandas as gpd

        return gpd.GeoDataFrame(dict(self.table), geometry=list(self.geometries), crs=self.crs)


def _rasterize(geom: BaseGeometry, grid: Grid, all_touched: bool, band_rows: int = 128,
               min_vertices: int = 1000) -> np.ndarray:
    """Cells of *grid* inside *geom* (centre inside, or touched with *all_touched*), as booleans.

    ``rasterio.features.rasterize`` (GDAL's scan-line fill) costs about rows × vertices, which for
    a long, winding course outline on a tall window is most of the zoning time.  The grid is
    therefore burnt in bands of *band_rows* rows, each with the outline clipped
    (``shapely.clip_by_rect``) to the band plus one cell on every side: the clip's own edges fall
    outside the band's cells, so every band is burnt exactly as the whole grid would be.  Outlines
    of fewer than *min_vertices* vertices, and short grids, are burnt in one pass.
    """
    from affine import Affine
    from rasterio.features import rasterize

    h, w = grid.shape
    t = grid.transform
    if h <= 2 * band_rows or shapely.get_num_coordinates(geom) < min_vertices or t.b != 0 or t.d != 0 or t.e >= 0:
        return rasterize([(geom, 1)], out_shape=grid.shape, transform=t, fill=0,
                         all_touched=all_touched, dtype="uint8").astype(bool)
    out = np.zeros((h, w), dtype=bool)
    ch, cw = -t.e, t.a
    x0, x1 = t.c - cw, t.c + cw * (w + 1)
    for r0 in range(0, h, band_rows):
        r1 = min(h, r0 + band_rows)
        part = shapely.clip_by_rect(geom, x0, t.f - ch * (r1 + 1), x1, t.f - ch * (r0 - 1))
        burn = _as_arrays(part)
        if not burn:
            continue
        out[r0:r1] = rasterize(burn, out_shape=(r1 - r0, w), transform=t * Affine.translation(0, r0),
                               fill=0, all_touched=all_touched, dtype="uint8").astype(bool)
    return out


def _as_arrays(geom: BaseGeometry) -> list[tuple[dict, int]]:
    """(GeoJSON-like polygon with coordinate arrays, 1) per polygon part of *geom*, for rasterize.

    rasterio reads coordinate arrays directly; ``__geo_interface__`` would first build tuples of
    every vertex in Python.  The parts of a valid polygon are disjoint, so burning them one by one
    burns their union.
    """
    out = []
    for q in shapely.get_parts(geom):
        if q.geom_type != "Polygon" or q.is_empty:
            continue
        rings = [shapely.get_coordinates(q.exterior)] + [shapely.get_coordinates(r) for r in q.interiors]
        out.append(({"type": "Polygon", "coordinates": rings}, 1))
    return out


def _fill_nearest(values: np.ndarray, valid: np.ndarray) -> np.ndarray:
    from scipy.ndimage import distance_transform_edt

    if valid.all():
        return values
    idx = distance_transform_edt(~valid, return_distances=False, return_indices=True)
    return values[tuple(idx)]


LATTICE_STEP_M = 8.0
"""Spacing of the lattice on which a cell's position along the course line is computed exactly [m];
cells between lattice nodes are interpolated bilinearly (the position is a smooth function of the
point except on the inner side of sharp bends, where it jumps by less than the course width)."""


def _cell_xy(grid: Grid, rows: np.ndarray, cols: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Working-CRS x and y of the centres of cells (rows, cols) of a north-up *grid*."""
    t = grid.transform
    return t.c + t.a * (cols + 0.5), t.f + t.e * (rows + 0.5)


def _locate_on_line(line: BaseGeometry, rows: np.ndarray, cols: np.ndarray, grid: Grid,
                    step_m: float = LATTICE_STEP_M) -> np.ndarray:
    """Position along *line* [m] of the centres of cells (rows, cols).

    ``shapely.line_locate_point`` (GEOS linear referencing) is evaluated on a lattice of about *step_m*
    around the cells only, and interpolated bilinearly in between: on a 1 m grid that is about 40×
    fewer projections.  When the cells are coarser than *step_m* every cell is projected exactly.
    """
    cw, ch = grid.cell_size
    s = max(1, int(step_m // max(cw, ch)))
    if s == 1 or rows.size < 256:
        x, y = _cell_xy(grid, rows, cols)
        return shapely.line_locate_point(line, shapely.points(x, y))
    from scipy.ndimage import map_coordinates

    br, bc = rows // s, cols // s
    r0, c0 = int(br.min()), int(bc.min())
    width = int(bc.max()) - c0 + 2
    height = int(br.max()) - r0 + 2
    # Lattice blocks holding cells (bincount: much faster than fancy-index assignment), and the
    # nodes at their four corners.
    hit = (np.bincount((br - r0) * width + (bc - c0), minlength=height * width) > 0).reshape(height, width)
    need = hit.copy()
    need[1:, :] |= hit[:-1, :]
    need[:, 1:] |= hit[:, :-1]
    need[1:, 1:] |= hit[:-1, :-1]
    ni, nj = np.nonzero(need)
    x, y = _cell_xy(grid, (ni + r0) * s, (nj + c0) * s)
    # Lattice nodes lie up to one step beyond the outermost cells; GEOS clamps positions beyond the
    # ends of the line, so project on the line prolonged by a margin and clamp afterwards.
    margin = 2.0 * s * max(cw, ch)
    lat = np.zeros(need.shape)
    lat[ni, nj] = shapely.line_locate_point(_prolong(line, margin), shapely.points(x, y)) - margin
    # Bilinear interpolation between the four lattice nodes around each cell (all of them computed).
    d = map_coordinates(lat, [rows / s - r0, cols / s - c0], order=1, mode="nearest", prefilter=False)
    return np.clip(d, 0.0, line.length)


def _prolong(line: BaseGeometry, margin: float) -> BaseGeometry:
    """*line* with both end segments prolonged straight by *margin* [m]."""
    if line.geom_type != "LineString":
        return line
    c = shapely.get_coordinates(line)
    if len(c) < 2:
        return line
    u0 = c[0] - c[1]
    u1 = c[-1] - c[-2]
    n0, n1 = float(np.hypot(*u0)), float(np.hypot(*u1))
    if n0 == 0 or n1 == 0:
        return line
    return shapely.LineString(np.vstack([c[0] + u0 / n0 * margin, c, c[-1] + u1 / n1 * margin]))


def distance_along_course(mask: np.ndarray, grid: Grid, start_xy: tuple[float, float] | None,
                          centreline: BaseGeometry | None = None, elevation: np.ndarray | None = None,
                          max_nodes: int = 12_000) -> tuple[np.ndarray, tuple[float, float], tuple[float, float],
                                                            list[str]]:
    """Distance from the start [m] of every masked cell, following the course.

    A grid wrapper of :func:`distance_of_cells`.  Returns the distance grid (NaN outside the
    mask), the start and finish used, and notes.
    """
    rows, cols = np.nonzero(mask)
    d, start, finish, notes = distance_of_cells(rows, cols, grid, start_xy, centreline, elevation, max_nodes)
    dist = np.full(mask.shape, np.nan, dtype=np.float64)
    dist[rows, cols] = d
    return dist, start, finish, notes


def distance_of_cells(rows: np.ndarray, cols: np.ndarray, grid: Grid, start_xy: tuple[float, float] | None,
                      centreline: BaseGeometry | None = None, elevation: np.ndarray | None = None,
                      max_nodes: int = 12_000) -> tuple[np.ndarray, tuple[float, float], tuple[float, float],
                                                        list[str]]:
    """Distance from the start [m] of the course cells (rows, cols) of *grid*, following the course.

    With a centreline: the position of each cell centre projected on the line.  Otherwise the
    shortest 8-connected path inside the course (Dijkstra, ``scipy.sparse.csgraph``) on the cell
    grid coarsened to at most *max_nodes* cells; its equal-distance bands give a centreline through
    their centroids, on which the cells are then projected (the level sets of a geodesic distance
    from one point are round; sections must cut across the course).  Without a start point the two
    ends of the course are found by a double sweep (farthest cell from any cell, then farthest from
    that); the start is the higher end when elevations are given, else the northern end.

    Returns
    -------
    distance, start_xy, finish_xy, notes
        Distance of each cell [m] and the start and finish used.
    """
    notes: list[str] = []
    if centreline is not None:
        d = _locate_on_line(centreline, rows, cols, grid)
        s = centreline.interpolate(0.0)
        f = centreline.interpolate(centreline.length)
        return d, (s.x, s.y), (f.x, f.y), notes

    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import dijkstra

    k = max(1, int(math.ceil(math.sqrt(rows.size / max_nodes))))
    cm = np.zeros((int(rows.max()) // k + 1, int(cols.max()) // k + 1), dtype=bool)
    cm[rows // k, cols // k] = True
    Rc, Cc = cm.shape
    node = np.full(cm.shape, -1, dtype=np.int32)
    nn = int(cm.sum())
    node[cm] = np.arange(nn, dtype=np.int32)
    cw, ch = grid.cell_size[0] * k, grid.cell_size[1] * k
    src, dst, wt = [], [], []
    for dr, dc in ((0, 1), (1, 0), (1, 1), (1, -1)):
        a = node[0:Rc - dr, max(0, -dc):Cc - max(0, dc)]
        b = node[dr:Rc, max(0, dc):Cc - max(0, -dc)]
        ok = (a >= 0) & (b >= 0)
        src.append(a[ok])
        dst.append(b[ok])
        wt.append(np.full(int(ok.sum()), math.hypot(cw * dc, ch * dr)))
    g = coo_matrix((np.concatenate(wt), (np.concatenate(src), np.concatenate(dst))), shape=(nn, nn)).tocsr()
    crow, ccol = np.nonzero(cm)
    t = grid.transform
    cx = t.c + t.a * (ccol * k + k / 2.0)
    cy = t.f + t.e * (crow * k + k / 2.0)

    def far(start_node: int) -> tuple[int, np.ndarray]:
        d = dijkstra(g, directed=False, indices=start_node)
        return int(np.argmax(np.where(np.isfinite(d), d, -1))), d

    d_nodes = None
    if start_xy is None:
        a_node, _ = far(0)
        b_node, d_from_a = far(a_node)
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
        if start_node == a_node:
            d_nodes = d_from_a  # the sweep's second run already started there
    else:
        start_node = int(np.argmin((cx - start_xy[0]) ** 2 + (cy - start_xy[1]) ** 2))
    if d_nodes is None:
        d_nodes = dijkstra(g, directed=False, indices=start_node)
    unreachable = ~np.isfinite(d_nodes)
    if unreachable.any():
        d_nodes[unreachable] = np.nanmax(np.where(unreachable, np.nan, d_nodes))
    finish_node = int(np.argmax(d_nodes))
    # Centroids of equal-distance bands follow the middle of the course through bends.
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
    px, py = _cell_xy(grid, rows, cols)
    coords = _extend_ends(coords, px, py, extend_start=start_xy is None)
    line = shapely.LineString(coords).simplify(0.5 * max(cw, ch))
    start, finish = coords[0], coords[-1]
    return _locate_on_line(line, rows, cols, grid), start, finish, notes


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


def _label_regions(code: np.ndarray) -> tuple[np.ndarray, int]:
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


def _clip_to(polys: np.ndarray, course: BaseGeometry) -> np.ndarray:
    """Intersection of each polygon with *course*, exact.

    Polygons that lie inside the course are kept as they are (``contains_properly`` on the
    prepared course); for the others the overlay runs against the course clipped to the polygon's
    bounding box (``clip_by_rect``), not against the whole course outline.
    """
    out = polys.copy()
    shapely.prepare(course)
    cut = ~shapely.contains_properly(course, polys)
    if cut.any():
        b = shapely.bounds(polys[cut])
        local = np.array([shapely.clip_by_rect(course, *bb) for bb in b], dtype=object)
        bad = ~shapely.is_valid(local)
        local[bad] = course
        out[cut] = shapely.intersection(polys[cut], local)
    return out


def _code_key(code: int, n_exp: int, n_slope: int) -> tuple[int, int, int]:
    """(exposure class, slope class, section) of a zone code (``(section·n_exp + exposure)·n_slope + slope + 1``)."""
    c = code - 1
    return ((c // n_slope) % n_exp, c % n_slope, c // (n_slope * n_exp))


def _similarity(ki: tuple[int, int, int], kj: tuple[int, int, int], shared: float) -> tuple:
    """Merge preference (smaller is better): same exposure first, then slope class, then section,
    then the longest shared edge."""
    return (abs(ki[0] - kj[0]), abs(ki[1] - kj[1]), abs(ki[2] - kj[2]), -shared)


def _merge_small_regions(region: np.ndarray, n_reg: int, code: np.ndarray, touch: np.ndarray, grid: Grid,
                         min_area: float, n_exp: int, n_slope: int) -> tuple[np.ndarray, int]:
    """Merge regions below *min_area* into the most similar neighbour, on the raster.

    The same rule as :func:`_merge_small` (exposure class first, then slope class, then section,
    then the longest shared edge), with areas counted in cells and shared edges in cell sides.
    Doing it before polygonising leaves the vector merge only the few pieces that clipping to the
    exact outline makes small.  Returns the relabelled regions, numbered 1 … n again.
    """
    if n_reg < 2:
        return region, n_reg
    cw, ch = grid.cell_size
    area = np.bincount(region[touch], minlength=n_reg + 1).astype(np.float64) * (cw * ch)
    if not (area[1:] < min_area).any():
        return region, n_reg
    pair_parts, len_parts = [], []
    for a, b, side in ((region[:, :-1], region[:, 1:], ch), (region[:-1, :], region[1:, :], cw)):
        m = (a != b) & (a > 0) & (b > 0)
        lo, hi = np.minimum(a[m], b[m]).astype(np.int64), np.maximum(a[m], b[m]).astype(np.int64)
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
    reg_code[region[touch]] = code[touch]
    key = [_code_key(c, n_exp, n_slope) for c in reg_code.tolist()]
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
    return lut[region], int(survivors.size)


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
        ``table`` holds the columns declared in :data:`courseplan.columns.ZONING`, plus
        ``aspect_deg``; ``geometries`` the zone polygons; ``zones`` both as a GeoDataFrame.
    """
    import rasterio

    # One GDAL environment for the many rasterize/sieve/shapes calls (each would set one up).
    with rasterio.Env():
        return _zone_course(inp, settings, window_hours=window_hours, max_uncovered_pct=max_uncovered_pct)


def _zone_course(inp: ZoningInputs, settings: Zoning, *, window_hours: float,
                 max_uncovered_pct: float) -> ZoningResult:
    from affine import Affine
    from rasterio.features import shapes, sieve

    grid = inp.sun
    notes: list[str] = []
    touch_w = _rasterize(inp.course, grid, all_touched=True)
    if not touch_w.any():
        raise OverlapError("the sun raster window holds no cell of the course", where=grid.source,
                           fix="check that the raster covers the course")
    # Course first: from here on only the bounding box of the course's cells, and mostly only
    # the course's own cells as flat arrays.
    rr, cc = np.flatnonzero(touch_w.any(axis=1)), np.flatnonzero(touch_w.any(axis=0))
    box = (slice(int(rr[0]), int(rr[-1]) + 1), slice(int(cc[0]), int(cc[-1]) + 1))
    touch = touch_w[box]
    del touch_w
    ct = grid.transform @ Affine.translation(int(cc[0]), int(rr[0]))
    cgrid = Grid(values=grid.values[box], transform=ct, crs=grid.crs, source=grid.source)
    rows, cols = np.nonzero(touch)
    v = cgrid.values
    vt = v[touch].astype(np.float64)
    valid_t = np.isfinite(vt)
    uncovered = 0.0
    if not valid_t.all():
        inside = _rasterize(inp.course, cgrid, all_touched=False)
        if not inside.any():
            inside = touch
        uncovered = float((inside & ~np.isfinite(v)).sum()) / float(inside.sum())
    if not valid_t.any():
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
    vv = vt[valid_t]
    tol = 1e-6 * max(1.0, hi)
    if vv.min() < lo - tol or vv.max() > hi + tol:
        raise InputError(f"sun raster values {vv.min():.4g} … {vv.max():.4g} are outside the range "
                         f"{lo:g} … {hi:g} of the declared encoding {inp.encoding!r}", where=grid.source,
                         fix="set [inputs] sun_encoding to fraction (0–1), percent (0–100) or wh_m2")
    if not valid_t.all():
        ok = np.isfinite(v)
        vt = _fill_nearest(np.where(ok, v, 0.0), ok)[touch].astype(np.float64)

    breaks = list(settings.exposure_breaks or default_breaks(inp.encoding, window_hours))
    labels = settings.exposure_labels
    if len(labels) != len(breaks) + 1:
        raise InputError(f"{len(breaks)} exposure breaks need {len(breaks) + 1} labels, got {len(labels)}",
                         where="[zoning]", fix="give one label more than breaks")
    n_exp = len(labels)
    exp_t = np.digitize(vt, breaks)

    def on_cells(g: Grid | None) -> np.ndarray | None:
        if g is None:
            return None
        a = g.values[box]
        at = a[touch].astype(np.float64)
        if not np.isfinite(at).all():
            ok = np.isfinite(a)
            at = _fill_nearest(np.where(ok, a, 0.0), ok)[touch].astype(np.float64) if ok.any() else \
                np.zeros_like(at)
        return at

    slope_t = on_cells(inp.slope_deg)
    if slope_t is not None:
        sbreaks = list(settings.slope_breaks_deg)
        slope_idx_t = np.digitize(slope_t, sbreaks)
        n_slope = len(sbreaks) + 1
        edges = [0.0] + sbreaks + [90.0]
        slope_labels = [f"{edges[i]:g}–{edges[i + 1]:g}°" for i in range(n_slope)]
    else:
        slope_idx_t = 0
        n_slope = 1
        slope_labels = ["n/a"]
    aspect_t = None
    if inp.aspect_deg is not None:
        aspect_t = np.nan_to_num(inp.aspect_deg.values[box][touch].astype(np.float64), nan=0.0)

    elev = inp.elevation_m.values[box] if inp.elevation_m is not None else None
    dist_t, start_xy, finish_xy, dnotes = distance_of_cells(rows, cols, cgrid, inp.start_xy, inp.centreline, elev)
    notes += dnotes
    L = settings.section_length_m
    if inp.markers:
        px, py = _cell_xy(cgrid, rows, cols)
        mk = sorted((float(dist_t[int(np.argmin((px - x) ** 2 + (py - y) ** 2))]), name)
                    for name, x, y in inp.markers)
        mdist = np.array([m[0] for m in mk])
        sec_t = np.searchsorted(mdist, dist_t, side="right")
        sec_names = ["start"] + [m[1] for m in mk]
    else:
        sec_t = np.floor(dist_t / L).astype(np.int64)
        sec_names = None

    code_t = ((sec_t * n_exp + exp_t) * n_slope + slope_idx_t + 1).astype(np.int32)
    code = np.zeros(touch.shape, dtype=np.int32)
    code[touch] = code_t
    speckle = int(max(2, (settings.min_zone_area_m2 / 8.0) / cgrid.cell_area_m2))
    if speckle > 1 and rows.size > speckle:
        code_t = sieve(code, size=speckle, mask=touch, connectivity=4)[touch]
        code[:] = 0
        code[touch] = code_t
    region, n_reg = _label_regions(code)
    region, n_reg = _merge_small_regions(region, n_reg, code, touch, cgrid, settings.min_zone_area_m2,
                                         n_exp, n_slope)
    region_t = region[touch]
    nreg = n_reg + 1
    cnt = np.bincount(region_t, minlength=nreg).astype(np.float64)
    cnt[cnt == 0] = np.nan
    reg_code = np.zeros(nreg, dtype=np.int64)
    reg_code[region_t] = code_t

    def mean(a: np.ndarray) -> np.ndarray:
        return np.bincount(region_t, weights=a, minlength=nreg) / cnt

    r_sun = mean(vt)
    r_dist = mean(dist_t)
    if slope_t is not None:
        r_slope = mean(slope_t)
        r_sec = mean(1.0 / np.cos(np.radians(np.clip(slope_t, 0, 85))))
    else:
        r_slope, r_sec = np.zeros(nreg), np.ones(nreg)
    if aspect_t is not None:
        r_as = np.bincount(region_t, weights=np.sin(np.radians(aspect_t)), minlength=nreg)
        r_ac = np.bincount(region_t, weights=np.cos(np.radians(aspect_t)), minlength=nreg)
        r_aspect = np.degrees(np.arctan2(r_as, r_ac)) % 360.0
    else:
        r_aspect = np.full(nreg, np.nan)

    # One polygon per region (each region is 4-connected), clipped to the exact course.
    polys: dict[int, BaseGeometry] = {}
    for gj, val in shapes(region, mask=region > 0, connectivity=4, transform=ct):
        r = int(val)
        g = geometry_from_geojson(gj)
        polys[r] = shapely.union(polys[r], g) if r in polys else g
    reg_ids = sorted(polys)
    clipped = _clip_to(np.array([polys[r] for r in reg_ids], dtype=object), inp.course)
    pieces = []
    for r, g in zip(reg_ids, clipped, strict=True):
        for part in _polygons(g):
            if part.area > 0:
                pieces.append({"geom": part, "region": r, "code": int(reg_code[r]), "area": part.area})
    merged = _merge_small(pieces, settings.min_zone_area_m2, n_exp, n_slope)

    cols_out: dict[str, list] = {c: [] for c in (
        "exposure_class", "exposure_rank", "slope_class", "section", "section_index", "sun_fraction",
        "irradiation_wh_m2", "slope_deg", "aspect_deg", "distance_from_start_m", "map_area_m2", "area_m2")}
    geoms = []
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
        area = float(z["geom"].area)
        for name, value in (
                ("exposure_class", labels[ex]), ("exposure_rank", int(ex)), ("slope_class", slope_labels[sl]),
                ("section", section), ("section_index", int(sc)),
                ("sun_fraction", sun_mean if inp.encoding == "fraction" else
                 sun_mean / 100.0 if inp.encoding == "percent" else float("nan")),
                ("irradiation_wh_m2", sun_mean if inp.encoding == "wh_m2" else float("nan")),
                ("slope_deg", float(np.sum(w * np.nan_to_num(r_slope[regs])) / wsum)),
                ("aspect_deg", aspect_mean),
                ("distance_from_start_m", float(np.sum(w * np.nan_to_num(r_dist[regs])) / wsum)),
                ("map_area_m2", area), ("area_m2", area * sec_mean)):
            cols_out[name].append(value)
        geoms.append(z["geom"])
    # Course order: mean distance from the start, then exposure rank (stable).
    order = np.lexsort((np.asarray(cols_out["exposure_rank"], dtype=np.int64),
                        np.asarray(cols_out["distance_from_start_m"], dtype=np.float64))).tolist()
    n = len(order)
    table: dict[str, list] = {"zone_id": list(range(1, n + 1)), "course_order": list(range(1, n + 1))}
    table.update({k: [vals[i] for i in order] for k, vals in cols_out.items()})
    exp_grid = np.full(touch.shape, -1.0, dtype=np.float32)
    exp_grid[touch] = exp_t
    exposure_grid = Grid(values=exp_grid, transform=ct, crs=grid.crs, source="exposure class index")
    missing = [c.name for c in ZONING if c.name not in table]
    assert not missing, missing  # internal contract; tests check it too
    return ZoningResult(table=table, geometries=tuple(geoms[i] for i in order), crs=grid.crs,
                        start_xy=start_xy, finish_xy=finish_xy, exposure_breaks=tuple(breaks),
                        uncovered_share=uncovered, notes=tuple(notes), exposure_grid=exposure_grid)


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
        return _code_key(z["code"], n_exp, n_slope)

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
            score = _similarity(ki, key(zj), shared)
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
