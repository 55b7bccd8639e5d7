"""Read terrain models (DEM GeoTIFFs) in a metric CRS, and write the two-band sun GeoTIFF.

A DEM in a geographic CRS (degrees) is warped (bilinear) to the local UTM zone on GDAL's default
grid (square cells, about as many as the source has); nodata stays nodata (NaN inside; the file's
nodata value is honoured).
Optionally only a window (bounds plus a margin) is read: terrain outside the window casts no shadow,
so give a margin as wide as the longest shadow that matters (a 500 m ridge at 10° sun elevation
casts about 2.8 km).
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from courseplan.errors import CRSError, InputError, OutputError, OverlapError
from courseplan.io.course import check_readable

__all__ = ["Dem", "local_utm_crs", "read_dem", "write_sun_tiff", "BAND_NAMES", "BAND_UNITS"]

#: Band descriptions and units of the sun GeoTIFF (band 1, band 2).
BAND_NAMES = ("sun_fraction", "irradiation_wh_m2")
BAND_UNITS = ("1", "Wh/m2")


@dataclass(frozen=True, eq=False)
class Dem:
    """An elevation grid in a metric CRS.

    Attributes
    ----------
    elevation
        Elevation [m], float32, NaN where the file has no data.
    transform
        ``affine.Affine`` of the grid (north-up).
    crs
        :class:`pyproj.CRS`, projected in metres.
    source_crs
        The file's own CRS (differs from ``crs`` when the DEM was reprojected).
    path
        The file read.
    """

    elevation: np.ndarray
    transform: object
    crs: object
    source_crs: object
    path: Path

    @property
    def nodata_mask(self) -> np.ndarray:
        """True where there is no elevation."""
        return np.isnan(self.elevation)

    @property
    def bounds(self) -> tuple[float, float, float, float]:
        """(minx, miny, maxx, maxy) in ``crs``."""
        n_rows, n_cols = self.elevation.shape
        x0, y0 = self.transform @ (0, 0)
        x1, y1 = self.transform @ (n_cols, n_rows)
        return min(x0, x1), min(y0, y1), max(x0, x1), max(y0, y1)


def local_utm_crs(lon: float, lat: float):
    """Return the WGS 84 UTM zone CRS containing a point (EPSG 326xx north, 327xx south).

    Parameters
    ----------
    lon, lat
        Point [deg].

    Returns
    -------
    pyproj.CRS
    """
    from pyproj import CRS

    zone = int((lon + 180.0) // 6.0) % 60 + 1
    return CRS.from_epsg((32600 if lat >= 0 else 32700) + zone)


def _is_metric(crs) -> bool:
    units = {ax.unit_name.lower() for ax in crs.axis_info[:2]}
    return bool(crs.is_projected) and units <= {"metre", "meter", "m"}


def read_dem(path: str | os.PathLike[str], *, bounds: tuple[float, float, float, float] | None = None,
             bounds_crs=None, margin_m: float = 0.0, target_crs=None, band: int = 1) -> Dem:
    """Read a DEM, optionally only around some bounds, in a metric CRS.

    Parameters
    ----------
    path
        DEM raster (GeoTIFF or anything GDAL reads) with a CRS; elevations in metres.
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

    Returns
    -------
    Dem

    Raises
    ------
    MissingInputError
        The file does not exist or cannot be read.
    CRSError
        The file has no CRS, or ``target_crs`` is not metric.
    OverlapError
        ``bounds`` (plus margin) do not overlap the DEM (both extents and CRSs in the message).
    InputError
        Not a raster GDAL reads, or no such band.
    """
    import rasterio
    from pyproj import CRS, Transformer
    from rasterio.enums import Resampling
    from rasterio.warp import calculate_default_transform, reproject
    from rasterio.windows import Window, from_bounds

    p = check_readable(Path(path), "DEM")
    try:
        ds = rasterio.open(p)
    except rasterio.errors.RasterioIOError as exc:
        raise InputError(f"cannot read the DEM ({str(exc).splitlines()[0]})", where=str(p),
                         fix="give a GeoTIFF (or another raster GDAL reads)") from None
    with ds:
        if ds.crs is None:
            raise CRSError("the DEM has no CRS", where=str(p),
                           fix="assign one, e.g. gdal_edit.py -a_srs EPSG:32632 FILE")
        if not 1 <= band <= ds.count:
            raise InputError(f"the DEM has {ds.count} band(s), band {band} was asked for", where=str(p),
                             fix="choose an existing band")
        src_crs = CRS.from_user_input(ds.crs)
        window = None
        if bounds is not None:
            bcrs = src_crs if bounds_crs is None else CRS.from_user_input(bounds_crs)
            minx, miny, maxx, maxy = bounds
            if _is_metric(bcrs):
                want = (minx - margin_m, miny - margin_m, maxx + margin_m, maxy + margin_m)
                want_src = want if bcrs == src_crs else Transformer.from_crs(
                    bcrs, src_crs, always_xy=True).transform_bounds(*want, densify_pts=21)
            else:  # bounds in degrees: grow by the margin in metres along lat/lon
                lat_c = 0.5 * (miny + maxy)
                dlat = margin_m / 111_320.0
                dlon = margin_m / (111_320.0 * max(math.cos(math.radians(lat_c)), 1e-6))
                want = (minx - dlon, miny - dlat, maxx + dlon, maxy + dlat)
                want_src = want if bcrs == src_crs else Transformer.from_crs(
                    bcrs, src_crs, always_xy=True).transform_bounds(*want, densify_pts=21)
            rb = ds.bounds
            if (want_src[0] >= rb.right or want_src[2] <= rb.left
                    or want_src[1] >= rb.top or want_src[3] <= rb.bottom):
                raise OverlapError(
                    f"the area asked for {tuple(round(v, 6) for v in want)} ({bcrs.to_string()}) "
                    "lies outside "
                    f"the DEM's extent {tuple(round(v, 6) for v in rb)} ({src_crs.to_string()})",
                    where=str(p), fix="give a DEM that covers the course")
            w = from_bounds(*want_src, transform=ds.transform)
            c0, r0 = math.floor(w.col_off + 1e-9), math.floor(w.row_off + 1e-9)   # whole cells, outward
            c1 = math.ceil(w.col_off + w.width - 1e-9)
            r1 = math.ceil(w.row_off + w.height - 1e-9)
            window = Window(c0, r0, c1 - c0, r1 - r0).intersection(Window(0, 0, ds.width, ds.height))
        data = ds.read(band, window=window, masked=True)
        src_transform = ds.window_transform(window) if window is not None else ds.transform
        z = data.astype(np.float32).filled(np.nan)
        z[~np.isfinite(z)] = np.nan
        n_rows, n_cols = z.shape

    if target_crs is not None:
        dst_crs = CRS.from_user_input(target_crs)
        if not _is_metric(dst_crs):
            raise CRSError(f"working CRS {dst_crs.name!r} is not projected in metres", where="DEM",
                           fix="give a projected CRS such as the local UTM zone")
    elif _is_metric(src_crs):
        dst_crs = src_crs
    else:
        xc, yc = src_transform @ (n_cols / 2.0, n_rows / 2.0)
        lon, lat = Transformer.from_crs(src_crs, "EPSG:4326", always_xy=True).transform(xc, yc)
        dst_crs = local_utm_crs(lon, lat)

    if dst_crs == src_crs and src_transform.b == 0 and src_transform.d == 0:
        return Dem(elevation=np.ascontiguousarray(z), transform=src_transform, crs=dst_crs,
                   source_crs=src_crs, path=p)
    left, top = src_transform @ (0, 0)
    right, bottom = src_transform @ (n_cols, n_rows)
    # GDAL's default target grid: square cells, about as many as the source has
    dst_transform, width, height = calculate_default_transform(
        src_crs, dst_crs, n_cols, n_rows, left=min(left, right), bottom=min(top, bottom),
        right=max(left, right), top=max(top, bottom))
    out = np.full((height, width), np.nan, dtype=np.float32)
    reproject(z, out, src_transform=src_transform, src_crs=src_crs, src_nodata=np.nan,
              dst_transform=dst_transform, dst_crs=dst_crs, dst_nodata=np.nan, resampling=Resampling.bilinear)
    return Dem(elevation=out, transform=dst_transform, crs=dst_crs, source_crs=src_crs, path=p)


def write_sun_tiff(path: str | os.PathLike[str], sun_fraction: np.ndarray, irradiation_wh_m2: np.ndarray,
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
    if out.exists() and not overwrite:
        raise OutputError("the output file exists", where=str(out),
                          fix="choose another name or add --overwrite")
    if not out.parent.is_dir():
        raise OutputError("the output folder does not exist", where=str(out.parent), fix="create it first")
    a = np.asarray(sun_fraction, dtype=np.float32)
    b = np.asarray(irradiation_wh_m2, dtype=np.float32)
    if a.shape != b.shape or a.ndim != 2:
        raise ValueError(f"band shapes differ: {a.shape} vs {b.shape}")
    tmp = out.with_name(f".{out.name}.{os.getpid()}.part")
    profile = {"driver": "GTiff", "width": a.shape[1], "height": a.shape[0], "count": 2, "dtype": "float32",
               "crs": RioCRS.from_user_input(crs.to_wkt() if hasattr(crs, "to_wkt") else crs),
               "transform": transform, "nodata": float("nan"), "compress": "deflate", "predictor": 3,
               "tiled": a.shape[0] >= 256 and a.shape[1] >= 256, "BIGTIFF": "IF_SAFER"}
    if profile["tiled"]:
        profile.update(blockxsize=256, blockysize=256)
    try:
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
        os.replace(tmp, out)
    except (OSError, rasterio.errors.RasterioIOError) as exc:
        tmp.unlink(missing_ok=True)
        raise OutputError(f"cannot write the sun raster ({exc})", where=str(out),
                          fix="check the folder's permissions and free space") from None
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return out
