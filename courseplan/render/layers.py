"""Data layers of the offline map: zones, course, crews and observations as GeoJSON for the page.

The functions here turn the plan's tables into the JSON data block that the page's script draws
(:data:`courseplan.render.assets.PAGE_JS`): geometry simplified for display
(:func:`simplify_for_display`) and reprojected to longitude/latitude, and popup content as text: a
lead in the words a crew uses (:func:`zone_lead`), then every value with its unit
(:func:`zone_popup_sections`, :func:`format_value`).  All user-supplied text stays plain data;
:func:`json_for_script` makes the JSON safe inside a ``<script>`` element.

Notes
-----
Data in: GeoDataFrames of zones, course, crews and observations (any CRS; a geographic one is
projected to UTM for simplification).  Out: GeoJSON dictionaries and, through
:func:`json_for_script`, a ``str``.  Colours are passed in by :mod:`courseplan.render.webmap`, which
owns the colour scales.  This module opens no files.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from courseplan import columns as _columns
from courseplan.errors import GeometryError
from courseplan.geo.crs import is_metric, utm_crs
from courseplan.physics.snow import wetness_of

if TYPE_CHECKING:  # pragma: no cover
    import geopandas

OBSERVATION_UNITS: dict[str, str] = {"lwc_pct": "% vol", "snow_temp_c": "°C", "density_kg_m3": "kg/m³",
                                     "hand_hardness": "1–6", "air_temp_c": "°C"}
"""Units of the observation columns shown in popups."""

_OBS_HIDDEN = {"lon", "lat", "x", "y", "geometry"}
_OBS_INT = {"hand_hardness"}


# --------------------------------------------------------------------------- values and text

def format_value(value: Any, unit: str = "", kind: str | None = None) -> str:
    """Text of one value with its unit for a popup ("—" when missing)."""
    if value is None:
        return "—"
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, (int, np.integer)) and not isinstance(value, bool):
        txt = str(int(value))
    elif isinstance(value, (float, np.floating)):
        v = float(value)
        if not math.isfinite(v):
            return "—"
        if kind == "int" and v == int(v):
            txt = str(int(v))
        else:
            av = abs(v)
            nd = 0 if av >= 100 else 1 if av >= 10 else 2 if av >= 0.01 or av == 0 else 4
            txt = f"{v:.{nd}f}"
            if nd >= 2:  # 3.40 → 3.4, 0.00 → 0.0
                txt = txt.rstrip("0")
                txt = txt + "0" if txt.endswith(".") else txt
    else:
        txt = str(value)
        if txt == "" or txt.lower() == "nan":
            return "—"
    if not unit:
        return txt
    if unit in ("0–1", "1–6"):
        return f"{txt} ({unit})"
    return f"{txt} {unit}"


def scalar(v: Any) -> Any:
    """Plain JSON scalar (NaN → None)."""
    if v is None:
        return None
    if isinstance(v, (np.bool_, bool)):
        return bool(v)
    if isinstance(v, (np.integer,)):
        return int(v)
    if isinstance(v, (float, np.floating)):
        f = float(v)
        return f if math.isfinite(f) else None
    if hasattr(v, "isoformat"):
        return v.isoformat()
    try:
        import pandas as pd

        if pd.isna(v):
            return None
    except (TypeError, ValueError):
        pass
    return v


_STAGE_TITLES = {"zoning": "Zone", "conditions": "Snow state", "dosing": "Dose", "logistics": "Logistics"}


def zone_popup_sections(row: dict[str, Any], units: dict[str, str] | None = None
                        ) -> list[tuple[str, list[tuple[str, str]]]]:
    """Popup content of one zone: sections of (column, value with unit), every column shown.

    Declared columns (:mod:`courseplan.columns`) come in declared order grouped by the stage that
    adds them; other columns follow under "Other".  ``units`` overrides or adds units by column.
    """
    units = units or {}
    sections: dict[str, list[tuple[str, str]]] = {}
    done = set()
    for col in _columns.ALL:
        if col.name in row:
            sec = _STAGE_TITLES.get(col.stage, col.stage)
            u = units.get(col.name, _columns.unit(col.name))
            sections.setdefault(sec, []).append((col.name, format_value(row[col.name], u, col.kind)))
            done.add(col.name)
    for name in row:
        if name in done or name == "geometry":
            continue
        sections.setdefault("Other", []).append((name, format_value(row[name], units.get(name, ""))))
    return [(k, v) for k, v in sections.items()]


def _hhmm_list(text: Any) -> list[str]:
    if text is None:
        return []
    return [t.strip() for t in str(text).split(";") if t.strip()]


def _and(items: list[str]) -> str:
    return items[0] if len(items) == 1 else ", ".join(items[:-1]) + " and " + items[-1]


def _grams(v: Any) -> str | None:
    v = scalar(v)
    return f"{float(v):.0f} g/m²" if isinstance(v, (int, float)) and math.isfinite(float(v)) else None


def fixed_dose_text(value: Any) -> str | None:
    """Return the line shown where a dose is when the chief of course fixed it (``edit_dose_g_m2``)."""
    v = scalar(value)
    if isinstance(v, (int, float)) and math.isfinite(float(v)):
        return f"{float(v):g} g/m² every pass, fixed by the chief of course"
    return None


def zone_lead(row: dict[str, Any]) -> dict[str, Any]:
    """What a crew reads first in a zone's popup: a title and a few lines in the crew's words.

    Title: zone number and section label.  Lines (label, text), each only when its column is there:
    what to do (the advice), the passes and when to spread them, the largest dose of one pass, when
    the zone stops holding (``hard_until``), the day's total dose and the bags.
    """
    r = {k: scalar(v) for k, v in row.items()}
    zid = r.get("zone_id")
    title = f"Zone {zid}" if zid is not None else "Zone"
    if r.get("label") and zid is not None:
        title = f"Zone {r['label']} ({zid})"
    if r.get("section"):
        title += f" · {r['section']}"
    lines: list[tuple[str, str]] = []
    passes = r.get("passes")
    treated = (isinstance(r.get("dose_g_m2"), (int, float)) and float(r["dose_g_m2"]) > 0) or bool(passes)
    if r.get("advice"):
        lines.append(("What to do", str(r["advice"])))
    if treated and isinstance(r.get("edit_agent"), str) and r["edit_agent"]:
        lines.append(("Agent", f"{r['edit_agent']}, chosen by the chief of course: its own bags"))
    if treated:
        times = _hhmm_list(r.get("pass_times"))
        if isinstance(passes, int) and passes > 0:
            when = f" — spread at {_and(times)}" if times else ""
            lines.append(("Passes", f"{passes}{when}"))
        per_pass = _grams(r.get("max_pass_g_m2"))
        if fixed_dose_text(r.get("edit_dose_g_m2")):
            lines.append(("Per pass", fixed_dose_text(r.get("edit_dose_g_m2"))))
        elif per_pass:
            lines.append(("Per pass", f"up to {per_pass}"))
        hu = r.get("hard_until")
        if hu not in (None, ""):
            lines.append(("Hard until", "the end of the day (past the last run)" if str(hu) == "end of day"
                          else str(hu)))
        total, p90 = _grams(r.get("dose_g_m2")), _grams(r.get("dose_p90_g_m2"))
        if total:
            lines.append(("Day total", total + (f" (P90 {p90})" if p90 else "")))
        bags = r.get("bags")
        if isinstance(bags, int):
            crew = f" of crew {r['crew']}" if r.get("crew") else ""
            lines.append(("Bags", f"{bags} at the depot{crew}"))
    else:
        lines.append(("Salt", "none in this zone"))
    return {"title": title, "verdict": str(r.get("verdict") or "—"), "treated": bool(treated),
            "lines": lines}


def json_for_script(obj: Any) -> str:
    """JSON safe inside an HTML ``<script>`` element (no ``<``, ``>``, ``&`` or line separators)."""
    s = json.dumps(obj, ensure_ascii=False, separators=(",", ":"), allow_nan=False)
    return (s.replace("<", "\\u003c").replace(">", "\\u003e").replace("&", "\\u0026")
            .replace("\u2028", "\\u2028").replace("\u2029", "\\u2029"))


# --------------------------------------------------------------------------- geometry

def _round_coords(c: Any, nd: int = 6) -> Any:
    if isinstance(c, (float, int)):
        return round(float(c), nd)
    return [_round_coords(x, nd) for x in c]


def _geom_json(geom: Any) -> dict[str, Any] | None:
    from shapely.geometry import mapping

    if geom is None or geom.is_empty:
        return None
    m = mapping(geom)
    return {"type": m["type"], "coordinates": _round_coords(m["coordinates"])}


def _metric(gdf: geopandas.GeoDataFrame, what: str) -> geopandas.GeoDataFrame:
    if gdf.crs is None:
        raise GeometryError(f"the {what} layer has no CRS", where="map",
                            fix="set the layer's CRS before drawing the map")
    if is_metric(gdf.crs):
        return gdf
    c = gdf.to_crs(4326).union_all().centroid
    return gdf.to_crs(utm_crs(c.x, c.y))


def simplify_for_display(geoms: Any, tolerance_m: float) -> np.ndarray:
    """Simplify polygons for display, keeping shared edges shared where they form a coverage.

    Uses GEOS coverage simplification (Visvalingam–Whyatt on shared edges, ``shapely.coverage_simplify``)
    and falls back to Douglas–Peucker per geometry (``preserve_topology``) when the polygons do not
    form a valid coverage.  Geometries that vanish keep their original shape.
    """
    import shapely

    arr = np.asarray(geoms, dtype=object)
    if arr.size == 0 or tolerance_m <= 0:
        return arr
    try:
        ok = bool(shapely.coverage_is_valid(arr))
    except Exception:  # noqa: BLE001 - GEOS raises on mixed types; fall back below
        ok = False
    if ok:
        out = shapely.coverage_simplify(arr, tolerance_m)
    else:
        out = shapely.simplify(arr, tolerance_m, preserve_topology=True)
    bad = shapely.is_empty(out) | ~shapely.is_valid(out)
    out[bad] = arr[bad]
    return out


def _to_lonlat(geoms: np.ndarray, crs: Any) -> list[Any]:
    import geopandas as gpd

    return list(gpd.GeoSeries(geoms, crs=crs).to_crs(4326).values)


# --------------------------------------------------------------------------- layers

def zone_properties(rows: list[dict[str, Any]], dose_fills: list[str], verdict_fills: dict[str, str],
                    units: dict[str, str] | None = None) -> list[dict[str, Any]]:
    """Properties of the zone features: id, verdict, both fill colours, the popup's lead and its sections.

    Parameters
    ----------
    rows
        Zone records (``DataFrame.to_dict("records")`` without the geometry).
    dose_fills
        Fill colour of each zone on the dose scale, in the order of ``rows``.
    verdict_fills
        Fill colour by verdict (``"—"`` for a zone without one).
    units
        Units by column, overriding those declared in :mod:`courseplan.columns`.
    """
    zprops = []
    for i, r in enumerate(rows):
        zid = scalar(r.get("zone_id"))
        lead = zone_lead(r)
        label = scalar(r.get("label"))
        zprops.append({"id": zid if zid is not None else i + 1,
                       "label": str(label) if label not in (None, "") else str(zid if zid is not None else i + 1),
                       "verdict": str(scalar(r.get("verdict")) or "—"),
                       "title": lead["title"], "lead": lead["lines"], "treated": lead["treated"],
                       "c_dose": dose_fills[i],
                       "c_verdict": verdict_fills[str(scalar(r.get("verdict")) or "—")],
                       "sections": zone_popup_sections({k: scalar(v) for k, v in r.items()}, units)})
    return zprops


@dataclass(frozen=True, eq=False)
class DisplayGeometry:
    """Geometry of the page, simplified for display and in longitude/latitude.

    Attributes
    ----------
    zones
        GeoJSON FeatureCollection of the zones, with the given properties.
    course
        GeoJSON FeatureCollection of the course outline, or None when there is no course.
    crews
        Crew geometries (shapely, lon/lat) in the order of the crews table, for :func:`crew_layer`.
    tolerance_m
        Simplification tolerance used [m].
    bounds
        ``[[south, west], [north, east]]`` of zones and course [°].
    """

    zones: dict[str, Any]
    course: dict[str, Any] | None
    crews: list[Any]
    tolerance_m: float
    bounds: list[list[float]]


def display_geometry(zones: geopandas.GeoDataFrame, course: geopandas.GeoDataFrame,
                     crews: geopandas.GeoDataFrame | None, zone_props: list[dict[str, Any]], *,
                     tolerance_m: float, budget_chars: int) -> DisplayGeometry:
    """Simplify and reproject zones, course and crews until the zone and course data fit the budget.

    The tolerance starts at ``tolerance_m`` and is doubled (up to 8 m) while the zone and course
    geometry exceed ``budget_chars`` characters of JSON.

    Raises
    ------
    GeometryError
        When a layer has no CRS.
    """
    import geopandas as gpd
    import shapely

    zm = _metric(zones, "zones") if len(zones) else zones
    cm = _metric(course, "course") if len(course) else course
    crm = _metric(crews, "crews") if crews is not None and len(crews) else None
    tol = float(tolerance_m)
    # Where each zone's label goes: the centre of its largest inscribed circle (inside the zone,
    # as far from its edges as can be, even on a bend), in longitude/latitude.
    at = _to_lonlat(shapely.get_point(shapely.maximum_inscribed_circle(zm.geometry.values, 0.5), 0), zm.crs) \
        if len(zm) else []
    zone_props = [{**p, "at": [round(g.y, 6), round(g.x, 6)]} for p, g in zip(zone_props, at, strict=True)]
    while True:
        zg = _to_lonlat(simplify_for_display(zm.geometry.values, tol), zm.crs) if len(zm) else []
        cg = _to_lonlat(simplify_for_display(cm.geometry.values, tol), cm.crs) if len(cm) else []
        kg = _to_lonlat(simplify_for_display(crm.geometry.values, tol), crm.crs) if crm is not None else []
        zfc = {"type": "FeatureCollection", "features": [
            {"type": "Feature", "properties": p, "geometry": _geom_json(g)}
            for p, g in zip(zone_props, zg, strict=True)]}
        cfc = {"type": "FeatureCollection", "features": [
            {"type": "Feature", "properties": {}, "geometry": _geom_json(g)} for g in cg]}
        size = (len(json.dumps([f["geometry"] for f in zfc["features"]]))
                + len(json.dumps([f["geometry"] for f in cfc["features"]])))
        if size <= budget_chars or tol >= 8.0:
            break
        tol = min(tol * 2, 8.0)
    allg = [g for g in list(zg) + list(cg) if g is not None and not g.is_empty]
    minx, miny, maxx, maxy = gpd.GeoSeries(allg).total_bounds
    return DisplayGeometry(zones=zfc, course=cfc if cg else None, crews=list(kg), tolerance_m=tol,
                           bounds=[[miny, minx], [maxy, maxx]])


def crew_layer(crews: geopandas.GeoDataFrame, geoms: list[Any], colours: tuple[str, ...]) -> dict[str, Any]:
    """GeoJSON FeatureCollection of the crews' areas with label and outline colour.

    Parameters
    ----------
    crews
        Crew areas with ``crew`` (number from 1) and ``label``.
    geoms
        The crews' geometries for display (:attr:`DisplayGeometry.crews`).
    colours
        Outline colours; crew *n* gets ``colours[(n - 1) % len(colours)]``.
    """
    feats = []
    crew_rows = crews.drop(columns=crews.geometry.name).to_dict("records")
    for i, (row, g) in enumerate(zip(crew_rows, geoms, strict=True)):
        crew = scalar(row.get("crew"))
        label = scalar(row.get("label"))
        feats.append({"type": "Feature", "geometry": _geom_json(g), "properties": {
            "crew": crew, "label": str(label if label is not None else f"Crew {crew}"),
            "colour": colours[(int(crew) - 1 if isinstance(crew, int) and crew > 0 else i) % len(colours)]}})
    return {"type": "FeatureCollection", "features": feats}


def observation_layer(observations: geopandas.GeoDataFrame, units: dict[str, str] | None,
                      colours: dict[str, str]) -> dict[str, Any]:
    """GeoJSON FeatureCollection of the field observations with popup rows, note and marker colour.

    Parameters
    ----------
    observations
        Observation points with ``obs_id`` and optional ``note``, ``wetness`` and values.
    units
        Units by column, overriding :data:`OBSERVATION_UNITS`.
    colours
        Marker fill by wetness class (from ``wetness``, else from ``lwc_pct``).
    """
    om = observations.to_crs(4326) if observations.crs is not None else observations
    feats = []
    obs_rows = om.drop(columns=om.geometry.name).to_dict("records")
    for row, g in zip(obs_rows, om.geometry.values, strict=True):
        vals = {k: scalar(v) for k, v in row.items()}
        note = vals.pop("note", None)
        oid = vals.get("obs_id")
        wet = vals.get("wetness")
        lwc = vals.get("lwc_pct")
        if not wet and isinstance(lwc, (int, float)):
            wet = wetness_of(lwc)
        rows = [(k, format_value(v, (units or {}).get(k, OBSERVATION_UNITS.get(k, "")),
                                 "int" if k in _OBS_INT else None))
                for k, v in vals.items() if k not in _OBS_HIDDEN]
        feats.append({"type": "Feature", "geometry": _geom_json(g), "properties": {
            "id": str(oid) if oid is not None else "", "rows": rows,
            "note": str(note) if note not in (None, "") else "",
            "colour": colours.get(str(wet), "#9aa0a6")}})
    return {"type": "FeatureCollection", "features": feats}


__all__ = ["DisplayGeometry", "OBSERVATION_UNITS", "crew_layer", "display_geometry", "format_value",
           "json_for_script", "observation_layer", "scalar", "simplify_for_display", "zone_lead",
           "zone_popup_sections", "zone_properties"]
