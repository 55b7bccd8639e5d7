"""Zoning stage: split the course into zones a crew can find on the hill.

A zone is a connected piece of the course with one exposure class (from the sun/shade raster),
one slope class (from the DEM, when given) and one course section (distance band from the start,
or between named markers).  Course first: every step works on the raster window around the course
only.  Steps:

1. classify the cells of the window that touch the course (exposure × slope × section);
2. label the connected regions and merge those below the minimum area into the most similar
   neighbour, on the raster (a noisy raster with more than :data:`SPECKLE_REGIONS` regions is
   sieved first, ``rasterio.features.sieve``);
3. polygonise the region raster (``rasterio.features.shapes``) and take per-region statistics in
   one pass over the window (``numpy.bincount`` on the region raster);
4. smooth the regions' shared edges by about one cell (``shapely.coverage_simplify``: the region
   polygons come from one raster, so they are an edge-matched coverage);
5. clip the smoothed regions to the exact course polygon, so that zone areas sum to the course
   area (a check of the areas confirms the tiling, :func:`~courseplan.geo.coverage.ensure_tiling`);
6. merge pieces below the minimum area, and slivers narrower than the minimum width, into the most
   similar touching neighbour (same exposure first, then slope class, then section; ties broken by
   the longest shared edge); then touching zones of one section whose mean sun and slope hardly
   differ (``alike_sun_share``, ``alike_slope_deg``) into one, so that a class break that only grazes
   the piste does not split it lengthwise: zones run across the full width unless the exposure
   really changes across it;
7. number the zones 1 … n in course order (mean distance from the start) and label them
   section number + letter (``2B``).

Distance from the start follows the course: along the centreline when one is given, otherwise the
shortest path inside the course polygon on the cell grid (Dijkstra, ``scipy.sparse.csgraph``).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
from shapely.geometry.base import BaseGeometry

from courseplan.columns import check_stage
from courseplan.geo.coverage import ensure_tiling, smooth_coverage, split_large_zones, thin_test
from courseplan.geo.regions import (
    clip_to,
    code_key,
    label_regions,
    merge_alike,
    merge_small_pieces,
    merge_small_regions,
    polygon_parts,
    polygonise,
)
from courseplan.grid import Grid
from courseplan.settings import Zoning
from courseplan.stages.zoning.cells import ENCODING_RANGE, course_cells, default_breaks  # noqa: F401

SPECKLE_REGIONS = 2000
"""Above this many connected regions in the class raster, speckle below an eighth of the minimum zone
area is sieved out (``rasterio.features.sieve``) before the merge by similarity (a Python loop)."""

_ZONE_COLS = ("exposure_class", "exposure_rank", "slope_class", "section", "section_index", "sun_fraction",
              "raster_irradiation_wh_m2", "slope_deg", "aspect_deg", "distance_from_start_m", "map_area_m2",
              "area_m2")


def _merge_alike(merged: list[dict], settings: Zoning, breaks: list[float], n_exp: int, n_slope: int,
                 r_sun: np.ndarray, r_slope: np.ndarray | None, sbreaks: list[float] | None) -> list[dict]:
    """Touching zones of one section whose mean sun (and slope) hardly differ become one zone
    (``[zoning] alike_sun_share``, ``alike_slope_deg``); its classes follow its new means."""
    share = settings.alike_sun_share
    if share <= 0 or len(merged) < 2:
        return merged
    spacing = (breaks[-1] - breaks[0]) if len(breaks) > 1 else abs(breaks[0])
    sun_step = share * spacing
    slope_step = settings.alike_slope_deg

    sun0 = np.nan_to_num(r_sun)  # once, not per zone (nan_to_num costs tens of µs a call)
    slope0 = np.nan_to_num(r_slope) if r_slope is not None else None

    def summary(z: dict) -> tuple:
        regs, w = np.asarray(z["regions"]), np.asarray(z["weights"])
        sun = float(np.sum(w * sun0[regs]) / w.sum())
        slope = float(np.sum(w * slope0[regs]) / w.sum()) if slope0 is not None else 0.0
        _, slope_class, section = code_key(z["code"], n_exp, n_slope)
        return section, sun, slope, slope_class

    def alike(a: tuple, b: tuple) -> float | None:
        if a[0] != b[0] or abs(a[1] - b[1]) >= sun_step:
            return None
        if r_slope is not None and (abs(a[2] - b[2]) >= slope_step if slope_step > 0 else a[3] != b[3]):
            return None
        return abs(a[1] - b[1]) / max(sun_step, 1e-12) + (abs(a[2] - b[2]) / slope_step if slope_step > 0 else 0.0)

    n_before = len(merged)
    out = merge_alike(merged, summary, alike)
    if len(out) == n_before:
        return out
    for z in out:
        sec, sun, slope, _ = summary(z)
        ex = int(np.digitize([sun], breaks)[0])
        sl = int(np.digitize([slope], sbreaks)[0]) if sbreaks is not None else 0
        z["code"] = (sec * n_exp + ex) * n_slope + sl + 1
    return out


def zone_labels(section_index: list[int]) -> list[str]:
    """Short zone labels in course order: section number (1-based) and a letter per zone in it,
    ``1A``, ``1B``, ``2A`` …; past ``Z`` the letters go on ``AA``, ``AB`` …"""
    def letters(k: int) -> str:
        out = ""
        k += 1
        while k:
            k, r = divmod(k - 1, 26)
            out = chr(65 + r) + out
        return out

    seen: dict[int, int] = {}
    out = []
    for s in section_index:
        k = seen.get(int(s), 0)
        seen[int(s)] = k + 1
        out.append(f"{int(s) + 1}{letters(k)}")
    return out


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


def zone_given(inp: ZoningInputs, settings: Zoning, geoms, ids, labels=None, *, window_hours: float,
               max_uncovered_pct: float = 5.0) -> ZoningResult:
    """Compute the zoning columns of given zones (a chief's edit) on the cells :func:`zone_course` uses.

    Cells from :func:`courseplan.geo.edits.cells_of_zones`; exposure and slope class from the zone's
    mean sun and slope, its section the one most of its cells lie in; *ids* and non-empty *labels* kept.
    """
    import rasterio

    from courseplan.geo.edits import cells_of_zones

    with rasterio.Env():
        c = course_cells(inp, settings, window_hours=window_hours, max_uncovered_pct=max_uncovered_pct)
    zi, ci = cells_of_zones(list(geoms), c.touch, c.ct)
    n = len(geoms)
    cnt = np.bincount(zi, minlength=n).astype(np.float64)

    def mean(a) -> np.ndarray:
        return np.bincount(zi, weights=np.asarray(a, dtype=np.float64)[ci], minlength=n) / cnt

    has_slope, a = c.slope_t is not None, np.radians(c.aspect_t) if c.aspect_t is not None else None
    slope = mean(c.slope_t) if has_slope else np.zeros(n)
    sec_mean = mean(1.0 / np.cos(np.radians(np.clip(c.slope_t, 0, 85)))) if has_slope else np.ones(n)
    aspect = np.degrees(np.arctan2(mean(np.sin(a)), mean(np.cos(a)))) % 360 if a is not None else \
        np.full(n, np.nan)
    sun, dist = mean(c.vt), mean(c.dist_t)
    exp = np.digitize(sun, c.breaks)
    sl = np.digitize(slope, list(settings.slope_breaks_deg)) if has_slope else np.zeros(n, int)
    n_sec = int(np.max(c.sec_t)) + 1
    sec = np.argmax(np.bincount(zi * n_sec + np.asarray(c.sec_t, dtype=np.int64)[ci],
                                minlength=n * n_sec).reshape(n, n_sec), axis=1)
    cols_out: dict[str, list] = {k: [] for k in _ZONE_COLS}
    for k, g in enumerate(geoms):
        _row(cols_out, c, inp.encoding, int(exp[k]), int(sl[k]), int(sec[k]), sun=float(sun[k]),
             slope=float(slope[k]), aspect=float(aspect[k]), dist=float(dist[k]), area=float(g.area),
             sec_mean=float(sec_mean[k]))
    return _result(c, cols_out, list(geoms), ids=list(ids), given_labels=list(labels) if labels else None)


def _zone_course(inp: ZoningInputs, settings: Zoning, *, window_hours: float,
                 max_uncovered_pct: float) -> ZoningResult:
    from rasterio.features import sieve

    c = course_cells(inp, settings, window_hours=window_hours, max_uncovered_pct=max_uncovered_pct)
    touch, ct, cgrid, rows, vt, notes, n_exp = c.touch, c.ct, c.cgrid, c.rows, c.vt, c.notes, c.n_exp
    n_slope, exp_t, slope_t, slope_idx_t, aspect_t = c.n_slope, c.exp_t, c.slope_t, c.slope_idx_t, c.aspect_t
    dist_t, sec_t = c.dist_t, c.sec_t
    code_t = ((sec_t * n_exp + exp_t) * n_slope + slope_idx_t + 1).astype(np.int32)
    code = np.zeros(touch.shape, dtype=np.int32)
    code[touch] = code_t
    region, n_reg = label_regions(code)
    speckle = int(max(2, (settings.min_zone_area_m2 / 8.0) / cgrid.cell_area_m2))
    if n_reg > SPECKLE_REGIONS and rows.size > speckle:
        # A noisy raster: GDAL's sieve removes the speckle first (into the largest neighbour), so
        # that the merge by similarity below has a few thousand regions to work on, not 10⁵.
        code_t = sieve(code, size=speckle, mask=touch, connectivity=4)[touch]
        code[:] = 0
        code[touch] = code_t
        region, n_reg = label_regions(code)
    region, n_reg = merge_small_regions(region, n_reg, code, touch, cgrid, settings.min_zone_area_m2,
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
    def const(v: float) -> np.ndarray:  # the same value for every cell, without the memory
        return np.broadcast_to(np.float64(v), (vt.size,))

    if aspect_t is not None:
        a_sin, a_cos = np.sin(np.radians(aspect_t)), np.cos(np.radians(aspect_t))
        r_asin, r_acos = mean(a_sin), mean(a_cos)
    else:  # no aspect: NaN for every cell and so for every region
        a_sin = a_cos = const(np.nan)
        r_asin, r_acos = np.full(nreg, np.nan), np.full(nreg, np.nan)

    # One polygon per region (each region is 4-connected).  The region polygons are a coverage
    # (edge-matched, from one raster): smooth their shared edges as one, then clip to the exact course.
    polys = polygonise(region, ct)
    reg_ids = sorted(polys)
    raw, smoothed = smooth_coverage(np.array([polys[r] for r in reg_ids], dtype=object), max(cgrid.cell_size))
    if len(reg_ids) > 1 and not smoothed:
        notes.append("zone edges left as raster steps: the zones were not a clean coverage to simplify")
    clipped = clip_to(raw, inp.course)
    pieces = []
    for r, g in zip(reg_ids, clipped, strict=True):
        for part in polygon_parts(g):
            if part.area > 0:
                pieces.append({"geom": part, "region": r, "code": int(reg_code[r]), "area": part.area})
    thin = thin_test(inp.course, settings.min_zone_width_m)
    merged = merge_small_pieces(pieces, settings.min_zone_area_m2, n_exp, n_slope, thin=thin)
    merged = _merge_alike(merged, settings, c.breaks, n_exp, n_slope, r_sun, r_slope if slope_t is not None else None,
                          list(settings.slope_breaks_deg) if slope_t is not None else None)
    # Zones too big for one crew in one window: cut across the course (the parts get their own means).
    cap = max(settings.max_zone_area_m2, 2.0 * settings.min_zone_area_m2) if settings.max_zone_area_m2 > 0 else 0
    secant_t = 1.0 / np.cos(np.radians(np.clip(slope_t, 0, 85))) if slope_t is not None else const(1.0)
    merged, rv = split_large_zones(
        merged, cap, region_t, dist_t, touch, ct, max(cgrid.cell_size),
        {"sun": vt, "dist": dist_t, "slope": slope_t if slope_t is not None else const(0.0), "sec": secant_t,
         "asin": a_sin, "acos": a_cos},
        {"sun": r_sun, "dist": r_dist, "slope": r_slope, "sec": r_sec, "asin": r_asin, "acos": r_acos})
    r_sun, r_dist, r_slope, r_sec = rv["sun"], rv["dist"], rv["slope"], rv["sec"]
    r_aspect = np.degrees(np.arctan2(rv["asin"], rv["acos"])) % 360.0
    # Clipping a coverage leaves a tiling of the course; check it (areas), re-tile only if not.
    for z, g in zip(merged, ensure_tiling([z["geom"] for z in merged], inp.course), strict=True):
        z["geom"] = g

    cols_out: dict[str, list] = {k: [] for k in _ZONE_COLS}
    geoms = []
    # NaN (a region without cells) counts as 0 (sec: 1); converted once for all zones.
    r_sun, r_slope, r_dist = np.nan_to_num(r_sun), np.nan_to_num(r_slope), np.nan_to_num(r_dist)
    r_sec, has_aspect = np.nan_to_num(r_sec, nan=1.0), np.isfinite(r_aspect)
    r_sin, r_cos = np.sin(np.radians(np.nan_to_num(r_aspect))), np.cos(np.radians(np.nan_to_num(r_aspect)))
    for z in merged:
        regs = np.array(z["regions"])
        w = np.array(z["weights"])
        wsum = w.sum()
        code0 = z["code"] - 1
        sl = code0 % n_slope
        ex = (code0 // n_slope) % n_exp
        sc = code0 // (n_slope * n_exp)
        aspect_mean = float(np.degrees(np.arctan2(np.sum(w * r_sin[regs]), np.sum(w * r_cos[regs]))) % 360) \
            if has_aspect[regs].any() else float("nan")
        _row(cols_out, c, inp.encoding, ex, sl, sc, sun=float(np.sum(w * r_sun[regs]) / wsum),
             slope=float(np.sum(w * r_slope[regs]) / wsum), aspect=aspect_mean,
             dist=float(np.sum(w * r_dist[regs]) / wsum), area=float(z["geom"].area),
             sec_mean=float(np.sum(w * r_sec[regs]) / wsum))
        geoms.append(z["geom"])
    return _result(c, cols_out, geoms)


def _row(cols_out: dict, c, encoding: str, ex: int, sl: int, sc: int, *, sun: float, slope: float,
         aspect: float, dist: float, area: float, sec_mean: float) -> None:
    """Append one zone's zoning columns: class indices, means over its cells, its map area."""
    section = c.sec_names[min(sc, len(c.sec_names) - 1)] if c.sec_names is not None else \
        f"{sc * c.L:g}–{(sc + 1) * c.L:g} m"
    for name, value in (
            ("exposure_class", c.labels[ex]), ("exposure_rank", int(ex)), ("slope_class", c.slope_labels[sl]),
            ("section", section), ("section_index", int(sc)),
            ("sun_fraction", sun if encoding == "fraction" else
             sun / 100.0 if encoding == "percent" else float("nan")),
            ("raster_irradiation_wh_m2", sun if encoding == "wh_m2" else float("nan")),
            ("slope_deg", slope), ("aspect_deg", aspect), ("distance_from_start_m", dist),
            ("map_area_m2", area), ("area_m2", area * sec_mean)):
        cols_out[name].append(value)


def _result(c, cols_out: dict, geoms: list, ids=None, given_labels=None) -> ZoningResult:
    """Step 7: course order, ids and labels (the given ones kept), the exposure grid, the result."""
    # Course order: mean distance from the start, then exposure rank (stable).
    order = np.lexsort((np.asarray(cols_out["exposure_rank"], dtype=np.int64),
                        np.asarray(cols_out["distance_from_start_m"], dtype=np.float64))).tolist()
    n = len(order)
    table: dict[str, list] = {"zone_id": list(range(1, n + 1)) if ids is None else
                              [int(ids[i]) for i in order], "course_order": list(range(1, n + 1))}
    table.update({k: [vals[i] for i in order] for k, vals in cols_out.items()})
    made = zone_labels(table["section_index"])
    kept = [None] * n if given_labels is None else [given_labels[i] for i in order]
    table["label"] = [k if k else m for k, m in zip(kept, made, strict=True)]
    exp_grid = np.full(c.touch.shape, -1.0, dtype=np.float32)
    exp_grid[c.touch] = c.exp_t
    exposure_grid = Grid(values=exp_grid, transform=c.ct, crs=c.grid.crs, source="exposure class index")
    check_stage("zoning", (), table)
    return ZoningResult(table=table, geometries=tuple(geoms[i] for i in order), crs=c.grid.crs,
                        start_xy=c.start_xy, finish_xy=c.finish_xy, exposure_breaks=tuple(c.breaks),
                        uncovered_share=c.uncovered, notes=tuple(c.notes), exposure_grid=exposure_grid)
