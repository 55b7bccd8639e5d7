"""The one raster reader (sun/shade rasters and DEMs) and the sun GeoTIFF writer.

Course first: only the window around the course (plus a margin) is read, never the whole raster.
A raster in another CRS is read in its own CRS over the transformed bounds and then warped
(bilinear) onto a grid of about the same cell size in the working CRS.  Every raster comes back
as a :class:`courseplan.grid.Grid` (float32, NaN = no data); :func:`read_dem` is :func:`read_window`
over a DEM's own extent (or some bounds) in a metric CRS.
"""

from __future__ import annotations

import math
from contextlib import contextmanager
from pathlib import Path

import numpy as np
from pyproj import CRS, Transformer

from courseplan.errors import CRSError, InputError, OutputError, OverlapError
from courseplan.geo.crs import is_metric, require_metric, utm_crs
from courseplan.grid import Grid
from courseplan.io.files import check_readable, refuse_existing, write_atomic


def _fmt_bounds(b) -> str:
    return f"({b[0]:.6g}, {b[1]:.6g}) – ({b[2]:.6g}, {b[3]:.6g})"


def raster_crs(path: Path) -> CRS | None:
    """CRS of a raster file, or None when it has none."""
    import rasterio

    with rasterio.open(path) as ds:
        return CRS.from_user_input(ds.crs) if ds.crs else None


def open_raster_info(path: Path, what: str) -> dict:
    """CRS, bounds, cell size, band count and nodata of a raster, with clear errors."""
    with _open_checked(path, what) as (ds, info):
        del ds
    return info


@contextmanager
def _open_checked(path: Path, what: str):
    """Open a raster once: ``(dataset, info)`` where *info* is what :func:`open_raster_info` returns,
    checked (CRS, north-up, west-to-east) before the caller reads anything."""
    import rasterio

    p = check_readable(path, what)
    try:
        ds = rasterio.open(p)
    except rasterio.errors.RasterioIOError as exc:
        raise InputError(f"cannot read the {what} raster ({str(exc).splitlines()[0]})", where=str(p),
                         fix="give a GeoTIFF (or another raster GDAL reads)") from None
    with ds:
        info = {"crs": CRS.from_user_input(ds.crs) if ds.crs else None, "bounds": tuple(ds.bounds),
                "res": ds.res, "count": ds.count, "nodata": ds.nodata, "shape": (ds.height, ds.width),
                "descriptions": ds.descriptions, "units": ds.units, "transform": ds.transform}
        _check_info(info, p, what)
        yield ds, info


def _check_info(info: dict, p: Path, what: str) -> None:
    if info["crs"] is None:
        raise CRSError(f"the {what} raster has no CRS", where=str(p),
                       fix="assign one with rasterio's rio command, e.g. rio edit-info --crs EPSG:32632 FILE")
    t = info["transform"]
    if t.b != 0 or t.d != 0:
        angle = math.degrees(math.atan2(t.d, t.a))
        raise InputError(f"the {what} raster's grid is rotated (geotransform rotation terms {t.b:g}, {t.d:g}; "
                         f"about {angle:.1f}°), which courseplan does not read", where=str(p),
                         fix="warp it to a north-up grid first, e.g. with rasterio's rio command: rio warp IN.tif OUT.tif --dst-crs EPSG:32632")
    if t.e > 0:
        raise InputError(f"the {what} raster is stored south-up (its rows run from south to north, "
                         f"pixel height {t.e:g} > 0)", where=str(p),
                         fix="write it north-up first, e.g. with rasterio's rio command: rio warp IN.tif OUT.tif --dst-crs EPSG:32632")
    if t.a < 0:
        raise InputError(f"the {what} raster is stored east-to-west (pixel width {t.a:g} < 0)", where=str(p),
                         fix="write it with columns running west to east, e.g. with rasterio's rio command: rio warp IN.tif OUT.tif --dst-crs EPSG:32632")


#: Vertical units of a DEM band (its unit type, as `rio info` shows it) and their size in metres.
DEM_UNITS = {"": 1.0, "m": 1.0, "metre": 1.0, "meter": 1.0, "metres": 1.0, "meters": 1.0,
             "ft": 0.3048, "foot": 0.3048, "feet": 0.3048, "international foot": 0.3048,
             "us-ft": 1200.0 / 3937.0, "us survey foot": 1200.0 / 3937.0, "ftus": 1200.0 / 3937.0,
             "us_survey_foot": 1200.0 / 3937.0}


