"""The offline HTML map of a plan: one self-contained page, no network needed.

:func:`render_map_html` builds the page as a string (this module opens no files;
:func:`courseplan.io.outputs.write_map` writes it).  Leaflet's script and stylesheet come from the
``xstatic-leaflet`` wheel and are inlined (:mod:`courseplan.render.assets`), with the one image the
stylesheet needs (the layers icon) as a data URI; there is no tile layer and no reference to any web
address for scripts, stylesheets or images.  A terrain or sun picture of the hill, made by
:func:`courseplan.render.context.context_from_raster`, is embedded as a PNG data URI for context.

Layers (built by :mod:`courseplan.render.layers`): zones coloured by P50 dose in fixed classes
(:data:`DOSE_BREAKS`, colours of the project's own, legend with units; untreated zones hatched with
a dark outline) or by verdict, crews with labels, field observations, the course outline with start
and finish.  A zone's popup leads with its number, section, passes, dose per pass and "hard until" in
a crew's words; every value with its unit (from :mod:`courseplan.columns`) is folded below.  A print
stylesheet puts map, legend and scale bar on one A4 page without the controls.
All user-supplied text (plan and
zone names, labels, notes) reaches the page either HTML-escaped or as JSON read by the page's script and
put into the page as text nodes, never as markup.

Geometry is simplified for display only (coverage-preserving, tolerance 0.75 m by default, larger
when needed to keep the page under its size budget); the plan's own geometry is untouched.
"""

from __future__ import annotations

import html
import math
from typing import TYPE_CHECKING, Any

from courseplan import columns as _columns
from courseplan.errors import GeometryError
from courseplan.render.assets import PAGE_CSS, PAGE_JS, leaflet_assets
from courseplan.render.context import SUN_RAMP, ContextImage
from courseplan.render.layers import (
    _geom_json,
    crew_layer,
    display_geometry,
    json_for_script,
    observation_layer,
    scalar,
    zone_properties,
)

if TYPE_CHECKING:  # pragma: no cover
    import geopandas

# --------------------------------------------------------------------------- colour scales
# The project's own colours (picked for this map; not taken from any other program).

DOSE_COLOURS: tuple[str, ...] = ("#f3ecd2", "#ecd07f", "#e0a04e", "#c76b3e", "#93405a", "#4e2d66")
"""Fill colours of the dose classes, lowest first: sand, straw, ochre, rust, plum, aubergine."""

NO_DOSE_COLOUR = "#c4c8c0"
"""Fill of zones without a dose (not treated, or no dose computed)."""

VERDICT_COLOURS: tuple[str, ...] = ("#2f7d62", "#d1892a", "#4f78b5", "#b54646", "#8564ad", "#6b6b63",
                                    "#bba834", "#2c6e8e")
"""Fill colours given to the verdicts present on a map, in order of first appearance along the course."""

CREW_COLOURS: tuple[str, ...] = ("#1d4f91", "#0f7a3a", "#8a1c7c", "#a34a00", "#005f6b", "#5b3c99")
"""Outline colours of the crews' areas."""

WETNESS_COLOURS: dict[str, str] = {"dry": "#ffffff", "moist": "#c4e2f2", "wet": "#72b5de",
                                   "very-wet": "#2f7cc0", "soaked": "#173f7a"}
"""Observation marker fills by wetness class (class names after Fierz et al. 2009)."""

MAP_BACKGROUND = "#eceee8"
"""Map background where there is no context picture."""

ZONE_FILL_OPACITY = 0.88
"""Opacity of the zone fills (the context picture shows through a little)."""

CONTEXT_OPACITY = 0.75
"""Opacity of the context picture over the map background."""

DEFAULT_TOLERANCE_M = 0.75
"""Display simplification tolerance [m]."""

GEOMETRY_BUDGET_CHARS = 560_000
"""Largest size of the page's geometry data before the simplification tolerance is raised."""


DOSE_BREAKS: tuple[float, ...] = (20.0, 40.0, 60.0, 100.0, 150.0, math.inf)
"""Upper edges of the fixed dose classes [g/m²], the same on every map so that colours compare across
plans and days: class *i* holds doses in (edge[i-1], edge[i]], the first (0, 20], the last above 150.
A dose of 0 (no salt) has no class: it is drawn hatched."""


def dose_class_labels(breaks: tuple[float, ...] = DOSE_BREAKS) -> list[str]:
    """Legend text of the dose classes, e.g. ``["1–20", "20–40", …, "> 150"]`` (without unit)."""
    out, lo = [], 0.0
    for hi in breaks:
        out.append(f"> {lo:g}" if not math.isfinite(hi) else f"{lo:g}–{hi:g}" if lo > 0 else f"1–{hi:g}")
        lo = hi
    return out


def dose_colour(dose: float | None, breaks: tuple[float, ...] | list[float] = DOSE_BREAKS) -> str:
    """Fill colour of a dose [g/m²] in the dose classes with the given upper edges."""
    if dose is None or not math.isfinite(dose) or dose <= 0:
        return NO_DOSE_COLOUR
    for i, edge in enumerate(breaks):
        if dose <= edge * (1 + 1e-9):
            return DOSE_COLOURS[i]
    return DOSE_COLOURS[len(breaks) - 1]


