"""Read a ``zones`` layer the chief of course edited in a desktop GIS (``courseplan plan --zones``).

The layer ``zones`` of a GeoPackage (else the file's only polygon layer), reprojected to the working
CRS, with ``zone_id`` and ``label`` kept when present and the override columns ``edit_skip``,
``edit_dose_g_m2`` and ``edit_agent`` checked.  Whether the zones tile the course is checked later,
against the course less its no-salt areas (:func:`courseplan.geo.edits.fit_to_course`).
"""

from __future__ import annotations

import math
from pathlib import Path

from courseplan.errors import CRSError, InputError
from courseplan.geo.edits import EditedZones

TRUE = {"1", "true", "yes", "y", "t", "x", "skip"}
FALSE = {"0", "false", "no", "n", "f", ""}


def _empty(v) -> bool:
    return v is None or (isinstance(v, float) and math.isnan(v)) or (isinstance(v, str) and not v.strip()) \
        or str(v) in ("<NA>", "NaT", "None", "nan")


def _layer(p: Path) -> str | None:
    import pyogrio

    try:
        layers = [(str(n), str(t or "")) for n, t in pyogrio.list_layers(p)]
    except Exception:  # pyogrio raises several types for unreadable data
        raise InputError("cannot read the edited zones as a vector file", where=str(p),
                         fix="give the GeoPackage the plan wrote (zones.gpkg), edited and saved") from None
    names = [n for n, _ in layers]
    if "zones" in names:
        return "zones"
    polys = [n for n, t in layers if "polygon" in t.lower()]
    if len(polys) == 1:
        return polys[0]
    if not polys:
        raise InputError(f"the edited zones file holds no polygon layer (layers: "
                         f"{', '.join(names) or 'none'})", where=str(p),
                         fix="give the file with the zones layer")
    raise InputError(f"the edited zones file has no layer 'zones' but {len(polys)} polygon layers "
                     f"({', '.join(polys[:12])})", where=str(p), fix="rename the edited layer to zones")


def read_zones(path, crs, catalogue: dict | None = None) -> EditedZones:
    """Read the edited zones of *path* in *crs*, overrides checked (:class:`~.geo.edits.EditedZones`).

    Raises
    ------
    InputError
        Unreadable file, no polygons, an unknown agent, a negative dose, skip together with a dose.
    """
    import geopandas as gpd
    import shapely

    from courseplan.agents import catalogue as builtin_catalogue
    from courseplan.io.files import check_readable

    p = check_readable(Path(path), "edited zones")
    layer = _layer(p)
    where = f"{p} (layer {layer})"
    g = gpd.read_file(p, layer=layer, engine="pyogrio")
    if g.crs is None:
        raise CRSError("the edited zones have no CRS", where=where, fix="save the layer with a CRS")
    g = g[g.geometry.notna() & ~g.geometry.is_empty]
    g = g[g.geometry.geom_type.isin(["Polygon", "MultiPolygon"])]
    if not len(g):
        raise InputError("the edited zones layer holds no polygons", where=where, fix="give the zones layer")
    g = g.to_crs(crs).reset_index(drop=True)
    notes: list[str] = []
    ids = _ids(g, where, notes)
    raw_labels = g["label"] if "label" in g.columns else [None] * len(g)
    labels = [("" if _empty(v) else str(v).strip()) for v in raw_labels]
    known = catalogue if catalogue is not None else builtin_catalogue()
    skip, dose, agent = [], [], []
    for k, zid in enumerate(ids):
        s = _flag(g["edit_skip"].iloc[k] if "edit_skip" in g.columns else None, zid, where)
        d = g["edit_dose_g_m2"].iloc[k] if "edit_dose_g_m2" in g.columns else None
        try:
            d = float("nan") if _empty(d) else float(d)
        except (TypeError, ValueError):
            raise InputError(f"zone {zid}: edit_dose_g_m2 {d!r} is not a number", where=where,
                             fix="give a dose per pass in g/m², or leave it empty") from None
        if not math.isnan(d) and (d < 0 or not math.isfinite(d)):
            raise InputError(f"zone {zid}: edit_dose_g_m2 is {d:g}, a dose cannot be negative", where=where,
                             fix="give a dose of 0 or more, or set edit_skip for no salt")
        if s and not math.isnan(d):
            raise InputError(f"zone {zid}: edit_skip and edit_dose_g_m2 are both set", where=where,
                             fix="keep one: edit_skip for no salt, or the dose without edit_skip")
        a = g["edit_agent"].iloc[k] if "edit_agent" in g.columns else None
        a = "" if _empty(a) else str(a).strip()
        if a and a not in known:
            raise InputError(f"zone {zid}: edit_agent {a!r} is not in the catalogue (known: "
                             f"{', '.join(sorted(known))})", where=where, fix="use one of the agents listed")
        if s and a:
            raise InputError(f"zone {zid}: edit_skip and edit_agent are both set", where=where,
                             fix="keep one: edit_skip for no salt, or the agent without edit_skip")
        skip.append(s)
        dose.append(d)
        agent.append(a)
    geoms = [shapely.make_valid(x) for x in g.geometry]
    return EditedZones(geometries=tuple(geoms), zone_id=tuple(ids), label=tuple(labels), skip=tuple(skip),
                       dose_g_m2=tuple(dose), agent=tuple(agent), source=str(p), notes=tuple(notes))


def _flag(v, zid: int, where: str) -> bool:
    if _empty(v):
        return False
    if isinstance(v, bool) or type(v).__name__ == "bool_":
        return bool(v)
    if isinstance(v, int | float):
        if v in (0, 1):
            return bool(v)
    elif str(v).strip().lower() in TRUE | FALSE:
        return str(v).strip().lower() in TRUE
    raise InputError(f"zone {zid}: edit_skip {v!r} is not true or false", where=where,
                     fix="set it to true (no salt on the zone), false or leave it empty")


def _ids(g, where: str, notes: list[str]) -> list[int]:
    """Return the zone ids, or 1 … n in file order (with a note) when missing, repeated or not positive."""
    n = len(g)
    if "zone_id" in g.columns:
        raw = list(g["zone_id"])
        try:
            ids = [int(v) for v in raw]
            ok = all(float(v) == i for v, i in zip(raw, ids, strict=True)) and min(ids) >= 1 \
                and len(set(ids)) == n
        except (TypeError, ValueError, OverflowError):
            ok = False
        if ok:
            return ids
        notes.append(f"{where}: zone_id is missing in some zones, repeated or not a positive whole number "
                     f"(a split copies it): the {n} zones are numbered 1 … {n} in file order")
    else:
        notes.append(f"{where}: no zone_id column: the {n} zones are numbered 1 … {n} in file order")
    return list(range(1, n + 1))
