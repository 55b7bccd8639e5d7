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
import shapely
from shapely.geometry.base import BaseGeometry

from courseplan.columns import check_stage
from courseplan.errors import InputError, OverlapError
from courseplan.geo.chainage import cell_xy, distance_of_cells
from courseplan.geo.coverage import ensure_tiling, smooth_coverage, split_large_zones, thin_test
from courseplan.geo.geometry import geometry_from_geojson
from courseplan.geo.raster import burn, fill_nearest
from courseplan.geo.regions import (
    clip_to,
    code_key,
    label_regions,
    merge_alike,
    merge_small_pieces,
    merge_small_regions,
    polygon_parts,
)
from courseplan.grid import Grid
from courseplan.settings import Zoning

SPECKLE_REGIONS = 2000
"""Above this many connected regions in the class raster, speckle below an eighth of the minimum zone
area is sieved out (``rasterio.features.sieve``) before the merge by similarity (a Python loop)."""

ENCODING_RANGE = {"fraction": (0.0, 1.0), "percent": (0.0, 100.0), "wh_m2": (0.0, 20000.0)}
"""Accepted value range of each sun-raster encoding; values outside it are an input error."""


def default_breaks(encoding: str, window_hours: float) -> list[float]:
    """Default exposure-class breaks in the raster's units (see ``Zoning.exposure_breaks``)."""
    if encoding == "fraction":
        return [0.35, 0.70]
    if encoding == "percent":
        return [35.0, 70.0]
    return [150.0 * window_hours, 350.0 * window_hours]


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

    def summary(z: dict) -> tuple:
        regs, w = np.asarray(z["regions"]), np.asarray(z["weights"])
        sun = float(np.sum(w * np.nan_to_num(r_sun[regs])) / w.sum())
        slope = float(np.sum(w * np.nan_to_num(r_slope[regs])) / w.sum()) if r_slope is not None else 0.0
        return code_key(z["code"], n_exp, n_slope)[2], sun, slope, code_key(z["code"], n_exp, n_slope)[1]

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


def _zone_course(inp: ZoningInputs, settings: Zoning, *, window_hours: float,
                 max_uncovered_pct: float) -> ZoningResult:
    from affine import Affine
    from rasterio.features import shapes, sieve

    grid = inp.sun
    notes: list[str] = []
    touch_w = burn(inp.course, grid, all_touched=True)
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
        inside = burn(inp.course, cgrid, all_touched=False)
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
        vt = fill_nearest(np.where(ok, v, 0.0), ok)[touch].astype(np.float64)

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
            at = fill_nearest(np.where(ok, a, 0.0), ok)[touch].astype(np.float64) if ok.any() else \
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
        px, py = cell_xy(cgrid, rows, cols)
        mk = sorted((float(dist_t[int(np.argmin((px - x) ** 2 + (py - y) ** 2))]), name)
                    for name, x, y in inp.markers)
        mdist = np.array([m[0] for m in mk])
        sec_t = np.searchsorted(mdist, dist_t, side="right")
        names = ["start"] + [m[1] for m in mk] + ["finish"]
        sec_names = [f"{a} – {b}" for a, b in zip(names[:-1], names[1:], strict=True)]
    else:
        sec_t = np.floor(dist_t / L).astype(np.int64)
        sec_names = None

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
    a_sin = np.sin(np.radians(aspect_t)) if aspect_t is not None else np.full(vt.size, np.nan)
    a_cos = np.cos(np.radians(aspect_t)) if aspect_t is not None else np.full(vt.size, np.nan)
    r_asin, r_acos = mean(a_sin), mean(a_cos)

    # One polygon per region (each region is 4-connected).  The region polygons are a coverage
    # (edge-matched, from one raster): smooth their shared edges as one, then clip to the exact course.
    polys: dict[int, BaseGeometry] = {}
    for gj, val in shapes(region, mask=region > 0, connectivity=4, transform=ct):
        r = int(val)
        g = geometry_from_geojson(gj)
        polys[r] = shapely.union(polys[r], g) if r in polys else g
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
    merged = _merge_alike(merged, settings, breaks, n_exp, n_slope, r_sun,
                          r_slope if slope_t is not None else None, sbreaks if slope_t is not None else None)
    # Zones too big for one crew in one window: cut across the course (the parts get their own means).
    cap = max(settings.max_zone_area_m2, 2.0 * settings.min_zone_area_m2) if settings.max_zone_area_m2 > 0 else 0
    sec_t = 1.0 / np.cos(np.radians(np.clip(slope_t, 0, 85))) if slope_t is not None else np.ones(vt.size)
    merged, rv = split_large_zones(
        merged, cap, region_t, dist_t, touch, ct, max(cgrid.cell_size),
        {"sun": vt, "dist": dist_t, "slope": slope_t if slope_t is not None else np.zeros(vt.size), "sec": sec_t,
         "asin": a_sin, "acos": a_cos},
        {"sun": r_sun, "dist": r_dist, "slope": r_slope, "sec": r_sec, "asin": r_asin, "acos": r_acos})
    r_sun, r_dist, r_slope, r_sec = rv["sun"], rv["dist"], rv["slope"], rv["sec"]
    r_aspect = np.degrees(np.arctan2(rv["asin"], rv["acos"])) % 360.0
    # Clipping a coverage leaves a tiling of the course; check it (areas), re-tile only if not.
    for z, g in zip(merged, ensure_tiling([z["geom"] for z in merged], inp.course), strict=True):
        z["geom"] = g

    cols_out: dict[str, list] = {c: [] for c in (
        "exposure_class", "exposure_rank", "slope_class", "section", "section_index", "sun_fraction",
        "raster_irradiation_wh_m2", "slope_deg", "aspect_deg", "distance_from_start_m", "map_area_m2", "area_m2")}
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
                ("raster_irradiation_wh_m2", sun_mean if inp.encoding == "wh_m2" else float("nan")),
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
    table["label"] = zone_labels(table["section_index"])
    exp_grid = np.full(touch.shape, -1.0, dtype=np.float32)
    exp_grid[touch] = exp_t
    exposure_grid = Grid(values=exp_grid, transform=ct, crs=grid.crs, source="exposure class index")
    check_stage("zoning", (), table)
    return ZoningResult(table=table, geometries=tuple(geoms[i] for i in order), crs=grid.crs,
                        start_xy=start_xy, finish_xy=finish_xy, exposure_breaks=tuple(breaks),
                        uncovered_share=uncovered, notes=tuple(notes), exposure_grid=exposure_grid)


