"""Edits stage: the chief of course's overrides (``edit_skip``, ``edit_dose_g_m2``, ``edit_agent``).

Fresh zones get the columns empty (``edit_skip`` false); zones kept from an edited GeoPackage
(:class:`courseplan.geo.edits.EditedZones`) get their overrides, which the dosing stage reads:
a skipped zone gets no salt, a fixed dose is the dose of every pass, a zone with its own agent is
dosed with it (:mod:`courseplan.stages.dosing.mixed`).  The no-salt areas are cut out of the course before
zoning (:func:`cut_no_salt`).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from courseplan.errors import SettingsError


def add_edits(zones: pd.DataFrame, edited=None, catalogue=None) -> pd.DataFrame:
    """Add the ``edits`` columns to the zones: empty, or the overrides of *edited* by ``zone_id``."""
    n = len(zones)
    skip = np.zeros(n, dtype=bool)  # a real boolean: false = no override
    dose = np.full(n, np.nan)
    agent: list = [None] * n
    if edited is not None:
        for k, zid in enumerate(zones["zone_id"].tolist()):
            o = edited.override(zid)
            skip[k], agent[k] = bool(o["edit_skip"]), o["edit_agent"]
            dose[k] = np.nan if o["edit_dose_g_m2"] is None else o["edit_dose_g_m2"]
        if any(agent):  # catalogue names, so a zone naming the plan's agent by an alias is the plan's
            from courseplan.agents import get_agent

            agent = [get_agent(a, catalogue).name if a else None for a in agent]
    return zones.assign(edit_skip=skip, edit_dose_g_m2=dose, edit_agent=agent)


def kept_note(edited, zones: pd.DataFrame) -> str:
    """Say what the plan kept, e.g. ``kept 24 edited zones from …: 2 left out (zones 5, 9)``."""
    def ids(mask) -> str:
        return ", ".join(str(int(i)) for i in zones["zone_id"].to_numpy()[mask])

    skip = zones["edit_skip"].to_numpy(dtype=bool)
    fixed = np.isfinite(zones["edit_dose_g_m2"].to_numpy(dtype=float))
    agent = zones["edit_agent"].notna().to_numpy() & (zones["edit_agent"].astype(str) != "").to_numpy()
    parts = [f"{int(m.sum())} {what} (zone{'s' if m.sum() > 1 else ''} {ids(m)})"
             for m, what in ((skip, "left out"), (fixed, "fixed dose")) if m.any()]
    if agent.any():  # each zone with its own agent, by name
        own = [f"{int(i)} {a}" for i, a in zip(zones["zone_id"].to_numpy()[agent], zones["edit_agent"][agent],
                                                  strict=True)]
        parts.append(f"{int(agent.sum())} own agent (zone{'s' if agent.sum() > 1 else ''} {', '.join(own)})")
    return (f"kept {len(zones)} edited zones from {edited.source}" + (": " + ", ".join(parts) if parts else
            ", no overrides") + "; sun, snow, doses, crews and order computed anew")


def cut_no_salt(course, areas, crs):
    """The course less its no-salt areas (zoned and dosed), the areas on the course, and a note."""
    import geopandas as gpd
    import shapely

    if not areas:
        return course, None, []
    cut = [(name, shapely.intersection(geom, course)) for name, geom in areas]
    cut = [(n, g) for n, g in cut if not g.is_empty and g.area > 0]
    if not cut:
        return course, None, ["the no-salt areas do not touch the course"]
    rest = shapely.difference(course, shapely.union_all([g for _, g in cut]))
    if rest.is_empty or rest.area < 1.0:
        raise SettingsError("the no-salt areas cover the whole course", where="[inputs] no_salt",
                            fix="check the files and buffers")
    table = gpd.GeoDataFrame({"name": [n for n, _ in cut], "area_m2": [float(g.area) for _, g in cut]},
                             geometry=[g for _, g in cut], crs=crs)
    total = float(shapely.union_all(table.geometry.to_numpy()).area)
    note = (f"no salt on {total:,.0f} m² ({total / course.area:.1%} of the course): "
            + ", ".join(f"{n} {a:,.0f} m²" for n, a in zip(table["name"], table["area_m2"], strict=True)))
    return rest, table, [note]
