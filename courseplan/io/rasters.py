"""Read raster windows around the course and bring them into the working CRS.

Course first: only the window around the course (plus a margin) is read, never the whole raster.
A raster in another CRS is read in its own CRS over the transformed bounds and then warped
(bilinear) onto a grid of about the same cell size in the working CRS.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
from pyproj import CRS, Transformer

from courseplan.errors import CRSError, InputError, OverlapError
from courseplan.grid import Grid
from courseplan.io.course import check_readable


def _fmt_bounds(b) -> str:
    return f"({b[0]:.6g}, {b[1]:.6g}) – ({b[2]:.6g}, {b[3]:.6g})"


def raster_crs(path: Path) -> CRS | None:
    """CRS of a raster file, or None when it has none."""
    import rasterio

    with rasterio.open(path) as ds:
        return CRS.from_user_input(ds.crs) if ds.crs else None


def open_raster_info(path: Path, what: str) -> dict:
    """CRS, bounds, cell size, band count and nodata of a raster, with clear errors."""
    import rasterio

    p = check_readable(path, what)
    try:
        with rasterio.open(p) as ds:
            info = {"crs": CRS.from_user_input(ds.crs) if ds.crs else None, "bounds": tuple(ds.bounds),
                    "res": ds.res, "count": ds.count, "nodata": ds.nodata, "shape": (ds.height, ds.width),
                    "descriptions": ds.descriptions}
    except rasterio.errors.RasterioIOError as exc:
        raise InputError(f"cannot read the {what} raster ({str(exc).splitlines()[0]})", where=str(p),
                         fix="give a GeoTIFF (or another raster GDAL reads)") from None
    if info["crs"] is None:
        raise CRSError(f"the {what} raster has no CRS", where=str(p),
                       fix="assign one, e.g. gdal_edit.py -a_srs EPSG:32632 FILE")
    return info


def read_window(path: Path, bounds: tuple[float, float, float, float], work_crs: CRS, *, what: str,
                band: int = 1, margin_m: float = 20.0, resolution_m: float | None = None) -> Grid:
    """Read *band* of a raster over *bounds* (working CRS) plus a margin, as a :class:`Grid` in *work_crs*.

    Raises
    ------
    OverlapError
        When the raster does not overlap the bounds (the message gives both extents and CRSs).
    """
    import rasterio
    from rasterio.enums import MaskFlags, Resampling
    from rasterio.warp import reproject
    from rasterio.windows import from_bounds

    info = open_raster_info(path, what)
    if band > info["count"]:
        raise InputError(f"the {what} raster has {info['count']} band(s), band {band} was asked for",
                         where=str(path), fix="choose an existing band")
    rcrs: CRS = info["crs"]
    minx, miny, maxx, maxy = bounds
    want = (minx - margin_m, miny - margin_m, maxx + margin_m, maxy + margin_m)
    same = rcrs == work_crs
    if same:
        want_r = want
    else:
        tr = Transformer.from_crs(work_crs, rcrs, always_xy=True)
        want_r = tr.transform_bounds(*want, densify_pts=21)
    rb = info["bounds"]
    if want_r[0] >= rb[2] or want_r[2] <= rb[0] or want_r[1] >= rb[3] or want_r[3] <= rb[1]:
        raise OverlapError(
            f"the {what} raster does not overlap the course: raster extent {_fmt_bounds(rb)} in "
            f"{rcrs.to_string()}, course extent {_fmt_bounds(bounds)} in {work_crs.to_string()}",
            where=str(path), fix="give a raster that covers the course, or check both files' CRS")
    # A raster that covers only part of the course is read beyond its edge (NaN there), so that the
    # uncovered share of the course is counted as missing data instead of silently cut off.
    partial = same and not (rb[0] <= minx and rb[1] <= miny and maxx <= rb[2] and maxy <= rb[3])
    with rasterio.open(path) as ds:
        win = from_bounds(*want_r, transform=ds.transform)
        win = win.round_offsets(op="floor").round_lengths(op="ceil")
        if not partial:
            win = win.intersection(rasterio.windows.Window(0, 0, ds.width, ds.height))
        wtransform = ds.window_transform(win)
        flags = set(ds.mask_flag_enums[band - 1])
        if partial or flags & {MaskFlags.per_dataset, MaskFlags.alpha}:
            # Beyond the edge, or a mask band / alpha: let GDAL say which cells are valid.
            arr = ds.read(band, window=win, masked=True, boundless=partial).astype(np.float32).filled(np.nan)
        else:
            arr = ds.read(band, window=win, out_dtype="float32")
        if ds.nodata is not None and not np.isnan(ds.nodata):
            arr[arr == np.float32(ds.nodata)] = np.nan
    if same:
        return Grid(values=arr, transform=wtransform, crs=work_crs, source=f"{path} band {band}")
    # Warp the window onto a grid in the working CRS with about the same cell size.
    from rasterio.transform import from_origin

    if resolution_m is None:
        if rcrs.is_geographic:
            lat = 0.5 * (want_r[1] + want_r[3])
            resolution_m = abs(wtransform.e) * 111_320.0
            resolution_m = min(resolution_m, abs(wtransform.a) * 111_320.0 * math.cos(math.radians(lat)))
        else:
            resolution_m = min(abs(wtransform.a), abs(wtransform.e))
    cols = max(1, int(math.ceil((want[2] - want[0]) / resolution_m)))
    rows = max(1, int(math.ceil((want[3] - want[1]) / resolution_m)))
    dst_t = from_origin(want[0], want[3], resolution_m, resolution_m)
    dst = np.full((rows, cols), np.nan, dtype=np.float32)
    reproject(arr, dst, src_transform=wtransform, src_crs=rcrs, dst_transform=dst_t, dst_crs=work_crs,
              resampling=Resampling.bilinear, src_nodata=np.nan, dst_nodata=np.nan)
    return Grid(values=dst, transform=dst_t, crs=work_crs, source=f"{path} band {band} (warped)")


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
