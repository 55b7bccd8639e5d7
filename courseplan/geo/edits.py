"""Zones edited in a desktop GIS: the record, the coverage check against the course, their cells.

A chief of course merges, splits or reshapes the ``zones`` layer a plan wrote and sets overrides;
the next plan keeps those zones.  They must tile the course (less its no-salt areas): no overlaps,
no gaps, nothing outside.  Digitising leaves slivers; pieces below :data:`SLIVER_M2` each and
:data:`SLIVER_SHARE` of the course together are mended (clipped to the course, overlaps cut from one
zone, gaps given to the neighbour sharing the longest edge: :func:`courseplan.geo.coverage.tile_course`)
and reported in a note; anything larger is an :class:`~courseplan.errors.InputError` naming the zones.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import shapely
from shapely.geometry.base import BaseGeometry

from courseplan.errors import InputError

SLIVER_M2 = 1.0
"""Largest piece of overlap, gap or outside area mended without asking [m²] (digitising noise) [D]."""

SLIVER_SHARE = 1e-4
"""Largest share of the course all mended pieces together may make up [-] [D]."""

ROUNDING_M2 = 1e-3
"""Pieces below this [m²] are rounding (a union or reprojection leaves them): mended without a note [D]."""


@dataclass(frozen=True)
class EditedZones:
    """Zones read from an edited GeoPackage, in the working CRS, with the chief's overrides.

    Attributes
    ----------
    geometries
        Zone polygons [m].
    zone_id
        Unique positive zone ids (kept in the plan).
    label
        Zone labels, "" where none was given (the plan makes one).
    skip
        No salt on the zone.
    dose_g_m2
        Fixed dose per pass [g/m²], NaN = the model's.
    agent
        Agent name for the zone, "" = the plan's.
    source
        Where the zones came from (file and layer).
    notes
        What reading them changed (renumbered ids and the like).
    """

    geometries: tuple
    zone_id: tuple
    label: tuple
    skip: tuple
    dose_g_m2: tuple
    agent: tuple
    source: str = ""
    notes: tuple = field(default=())

    def override(self, zone_id: int) -> dict:
        """Return one zone's overrides: ``edit_skip``, ``edit_dose_g_m2``, ``edit_agent`` (None = none)."""
        k = self.zone_id.index(int(zone_id))
        dose = float(self.dose_g_m2[k])
        return {"edit_skip": True if self.skip[k] else None,
                "edit_dose_g_m2": dose if np.isfinite(dose) else None,
                "edit_agent": self.agent[k] or None}


def _ids(ids) -> str:
    ids = sorted(int(i) for i in ids)
    return ", ".join(map(str, ids[:-1])) + f" and {ids[-1]}" if len(ids) > 1 else str(ids[0])


def fit_to_course(geoms: list[BaseGeometry], ids: list[int], course: BaseGeometry,
                  where: str = "zones") -> tuple[list[BaseGeometry], list[str]]:
    """Fit the edited zones to a tiling of *course*, or raise an error naming the zones that do not fit.

    Parameters
    ----------
    geoms
        Edited zone polygons [m], working CRS.
    ids
        Their zone ids (for messages).
    course
        The course less its no-salt areas [m].
    where
        Names the file in messages.

    Returns
    -------
    tuple
        (zones tiling the course — same order, clipped, overlaps and gaps mended — , notes).

    Raises
    ------
    InputError
        On any overlap, gap or outside part above :data:`SLIVER_M2`, or mended pieces above
        :data:`SLIVER_SHARE` of the course together.
    """
    from courseplan.geo.coverage import tile_course

    g = np.array([shapely.make_valid(x) for x in geoms], dtype=object)
    problems: list[str] = []
    mended = 0.0
    n_mended = 0
    outside = shapely.area(shapely.difference(g, course))
    for i, a in zip(ids, outside, strict=True):
        if a > SLIVER_M2:
            problems.append(f"zone {i} lies {a:,.0f} m² outside the course")
        elif a > ROUNDING_M2:
            mended, n_mended = mended + float(a), n_mended + 1
    inside = shapely.intersection(g, course)
    tree = shapely.STRtree(inside)
    left, right = tree.query(inside, predicate="intersects")
    for a, b in zip(left.tolist(), right.tolist(), strict=True):
        if a >= b:
            continue
        ov = float(shapely.intersection(inside[a], inside[b]).area)
        if ov > SLIVER_M2:
            problems.append(f"zones {_ids([ids[a], ids[b]])} overlap by {ov:,.0f} m²")
        elif ov > ROUNDING_M2:
            mended, n_mended = mended + ov, n_mended + 1
    covered = shapely.union_all(inside)
    gaps = shapely.get_parts(shapely.difference(course, covered))
    for gap in gaps:
        if gap.area <= ROUNDING_M2:
            continue
        if gap.area > SLIVER_M2:
            near = [ids[k] for k in tree.query(gap, predicate="dwithin", distance=0.01).tolist()]
            side = f"next to zone{'s' if len(near) > 1 else ''} {_ids(near)}" if near else "touching no zone"
            problems.append(f"a gap of {gap.area:,.0f} m² {side}")
        else:
            mended, n_mended = mended + float(gap.area), n_mended + 1
    if not problems and mended > SLIVER_SHARE * course.area:
        problems.append(f"{n_mended} slivers of overlap, gap or outside area add up to {mended:,.1f} m², "
                        f"more than {SLIVER_SHARE:g} of the course")
    if problems:
        shown = problems[:6] + ([f"{len(problems) - 6} more"] if len(problems) > 6 else [])
        raise InputError("the edited zones do not tile the course: " + "; ".join(shown), where=where,
                         fix="snap the zones to each other and to the course outline (no-salt areas left "
                             "out) in the GIS, e.g. with topological editing on, and save again")
    fixed = tile_course(list(g), course)
    notes = [f"{where}: mended {n_mended} sliver(s) of digitising noise ({mended:,.1f} m² in all): "
             "clipped to the course or given to the neighbour sharing the longest edge"] if n_mended else []
    return fixed, notes


def cells_of_zones(geoms: list[BaseGeometry], touch: np.ndarray, transform) -> tuple[np.ndarray, np.ndarray]:
    """Which of the course's cells each zone holds: (zone index, cell index into ``touch``'s cells).

    A cell belongs to the zone holding its centre (``rasterio.features.rasterize``, ``all_touched=False``);
    a zone holding no centre gets the course cell nearest its representative point.

    Parameters
    ----------
    geoms
        Zone polygons in the grid's CRS.
    touch
        Boolean window of the course's cells; their order is ``numpy.nonzero(touch)``.
    transform
        Affine transform of the window.
    """
    from rasterio.features import rasterize

    zr = rasterize(((gg, k + 1) for k, gg in enumerate(geoms)), out_shape=touch.shape, transform=transform,
                   fill=0, all_touched=False, dtype="int32")
    z_t = zr[touch]
    hit = np.flatnonzero(z_t > 0)
    zi, ci = [z_t[hit] - 1], [hit]
    rows, cols = np.nonzero(touch)
    missing = np.setdiff1d(np.arange(len(geoms)), np.unique(z_t[hit] - 1))
    inv = ~transform
    for k in missing.tolist():
        p = geoms[k].representative_point()
        c, r = inv @ (p.x, p.y)
        near = int(np.argmin((rows + 0.5 - r) ** 2 + (cols + 0.5 - c) ** 2))
        zi.append(np.array([k]))
        ci.append(np.array([near]))
    return np.concatenate(zi).astype(np.int64), np.concatenate(ci).astype(np.int64)
