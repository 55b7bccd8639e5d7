"""Distance along the course: where each cell lies between the start and the finish.

Along a given centreline (GEOS linear referencing, ``shapely.line_locate_point``, evaluated on a
lattice and interpolated bilinearly), or without one along a line derived from shortest-path
distance bands inside the course (Dijkstra on the cell graph, ``scipy.sparse.csgraph``).  Also
finds the start and finish.  Pure: grids and geometries in, arrays out.
"""

from __future__ import annotations

import math

import numpy as np
import shapely
from shapely.geometry.base import BaseGeometry

from courseplan.geo.geometry import in_chunks
from courseplan.grid import Grid

LATTICE_STEP_M = 8.0
"""Spacing of the lattice on which a cell's position along the course line is computed exactly [m];
cells between lattice nodes are interpolated bilinearly (the position is a smooth function of the
point except on the inner side of sharp bends, where it jumps by less than the course width)."""



def cell_xy(grid: Grid, rows: np.ndarray, cols: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Working-CRS x and y of the centres of cells (rows, cols) of a north-up *grid*."""
    t = grid.transform
    return t.c + t.a * (cols + 0.5), t.f + t.e * (rows + 0.5)



def _locate_on_line(line: BaseGeometry, rows: np.ndarray, cols: np.ndarray, grid: Grid,
                    step_m: float = LATTICE_STEP_M,
                    coarse: tuple[np.ndarray, int] | None = None) -> np.ndarray:
    """Position along *line* [m] of the centres of cells (rows, cols).

    ``shapely.line_locate_point`` (GEOS linear referencing) is evaluated on a lattice of about *step_m*
    around the cells only, and interpolated bilinearly in between: on a 1 m grid that is about 40×
    fewer projections (on all cores, :func:`~courseplan.geo.geometry.in_chunks`).  When the cells are
    coarser than *step_m* every cell is projected exactly.  The interpolation is :func:`_bilinear`
    (the lattice first refined along its columns, then two ``numpy.take`` per cell).  *coarse*, the
    cells' blocks of k × k cells as a mask (``mask[rows // k, cols // k]``), when k divides the
    lattice step, gives the lattice blocks that hold cells without another pass over the cells.
    """
    cw, ch = grid.cell_size
    s = max(1, int(step_m // max(cw, ch)))
    if s == 1 or rows.size < 256:
        x, y = cell_xy(grid, rows, cols)
        return shapely.line_locate_point(line, shapely.points(x, y))
    rows, cols = _small_int(rows), _small_int(cols)
    br = rows // s
    # Lattice blocks holding cells, and the nodes at their four corners.
    if coarse is not None and s % coarse[1] == 0:
        blocks = _any_blocks(coarse[0], s // coarse[1])  # blocks of blocks: the same blocks, cheaply
        rr, cc = np.flatnonzero(blocks.any(axis=1)), np.flatnonzero(blocks.any(axis=0))
        r0, c0 = int(rr[0]), int(cc[0])
        height, width = int(rr[-1]) - r0 + 2, int(cc[-1]) - c0 + 2
        hit = np.zeros((height, width), dtype=bool)
        hit[:-1, :-1] = blocks[r0:r0 + height - 1, c0:c0 + width - 1]
    else:
        bc = cols // s
        r0, c0 = int(br.min()), int(bc.min())
        width = int(bc.max()) - c0 + 2
        height = int(br.max()) - r0 + 2
        # bincount: much faster than fancy-index assignment
        hit = np.bincount((br - r0) * width + (bc - c0), minlength=height * width).reshape(height, width) > 0
    need = hit.copy()
    need[1:, :] |= hit[:-1, :]
    need[:, 1:] |= hit[:, :-1]
    need[1:, 1:] |= hit[:-1, :-1]
    ni, nj = np.nonzero(need)
    x, y = cell_xy(grid, (ni + r0) * s, (nj + c0) * s)
    # Lattice nodes lie up to one step beyond the outermost cells; GEOS clamps positions beyond the
    # ends of the line, so project on the line prolonged by a margin and clamp afterwards.
    margin = 2.0 * s * max(cw, ch)
    lat = np.zeros(need.shape)
    wkb = shapely.to_wkb(_prolong(line, margin))

    def locate(px: np.ndarray, py: np.ndarray) -> np.ndarray:
        # Each chunk its own copy of the line: GEOS geometries are not safe to share between threads.
        return shapely.line_locate_point(shapely.from_wkb(wkb), shapely.points(px, py))

    pos = in_chunks(locate, x, y)
    lat[ni, nj] = pos - margin
    # Bilinear interpolation between the four lattice nodes around each cell (all of them computed).
    d = _bilinear(lat, s, rows - r0 * s, cols - c0 * s, br - r0)
    return np.clip(d, 0.0, line.length)


def _any_blocks(mask: np.ndarray, f: int) -> np.ndarray:
    """Return *mask* reduced by ``any`` over blocks of f × f (the last blocks padded with False)."""
    h, w = mask.shape
    pad = np.zeros((-(-h // f) * f, -(-w // f) * f), dtype=bool)
    pad[:h, :w] = mask
    return pad.reshape(pad.shape[0] // f, f, pad.shape[1] // f, f).any(axis=(1, 3))


def _small_int(a: np.ndarray) -> np.ndarray:
    """Return *a* as int32 when its values fit (numpy divides int32 several times faster than int64)."""
    a = np.asarray(a)
    if a.dtype == np.int32 or a.size == 0:
        return a
    return a.astype(np.int32) if -2**31 < int(a.min()) and int(a.max()) < 2**31 - 1 else a


def _bilinear(lat: np.ndarray, s: int, r: np.ndarray, c: np.ndarray, i: np.ndarray) -> np.ndarray:
    """Interpolate *lat*, a lattice with nodes every *s* cells, bilinearly at cells (r, c).

    Rows and columns count from the lattice's first node, *i* = r // s; the cells must lie inside
    its last row and column.  The lattice is first refined along its columns to every cell (a few
    times fewer values than the cells), then each cell is interpolated between the two refined
    values above and below it (``numpy.take``).
    """
    w = np.arange(s) / s
    h, nw = lat.shape
    wc = (nw - 1) * s
    fine = (lat[:, :-1, None] * (1.0 - w) + lat[:, 1:, None] * w).reshape(h, wc).ravel()

    def cells(r: np.ndarray, c: np.ndarray, i: np.ndarray) -> np.ndarray:
        idx = i.astype(np.intp) * wc + c  # numpy.take is fastest with intp indices
        top = np.take(fine, idx)
        idx += wc
        d = np.take(fine, idx)
        d -= top
        d *= (r - i * s) / s  # = w[r % s], the same division
        d += top
        return d

    # numpy releases the GIL in these loops: the cells in chunks on all cores.
    return in_chunks(cells, r, c, i, min_items=20_000)



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

    rows, cols = _small_int(rows), _small_int(cols)
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
    px, py = cell_xy(grid, *_row_ends(rows, cols))
    coords = _extend_ends(coords, px, py, extend_start=start_xy is None)
    line = shapely.LineString(coords).simplify(0.5 * max(cw, ch))
    start, finish = coords[0], coords[-1]
    return _locate_on_line(line, rows, cols, grid, coarse=(cm, k)), start, finish, notes



def _row_ends(rows: np.ndarray, cols: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Return the first and last cell of each row of cells (rows, cols) in row order, else all of them.

    Row order is the order ``numpy.nonzero`` gives.  A linear function of a cell's centre takes its
    largest value over a row at one of the row's two ends, so :func:`_extend_ends` needs only these.
    """
    if rows.size < 2 or not bool((rows[1:] >= rows[:-1]).all()):
        return rows, cols
    first = np.concatenate(([0], np.flatnonzero(rows[1:] != rows[:-1]) + 1))
    r = rows[first]
    return (np.concatenate([r, r]),
            np.concatenate([np.minimum.reduceat(cols, first), np.maximum.reduceat(cols, first)]))


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