def dem_unit_factor(info: dict, band: int, where: str) -> tuple[float, str]:
    """Metres per DEM unit of *band* and the unit as written; unknown units are refused."""
    units = info.get("units") or ()
    unit = (units[band - 1] if band - 1 < len(units) else "") or ""
    key = unit.strip().lower()
    if key not in DEM_UNITS:
        raise InputError(f"the DEM's heights are in {unit!r}, a unit courseplan does not know", where=where,
                         fix="give heights in metres or feet (set the band unit, e.g. "
                             "rio edit-info --units m FILE, if the values already are metres)")
    return DEM_UNITS[key], unit


def pick_sun_band(info: dict, encoding: str, band: int | None, where: str) -> int:
    """Which band of a sun raster holds *encoding*.

    A two-band raster written by ``courseplan sun`` (band descriptions :data:`BAND_NAMES`) gives
    the fraction in band 1 and Wh/m² in band 2; ``[inputs] sun_band`` picks a band explicitly.
    """
    desc = tuple((d or "") for d in (info.get("descriptions") or ()))
    ours = desc[: len(BAND_NAMES)] == BAND_NAMES
    if band is not None:
        if band > info["count"]:
            raise InputError(f"the sun raster has {info['count']} band(s), [inputs] sun_band = {band} was asked "
                             "for", where=where, fix=f"choose a band from 1 to {info['count']}")
        if ours and band <= len(BAND_NAMES):
            holds = ("fraction", "wh_m2")[band - 1]
            if holds != encoding:
                raise InputError(f"band {band} of this courseplan sun raster holds {BAND_NAMES[band - 1]}, "
                                 f"but sun_encoding is {encoding!r}", where=where,
                                 fix=f"set [inputs] sun_encoding = \"{holds}\" or choose the other band")
        return band
    if ours:
        if encoding == "fraction":
            return 1
        if encoding == "wh_m2":
            return 2
        raise InputError("this courseplan sun raster holds sun_fraction (band 1) and irradiation_wh_m2 "
                         f"(band 2), not {encoding!r}", where=where,
                         fix='set [inputs] sun_encoding = "fraction" or "wh_m2"')
    if info["count"] > 1:
        raise InputError(f"the sun raster has {info['count']} bands ({', '.join(d or '?' for d in desc)}) and "
                         "none is known to hold the sun", where=where,
                         fix="set [inputs] sun_band to the band that holds it")
    return 1


def read_window(path: Path, bounds: tuple[float, float, float, float], work_crs: CRS, *, what: str,
                band: int = 1, margin_m: float = 20.0, resolution_m: float | None = None) -> Grid:
    """Read *band* of a raster over *bounds* (working CRS) plus a margin, as a :class:`Grid` in *work_crs*.

    Raises
    ------
    OverlapError
        When the raster does not overlap the bounds (the message gives both extents and CRSs).
    """
    import rasterio

    # GDAL_NUM_THREADS: GeoTIFF decodes a compressed window's tiles on all cores (GDAL ≥ 3.6).
    with rasterio.Env(GDAL_NUM_THREADS="ALL_CPUS"), _open_checked(path, what) as (ds, info):
        return _read_window(ds, info, path, bounds, work_crs, what=what, band=band, margin_m=margin_m,
                            resolution_m=resolution_m)


def _read_window(ds, info: dict, path: Path, bounds, work_crs: CRS, *, what: str, band: int, margin_m: float,
                 resolution_m: float | None) -> Grid:
    import rasterio
    from rasterio.enums import MaskFlags, Resampling
    from rasterio.warp import reproject
    from rasterio.windows import from_bounds

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
    if what == "DEM":
        factor, _unit = dem_unit_factor(info, band, str(path))
        if factor != 1.0:
            arr = (arr * np.float32(factor)).astype(np.float32)
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




#: Band descriptions and units of the sun GeoTIFF (band 1, band 2).
BAND_NAMES = ("sun_fraction", "irradiation_wh_m2")
BAND_UNITS = ("1", "Wh/m2")


