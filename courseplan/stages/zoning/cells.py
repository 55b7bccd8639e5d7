"""Step 1 of the zoning stage: the course's cells of the sun raster window and what each holds.

Course first: the outline is burnt into the window (all touched), the window cropped to the bounding
box of those cells, and every value (sun, slope, aspect, distance from the start, exposure, slope
and section class) kept as a flat array over the course's cells, checked against the encoding's
range and filled from the nearest cells where the raster has no data.
"""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np

from courseplan.errors import InputError, OverlapError
from courseplan.geo.chainage import cell_xy, distance_of_cells
from courseplan.geo.raster import burn, fill_nearest
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


def course_cells(inp, settings: Zoning, *, window_hours: float,
           max_uncovered_pct: float) -> SimpleNamespace:
    """Step 1 of :mod:`courseplan.stages.zoning`: the course's cells of the raster window and what each holds (flat arrays over ``touch``)."""
    from affine import Affine

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
    # Row-major like numpy.nonzero, as int32 (divided and multiplied several times faster than int64).
    flat = np.flatnonzero(touch)
    flat = flat.astype(np.int32) if touch.size < 2**31 else flat
    rows = flat // touch.shape[1]
    cols = flat - rows * touch.shape[1]
    del flat
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
    vv = vt if valid_t.all() else vt[valid_t]
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

    return SimpleNamespace(grid=grid, cgrid=cgrid, ct=ct, touch=touch, rows=rows, cols=cols, vt=vt,
                           exp_t=exp_t, breaks=breaks, labels=labels, n_exp=n_exp, slope_t=slope_t,
                           slope_idx_t=slope_idx_t, n_slope=n_slope, slope_labels=slope_labels, aspect_t=aspect_t,
                           dist_t=dist_t, sec_t=sec_t, sec_names=sec_names, L=L, start_xy=start_xy,
                           finish_xy=finish_xy, uncovered=uncovered, notes=notes)
