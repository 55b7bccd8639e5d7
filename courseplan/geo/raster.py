"""Raster maths in memory: burn a polygon into a grid, fill gaps, resample one grid onto another.

No paths and no settings: arrays and :class:`courseplan.grid.Grid` in, arrays and grids out.

- :func:`burn` — the cells inside a polygon (GDAL's scan-line fill via ``rasterio.features``),
  in row bands for long outlines (see its docstring for why this is exact);
- :func:`fill_nearest` — fill invalid cells with the nearest valid value (Euclidean distance
  transform, ``scipy.ndimage``);
- :func:`resample_to` — bilinear (or nearest) reprojection onto another grid (``rasterio.warp``).
"""

from __future__ import annotations

import numpy as np
import shapely
from shapely.geometry.base import BaseGeometry

from courseplan.grid import Grid


def burn(geom: BaseGeometry, grid: Grid, all_touched: bool, band_rows: int = 128,
               min_vertices: int = 1000) -> np.ndarray:
    """Cells of *grid* inside *geom* (centre inside, or touched with *all_touched*), as booleans.

    ``rasterio.features.rasterize`` (GDAL's scan-line fill) costs about rows × vertices per polygon,
    which for a long, winding course outline on a tall window is most of the zoning time.  The
    outline is therefore cut into bands of *band_rows* rows (``shapely.clip_by_rect`` to the band
    plus one cell on every side) and all the bands are burnt in one ``rasterize`` call: GDAL scans
    each polygon over its own rows only, so the cost is the sum over the bands of rows × vertices,
    with one call's overhead.  The pieces are parts of *geom* and together cover it, and the clip's
    own edges run where *geom* goes on across them, so their cells are the cells of *geom* (a cell
    the outline only grazes may come out either way, as it does when GDAL's window moves).
    Outlines of fewer than *min_vertices* vertices, and short grids, are burnt in one pass.
    """
    from rasterio.features import rasterize

    h, w = grid.shape
    t = grid.transform
    if h <= 2 * band_rows or shapely.get_num_coordinates(geom) < min_vertices or t.b != 0 or t.d != 0 or t.e >= 0:
        return rasterize([(geom, 1)], out_shape=grid.shape, transform=t, fill=0,
                         all_touched=all_touched, dtype="uint8").astype(bool)
    ch, cw = -t.e, t.a
    x0, x1 = t.c - cw, t.c + cw * (w + 1)
    pieces = []
    for r0 in range(0, h, band_rows):
        r1 = min(h, r0 + band_rows)
        pieces += _as_arrays(shapely.clip_by_rect(geom, x0, t.f - ch * (r1 + 1), x1, t.f - ch * (r0 - 1)))
    if not pieces:
        return np.zeros((h, w), dtype=bool)
    return rasterize(pieces, out_shape=(h, w), transform=t, fill=0, all_touched=all_touched,
                     dtype="uint8").view(bool)



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



def fill_nearest(values: np.ndarray, valid: np.ndarray) -> np.ndarray:
    from scipy.ndimage import distance_transform_edt

    if valid.all():
        return values
    idx = distance_transform_edt(~valid, return_distances=False, return_indices=True)
    return values[tuple(idx)]


def resample_to(grid: Grid, target: Grid, *, nearest: bool = False) -> Grid:
    """Resample *grid* onto *target*'s cells (bilinear, or nearest)."""
    from rasterio.enums import Resampling
    from rasterio.warp import reproject

    if grid.transform == target.transform and grid.shape == target.shape:
        return grid
    dst = np.full(target.shape, np.nan, dtype=np.float32)
    reproject(grid.values, dst, src_transform=grid.transform, src_crs=grid.crs, dst_transform=target.transform,
              dst_crs=target.crs, resampling=Resampling.nearest if nearest else Resampling.bilinear,
              src_nodata=np.nan, dst_nodata=np.nan)
    return Grid(values=dst, transform=target.transform, crs=target.crs, source=grid.source)