def read_dem(path, *, bounds: tuple[float, float, float, float] | None = None, bounds_crs=None,
             margin_m: float = 0.0, target_crs=None, band: int = 1) -> Grid:
    """Read a DEM, optionally only around some bounds, as a :class:`Grid` in a metric CRS.

    Parameters
    ----------
    path
        DEM raster (GeoTIFF or anything GDAL reads) with a CRS; elevations in metres, or in feet
        when the band's unit says so (``ft``, ``foot``, ``us-ft``: converted to metres).
    bounds
        Optional (minx, miny, maxx, maxy) to read around, in ``bounds_crs`` (default: the DEM's CRS).
    bounds_crs
        CRS of ``bounds``.
    margin_m
        Margin [m] added on every side of ``bounds``.
    target_crs
        Metric CRS to return the DEM in; default: the DEM's own CRS when it is metric, else the local
        UTM zone of the DEM's (or the bounds') centre.
    band
        Band holding elevation.

    Raises
    ------
    MissingInputError, CRSError, OverlapError, InputError
        As :func:`read_window`; also when ``target_crs`` is not metric.
    """
    p = Path(path)
    info = open_raster_info(p, "DEM")
    src: CRS = info["crs"]
    bcrs = src if bounds_crs is None else CRS.from_user_input(bounds_crs)
    b = tuple(info["bounds"]) if bounds is None else tuple(bounds)
    if bounds is None:
        bcrs = src
    if target_crs is not None:
        work = require_metric(target_crs, "working CRS", "give a projected CRS such as the local UTM zone")
    elif is_metric(src):
        work = src
    else:
        lon, lat = Transformer.from_crs(bcrs, "EPSG:4326", always_xy=True).transform(
            0.5 * (b[0] + b[2]), 0.5 * (b[1] + b[3]))
        work = utm_crs(lon, lat)
    wb = b if bcrs == work else Transformer.from_crs(bcrs, work, always_xy=True).transform_bounds(
        *b, densify_pts=21)
    return read_window(p, wb, work, what="DEM", band=band, margin_m=margin_m)


def write_sun_tiff(path: str | Path, sun_fraction: np.ndarray, irradiation_wh_m2: np.ndarray,
                   transform, crs, *, tags: dict[str, object] | None = None, overwrite: bool = False) -> Path:
    """Write the two-band sun GeoTIFF, through a temporary file moved into place.

    Parameters
    ----------
    path
        Output file.
    sun_fraction
        Band 1: share of the window in direct sun [-] (NaN = nodata).
    irradiation_wh_m2
        Band 2: clear-sky irradiation on the surface over the window [Wh/m²].
    transform, crs
        Grid of both bands.
    tags
        Extra dataset tags (date, window, method, ...); written as text.
    overwrite
        Replace an existing file.

    Returns
    -------
    pathlib.Path
        The file written.

    Raises
    ------
    OutputError
        The file exists and ``overwrite`` is False, or it cannot be written.
    """
    import rasterio
    from rasterio.crs import CRS as RioCRS

    out = Path(path)
    refuse_existing(out, overwrite, kind="file")
    a = np.asarray(sun_fraction, dtype=np.float32)
    b = np.asarray(irradiation_wh_m2, dtype=np.float32)
    if a.shape != b.shape or a.ndim != 2:
        raise ValueError(f"band shapes differ: {a.shape} vs {b.shape}")
    profile = {"driver": "GTiff", "width": a.shape[1], "height": a.shape[0], "count": 2, "dtype": "float32",
               "crs": RioCRS.from_user_input(crs.to_wkt() if hasattr(crs, "to_wkt") else crs),
               "transform": transform, "nodata": float("nan"), "compress": "deflate", "predictor": 3,
               "tiled": a.shape[0] >= 256 and a.shape[1] >= 256, "BIGTIFF": "IF_SAFER"}
    if profile["tiled"]:
        profile.update(blockxsize=256, blockysize=256)
    def write(tmp: Path) -> None:
        with rasterio.open(tmp, "w", **profile) as ds:
            ds.write(a, 1)
            ds.write(b, 2)
            for i, (name, unit) in enumerate(zip(BAND_NAMES, BAND_UNITS, strict=True), start=1):
                ds.set_band_description(i, name)
                ds.set_band_unit(i, unit)
            ds.update_tags(1, meaning="share of the window in direct sun (0-1)")
            ds.update_tags(2, meaning="clear-sky irradiation on the snow surface over the window, "
                                      "direct + diffuse")
            if tags:
                ds.update_tags(**{str(k): str(v) for k, v in tags.items()})

    try:
        write_atomic(out, write, what="sun raster")
    except rasterio.errors.RasterioIOError as exc:
        raise OutputError(f"cannot write the sun raster ({exc})", where=str(out),
                          fix="check the folder's permissions and free space") from None
    return out
