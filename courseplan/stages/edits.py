"""Edits stage: the chief of course's overrides (``edit_skip``, ``edit_dose_g_m2``, ``edit_agent``).

Fresh zones get the columns empty (``edit_skip`` false); zones kept from an edited GeoPackage
(:class:`courseplan.geo.edits.EditedZones`) get their overrides, which the dosing stage reads:
a skipped zone gets no salt, a fixed dose is the dose of every pass.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from courseplan.errors import InputError


def add_edits(zones: pd.DataFrame, edited=None, plan_agent: str = "") -> pd.DataFrame:
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
        other = sorted({a for a in agent if a and a != plan_agent})
        if other:
            ids = [int(z) for z, a in zip(zones["zone_id"], agent, strict=True) if a and a != plan_agent]
            raise InputError(f"edit_agent is not supported yet: zone(s) {', '.join(map(str, ids))} name "
                             f"{', '.join(other)}, the plan doses with {plan_agent}", where=edited.source,
                             fix="clear edit_agent in those zones, or plan them with --agent in a plan of "
                                 "their own")
    return zones.assign(edit_skip=skip, edit_dose_g_m2=dose, edit_agent=agent)


def kept_note(edited, zones: pd.DataFrame) -> str:
    """Say what the plan kept, e.g. ``kept 24 edited zones from …: 2 left out (zones 5, 9)``."""
    def ids(mask) -> str:
        return ", ".join(str(int(i)) for i in zones["zone_id"].to_numpy()[mask])

    skip = zones["edit_skip"].to_numpy(dtype=bool)
    fixed = np.isfinite(zones["edit_dose_g_m2"].to_numpy(dtype=float))
    agent = zones["edit_agent"].notna().to_numpy() & (zones["edit_agent"].astype(str) != "").to_numpy()
    parts = [f"{int(m.sum())} {what} (zone{'s' if m.sum() > 1 else ''} {ids(m)})"
             for m, what in ((skip, "left out"), (fixed, "fixed dose"), (agent, "own agent")) if m.any()]
    return (f"kept {len(zones)} edited zones from {edited.source}" + (": " + ", ".join(parts) if parts else
            ", no overrides") + "; sun, snow, doses, crews and order computed anew")
