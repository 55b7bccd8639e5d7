"""Context picture of the hill for the offline map: a terrain or sun raster as a PNG data URI.

:func:`context_from_raster` turns a DEM (shaded relief with a light height tint) or a sun raster (a
ramp from deep shade to full sun) into a :class:`ContextImage` warped to Web Mercator, which
:func:`courseplan.render.webmap.render_map_html` lays under the zones.  The relief is lit by
:func:`hillshade`, Lambert's cosine law on Horn's gradient (:func:`courseplan.physics.terrain.horn_gradient`).

Notes
-----
Data in: a 2-D numpy raster with its affine transform and CRS.  Out: a :class:`ContextImage`
(``uint8`` RGBA array and bounds), encoded by :meth:`ContextImage.png_data_uri` as a ``str``
(``data:image/png;base64,...``).  This module opens no files.
"""

from __future__ import annotations

import base64
import io
import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from courseplan.errors import InputError
from courseplan.physics.terrain import horn_gradient

SUN_RAMP: tuple[tuple[float, str], ...] = ((0.0, "#27324f"), (0.35, "#6b7690"), (0.7, "#d9c27a"),
                                           (1.0, "#fff0b8"))
"""Context picture of a sun raster: share of the window in sun 0 → 1, deep shade to full sun."""

TERRAIN_LOW, TERRAIN_HIGH = "#d8dccd", "#f6f3ea"
"""Tints of the terrain context picture at the lowest and highest height."""


def _hex_rgb(c: str) -> tuple[int, int, int]:
    c = c.lstrip("#")
    return int(c[0:2], 16), int(c[2:4], 16), int(c[4:6], 16)


@dataclass(frozen=True, eq=False)
class ContextImage:
    """A picture of the hill placed under the zones.

    Attributes
    ----------
    rgba
        ``(rows, cols, 3 or 4)`` uint8 array, north up.
    bounds
        ``(west, south, east, north)`` of the picture in ``crs``.
    crs
        CRS of ``bounds``; the picture is linear in it.  Leaflet draws an image overlay linearly in
        Web Mercator, so a picture in EPSG:3857 (as :func:`context_from_raster` makes) is placed
        exactly; in any other CRS its corners are reprojected and the picture stretched between
        them (an axis-aligned approximation, good to a few metres over a few kilometres).
    kind
        ``"terrain"`` or ``"sun"``.
    legend
        One line for the map legend.
    """

    rgba: np.ndarray
    bounds: tuple[float, float, float, float]
    crs: str = "EPSG:3857"
    kind: str = "terrain"
    legend: str = ""

    def latlon_bounds(self) -> tuple[tuple[float, float], tuple[float, float]]:
        """``((south, west), (north, east))`` in degrees, as Leaflet wants them."""
        from pyproj import Transformer

        w, s, e, n = self.bounds
        tr = Transformer.from_crs(self.crs, "EPSG:4326", always_xy=True)
        xs, ys = tr.transform([w, e, w, e], [s, s, n, n])
        return (min(ys), min(xs)), (max(ys), max(xs))

    def png_data_uri(self) -> str:
        """Encode the picture as a ``data:image/png;base64,...`` URI (Pillow encoder)."""
        from PIL import Image

        arr = np.ascontiguousarray(self.rgba, dtype=np.uint8)
        mode = "RGBA" if arr.shape[2] == 4 else "RGB"
        buf = io.BytesIO()
        Image.fromarray(arr, mode).save(buf, format="PNG", optimize=True)
        return "data:image/png;base64," + base64.b64encode(buf.getvalue()).decode("ascii")