HATCH_SVG = ('<svg width="0" height="0" style="position:absolute" aria-hidden="true" focusable="false">'
             '<defs><pattern id="cp-hatch" patternUnits="userSpaceOnUse" width="7" height="7" '
             'patternTransform="rotate(45)"><rect width="7" height="7" fill="#eef0ea"/>'
             '<rect width="2.2" height="7" fill="#4d524c"/></pattern>'
             '<pattern id="cp-nosalt" patternUnits="userSpaceOnUse" width="8" height="8">'
             '<rect width="8" height="8" fill="#ffffff"/><path d="M0 0L8 8M8 0L0 8" stroke="#9b1c1c" '
             'stroke-width="1.6"/></pattern></defs></svg>')
"""The hatch that untreated zones are filled with (referenced as ``url(#cp-hatch)`` by the page script)."""


def render_map_html(zones: geopandas.GeoDataFrame, course: geopandas.GeoDataFrame, *, title: str,
                    agent_label: str, cautions: list[str],
                    observations: geopandas.GeoDataFrame | None = None,
                    crews: geopandas.GeoDataFrame | None = None, context: ContextImage | None = None,
                    start_xy: Any = None, finish_xy: Any = None, units: dict[str, str] | None = None,
                    no_salt: geopandas.GeoDataFrame | None = None,
                    tolerance_m: float = DEFAULT_TOLERANCE_M,
                    budget_chars: int = GEOMETRY_BUDGET_CHARS) -> str:
    """Build the offline map page of a plan.

    Parameters
    ----------
    zones
        Zones table (polygons in a metric working CRS) with the columns of
        :mod:`courseplan.columns`; at least ``zone_id``, ``verdict`` and ``dose_g_m2`` are used
        for colouring, and every column is shown in the popups.
    course
        Course outline (one or more polygons), any CRS.
    title
        Plan title shown at the top.
    agent_label
        Agent as shown to the reader (name and product).
    cautions
        Cautions of the plan (:func:`courseplan.cautions.cautions_for`); all are shown.
    observations
        Field observations (points) with ``obs_id`` and optional ``note`` and values.
    crews
        Crew areas (polygons) with ``crew`` and ``label``.
    context
        Picture of the hill placed under the zones
        (:func:`courseplan.render.context.context_from_raster`).
    start_xy, finish_xy
        Start and finish points ``(x, y)`` in the CRS of ``course``.
    units
        Units by column, overriding those declared in :mod:`courseplan.columns`.
    tolerance_m
        Display simplification tolerance [m]; doubled (up to 8 m) while the geometry data exceed
        ``budget_chars``.
    budget_chars
        Size budget of the geometry data in the page [characters].

    Returns
    -------
    str
        The complete HTML page.

    Raises
    ------
    GeometryError
        When a layer has no CRS or there are no zones and no course to show.
    """
    from pyproj import Transformer

    if len(zones) == 0 and len(course) == 0:
        raise GeometryError("nothing to draw: no zones and no course", where="map")

    # --- per-zone properties (independent of the geometry)
    zrows = zones.drop(columns=zones.geometry.name).to_dict("records") if len(zones) else []
    doses = [scalar(r.get("dose_g_m2")) for r in zrows]
    breaks = DOSE_BREAKS
    verdicts: list[str] = []
    for r in zrows:
        v = str(scalar(r.get("verdict")) or "—")
        if v not in verdicts:
            verdicts.append(v)
    vcol = {v: VERDICT_COLOURS[i % len(VERDICT_COLOURS)] for i, v in enumerate(verdicts)}
    zprops = zone_properties(zrows, [dose_colour(d, breaks) for d in doses], vcol, units)

    # --- geometry, simplified until it fits the budget
    geo = display_geometry(zones, course, crews, zprops, tolerance_m=tolerance_m, budget_chars=budget_chars)
    tol = geo.tolerance_m
    data: dict[str, Any] = {"zones": geo.zones, "course": geo.course, "fillOpacity": ZONE_FILL_OPACITY}
    if crews is not None and len(crews):
        data["crews"] = crew_layer(crews, geo.crews, CREW_COLOURS)
    if observations is not None and len(observations):
        data["obs"] = observation_layer(observations, units, WETNESS_COLOURS)
    if no_salt is not None and len(no_salt):
        ll = no_salt.to_crs(4326)
        data["nosalt"] = {"type": "FeatureCollection", "features": [
            {"type": "Feature", "properties": {"name": str(n), "area": f"{a:,.0f} m²"}, "geometry": _geom_json(g)}
            for n, a, g in zip(ll["name"], ll["area_m2"], ll.geometry, strict=True)]}
    to_ll = Transformer.from_crs(course.crs or zones.crs, "EPSG:4326", always_xy=True)
    for key, xy in (("start", start_xy), ("finish", finish_xy)):
        if xy is not None:
            lon, lat = to_ll.transform(float(xy[0]), float(xy[1]))
            data[key] = [round(lat, 7), round(lon, 7)]
    if context is not None:
        (s, w), (n, e) = context.latlon_bounds()
        data["context"] = {"uri": context.png_data_uri(), "bounds": [[s, w], [n, e]],
                           "opacity": CONTEXT_OPACITY,
                           "name": "Context: " + ("sun and shade" if context.kind == "sun" else "terrain")}
    data["bounds"] = geo.bounds

    # --- static parts (escaped)
    esc = html.escape
    dose_unit = esc((units or {}).get("dose_g_m2", _columns.unit("dose_g_m2")) or "g/m²")
    legend = ['<div class="legend" id="legend">', f"<h2>Dose over the day (P50, {dose_unit})</h2>"]
    for c, label in zip(DOSE_COLOURS, dose_class_labels(breaks), strict=False):
        legend.append(f'<div class="row"><span class="sw" style="background:{c}"></span>'
                      f"{esc(label)} {dose_unit}</div>")
    legend.append('<div class="row"><span class="sw hatch"></span>0: no salt (not treated)</div>')
    if no_salt is not None and len(no_salt):
        legend.append('<div class="row"><span class="sw nosalt"></span>no-salt area (plan file)</div>')
    if verdicts:
        legend.append("<h2>Verdict (layer “Zones by verdict”)</h2>")
        for v in verdicts:
            legend.append(f'<div class="row"><span class="sw" style="background:{vcol[v]}"></span>'
                          f"{esc(v)}</div>")
    if "obs" in data:
        legend.append("<h2>Observations (wetness, Fierz et al. 2009)</h2>")
        for k, c in WETNESS_COLOURS.items():
            legend.append(f'<div class="row"><span class="dot" style="background:{c}"></span>{esc(k)}</div>')
    if "crews" in data:
        legend.append('<h2>Crews</h2><div class="note">dashed outlines, labelled on the map</div>')
    if context is not None:
        legend.append(f"<h2>Context picture</h2><div class=\"note\">{esc(context.legend)}</div>")
        if context.kind == "sun":
            stops = ",".join(f"{c} {int(p * 100)}%" for p, c in SUN_RAMP)
            legend.append(f'<div class="ramp" style="background:linear-gradient(to right,{stops})"></div>'
                          '<div class="note">0 (shade all window) … 1 (sun all window)</div>')
    legend.append("</div>")
    treated = sum(1 for d in doses if d is not None and d > 0)
    by_agent: dict[str, float] = {}  # product per agent: a plan with zones of their own agent lists each
    for r in zrows:
        a = str(scalar(r.get("agent")) or "")
        by_agent[a] = by_agent.get(a, 0.0) + float(scalar(r.get("product_kg")) or 0.0)
    total_kg = sum(by_agent.values())
    def kg(x: float) -> str:
        return f"{x:,.0f}".replace(",", "\u202f") + " kg"
    amounts = (", ".join(f"{kg(m)} {a}" for a, m in by_agent.items() if m > 0) if len(by_agent) > 1
               else kg(total_kg))
    summary = f"{len(zrows)} zones, {treated} with a dose" + (f"; product {amounts} (P50)" if total_kg else "")
    js, css = leaflet_assets()
    caution_items = "".join(f"<li>{esc(c)}</li>" for c in cautions)
    page = f"""<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta name="generator" content="courseplan">
<title>{esc(title)}</title>
<style>
{css}
</style>
<style>{PAGE_CSS.replace("__BG__", MAP_BACKGROUND)}</style>
</head>
<body>
{HATCH_SVG}
<div id="wrap">
<aside id="side">
<h1>{esc(title)}</h1>
<p class="sub">Agent: {esc(agent_label)}<br>{esc(summary)}</p>
<div class="warn"><strong>Cautions</strong>
<ul class="cautions">{caution_items}</ul></div>
{"".join(legend)}
<p class="note">Geometry simplified for display only (tolerance {tol:g} m); quantities come from the
plan's full geometry. Tap a zone or an observation for its values. Map drawn with Leaflet (BSD-2-Clause),
inlined; no network needed.</p>
</aside>
<div id="map" role="region" aria-label="Map of the course"></div>
</div>
<script type="application/json" id="plan-data">{json_for_script(data)}</script>
<script>
{js}
</script>
<script>{PAGE_JS}</script>
</body>
</html>
"""
    return page


__all__ = ["dose_class_labels", "dose_colour", "render_map_html", "CONTEXT_OPACITY", "CREW_COLOURS",
           "DEFAULT_TOLERANCE_M", "DOSE_BREAKS", "DOSE_COLOURS", "GEOMETRY_BUDGET_CHARS", "HATCH_SVG",
           "MAP_BACKGROUND", "NO_DOSE_COLOUR", "VERDICT_COLOURS", "WETNESS_COLOURS", "ZONE_FILL_OPACITY"]