def _block_mean(a: np.ndarray, f: int) -> np.ndarray:
    """NaN-aware mean over f × f blocks (edges padded with NaN)."""
    if f <= 1:
        return a
    r, c = a.shape
    R, C = -(-r // f) * f, -(-c // f) * f
    p = np.full((R, C), np.nan, dtype=np.float64)
    p[:r, :c] = a
    b = p.reshape(R // f, f, C // f, f)
    with np.errstate(invalid="ignore"):
        cnt = np.isfinite(b).sum(axis=(1, 3))
        tot = np.nansum(b, axis=(1, 3))
        return np.where(cnt > 0, tot / np.maximum(cnt, 1), np.nan)


def hillshade(z: np.ndarray, cell_x: float, cell_y: float, azimuth_deg: float = 315.0,
              altitude_deg: float = 45.0) -> np.ndarray:
    """Shaded relief in 0–1 of a height grid (north up) lit from the given direction.

    Lambert's cosine law on the surface normal from Horn's 3 × 3 gradient
    (:func:`courseplan.physics.terrain.horn_gradient`), the usual cartographic hillshade with light
    from the north-west.

    Parameters
    ----------
    z
        Heights [m], rows running south; NaN allowed.
    cell_x, cell_y
        Cell width and height [m], positive.
    azimuth_deg, altitude_deg
        Direction of the light [°], azimuth clockwise from north.
    """
    dzdx, dzdn = horn_gradient(np.asarray(z, dtype=float), cell_x, cell_y, dtype=np.float64)
    az, alt = np.radians(azimuth_deg), np.radians(altitude_deg)
    lx, ly, lz = np.sin(az) * np.cos(alt), np.cos(az) * np.cos(alt), np.sin(alt)
    norm = np.sqrt(dzdx ** 2 + dzdn ** 2 + 1.0)
    return np.clip((-dzdx * lx - dzdn * ly + lz) / norm, 0.0, 1.0)


def _ramp(values: np.ndarray, stops: tuple[tuple[float, str], ...]) -> np.ndarray:
    xs = np.array([s for s, _ in stops])
    cols = np.array([_hex_rgb(c) for _, c in stops], dtype=float)
    v = np.clip(values, xs[0], xs[-1])
    return np.stack([np.interp(v, xs, cols[:, k]) for k in range(3)], axis=-1)


def context_from_raster(values: np.ndarray, transform: Any, crs: Any, kind: str = "terrain", *,
                        nodata: float | None = None, max_pixels: int = 640,
                        sun_max: float = 1.0) -> ContextImage:
    """Make a context picture of the hill from a DEM or a sun raster.

    The raster is averaged down to at most ``max_pixels`` on its long side, coloured (terrain:
    hillshade times a light height tint; sun: a ramp from deep shade to full sun), and warped to
    Web Mercator (EPSG:3857, bilinear) so that Leaflet places it exactly.

    Parameters
    ----------
    values
        2-D raster, north up: heights [m] for ``kind="terrain"``, share of the window in sun
        (0–1) for ``kind="sun"``.
    transform
        Affine transform of the raster (``rasterio``/``affine``).
    crs
        CRS of the raster (anything ``pyproj`` and ``rasterio`` accept).
    kind
        ``"terrain"`` or ``"sun"``.
    nodata
        Value marking cells without data (besides NaN); they are transparent.
    max_pixels
        Longest side of the picture before warping [px].
    sun_max
        Value meaning "sun all the time" (1 for a fraction, 100 for percent).

    Raises
    ------
    InputError
        When ``kind`` is unknown or the raster is not 2-D or holds no data.
    """
    from affine import Affine
    from rasterio.crs import CRS as RioCRS
    from rasterio.warp import Resampling, calculate_default_transform, reproject

    if kind not in ("terrain", "sun"):
        raise InputError(f"context kind {kind!r} is not 'terrain' or 'sun'", where="context_from_raster")
    a = np.array(values, dtype=np.float64)
    if a.ndim != 2:
        raise InputError(f"context raster has {a.ndim} dimensions, not 2", where="context_from_raster")
    if nodata is not None:
        a[a == nodata] = np.nan
    if not np.isfinite(a).any():
        raise InputError("context raster holds no data", where="context_from_raster",
                         fix="pass the DEM or sun raster that covers the course")
    t = Affine(*tuple(transform)[:6])
    f = max(1, math.ceil(max(a.shape) / max_pixels))
    a = _block_mean(a, f)
    t = t @ Affine.scale(f, f)
    valid = np.isfinite(a)
    if kind == "terrain":
        filled = np.where(valid, a, np.nanmean(a))
        shade = hillshade(filled, abs(t.a), abs(t.e))
        lo, hi = np.nanpercentile(a, 1), np.nanpercentile(a, 99)
        h = np.clip((filled - lo) / max(hi - lo, 1e-9), 0, 1)[..., None]
        tint = (1 - h) * np.array(_hex_rgb(TERRAIN_LOW), float) + h * np.array(_hex_rgb(TERRAIN_HIGH), float)
        rgb = tint * (0.38 + 0.62 * shade[..., None])
        legend = "Terrain: shaded relief of the terrain model (light from the north-west)"
    else:
        frac = np.where(valid, a / sun_max, 0.0)
        rgb = _ramp(frac, SUN_RAMP)
        legend = "Sun: share of the hold window in direct sun, dark = shade, light = sun"
    src = np.concatenate([rgb, np.where(valid, 255.0, 0.0)[..., None]], axis=-1)
    src = np.moveaxis(src, -1, 0).astype(np.float32)
    src_crs = RioCRS.from_user_input(crs)
    dst_crs = RioCRS.from_epsg(3857)
    rows, cols = a.shape
    left, top = t @ (0, 0)
    right, bottom = t @ (cols, rows)
    dst_t, dst_w, dst_h = calculate_default_transform(src_crs, dst_crs, cols, rows,
                                                      left=min(left, right), bottom=min(top, bottom),
                                                      right=max(left, right), top=max(top, bottom))
    dst = np.zeros((4, dst_h, dst_w), dtype=np.float32)
    reproject(src, dst, src_transform=t, src_crs=src_crs, dst_transform=dst_t, dst_crs=dst_crs,
              resampling=Resampling.bilinear, src_nodata=None, dst_nodata=0)
    out = np.clip(np.rint(np.moveaxis(dst, 0, -1)), 0, 255).astype(np.uint8)
    # trim the ragged margins left by warping a slightly rotated grid (a few pixels at most)
    r0, r1, c0, c1 = 0, out.shape[0], 0, out.shape[1]
    lim_r, lim_c = max(2, int(0.03 * out.shape[0])), max(2, int(0.03 * out.shape[1]))
    for _ in range(max(lim_r, lim_c)):
        a_ = out[r0:r1, c0:c1, 3] < 128
        moved = False
        if r0 < lim_r and a_[0].mean() > 0.02:
            r0, moved = r0 + 1, True
        if out.shape[0] - r1 < lim_r and a_[-1].mean() > 0.02:
            r1, moved = r1 - 1, True
        if c0 < lim_c and a_[:, 0].mean() > 0.02:
            c0, moved = c0 + 1, True
        if out.shape[1] - c1 < lim_c and a_[:, -1].mean() > 0.02:
            c1, moved = c1 - 1, True
        if not moved:
            break
    out = out[r0:r1, c0:c1]
    w, n = dst_t @ (c0, r0)
    e, s = dst_t @ (c1, r1)
    return ContextImage(rgba=out, bounds=(w, s, e, n), crs="EPSG:3857", kind=kind, legend=legend)


__all__ = ["ContextImage", "context_from_raster", "hillshade", "SUN_RAMP", "TERRAIN_LOW", "TERRAIN_HIGH"]
