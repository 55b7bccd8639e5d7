"""The offline HTML map of a plan: one self-contained page, no network needed.

:func:`render_map_html` builds the page as a string (this module opens no files;
:mod:`courseplan.io.webmap` writes it).  Leaflet's script and stylesheet come from the
``xstatic-leaflet`` wheel and are inlined, with the one image the stylesheet needs (the layers
icon) as a data URI; there is no tile layer and no reference to any web address for scripts,
stylesheets or images.  A terrain or sun picture of the hill, made by :func:`context_from_raster`,
is embedded as a PNG data URI for context.

Layers: zones coloured by P50 dose (a colour scale of the project's own, legend with units) or by
verdict, crews with labels, field observations, the course outline with start and finish.  Popups
list every zone value with its unit (from :mod:`courseplan.columns`) and where the zone's snow state
came from.  All user-supplied text (plan and zone names, labels, notes) reaches the page either
HTML-escaped or as JSON read by the page's script and put into the page as text nodes, never as
markup.

Geometry is simplified for display only (coverage-preserving, tolerance 0.75 m by default, larger
when needed to keep the page under its size budget); the plan's own geometry is untouched.
"""

from __future__ import annotations

import base64
import html
import io
import json
import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from courseplan import columns as _columns
from courseplan.errors import GeometryError, InputError
from courseplan.geo.crs import is_metric, utm_crs
from courseplan.physics.snow import wetness_of

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

SUN_RAMP: tuple[tuple[float, str], ...] = ((0.0, "#27324f"), (0.35, "#6b7690"), (0.7, "#d9c27a"),
                                           (1.0, "#fff0b8"))
"""Context picture of a sun raster: share of the window in sun 0 → 1, deep shade to full sun."""

TERRAIN_LOW, TERRAIN_HIGH = "#d8dccd", "#f6f3ea"
"""Tints of the terrain context picture at the lowest and highest height."""

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

OBSERVATION_UNITS: dict[str, str] = {"lwc_pct": "% vol", "snow_temp_c": "°C", "density_kg_m3": "kg/m³",
                                     "hand_hardness": "1–6", "air_temp_c": "°C"}
"""Units of the observation columns shown in popups."""

_OBS_HIDDEN = {"lon", "lat", "x", "y", "geometry"}
_OBS_INT = {"hand_hardness"}


def _hex_rgb(c: str) -> tuple[int, int, int]:
    c = c.lstrip("#")
    return int(c[0:2], 16), int(c[2:4], 16), int(c[4:6], 16)


def _nice_step(x: float) -> float:
    """Smallest round step (1, 1.5, 2, 2.5, 3, 4, 5, 6 or 8 × 10^k) that is ≥ x."""
    if not (x > 0 and math.isfinite(x)):
        return 1.0
    k = math.floor(math.log10(x))
    for m in (1.0, 1.5, 2.0, 2.5, 3.0, 4.0, 5.0, 6.0, 8.0, 10.0):
        if m * 10 ** k >= x * (1 - 1e-12):
            return m * 10 ** k
    return 10.0 ** (k + 1)  # pragma: no cover


def dose_breaks(doses: Any, n_classes: int = len(DOSE_COLOURS)) -> list[float]:
    """Upper edges of equal, round dose classes covering the largest positive dose.

    Parameters
    ----------
    doses
        Doses [g/m²]; zero, negative and NaN values are ignored.
    n_classes
        Number of classes (at most ``len(DOSE_COLOURS)``).

    Returns
    -------
    list of float
        ``n_classes`` upper class edges [g/m²], ascending; class *i* holds doses in
        (edge[i-1], edge[i]], the first class (0, edge[0]].
    """
    d = np.asarray(doses, dtype=float).ravel()
    d = d[np.isfinite(d) & (d > 0)]
    top = float(d.max()) if d.size else float(n_classes)
    step = _nice_step(top / n_classes)
    return [step * (i + 1) for i in range(n_classes)]


def dose_colour(dose: float | None, breaks: list[float]) -> str:
    """Fill colour of a dose [g/m²] on the scale with the given class edges."""
    if dose is None or not math.isfinite(dose) or dose <= 0:
        return NO_DOSE_COLOUR
    for i, edge in enumerate(breaks):
        if dose <= edge * (1 + 1e-9):
            return DOSE_COLOURS[i]
    return DOSE_COLOURS[len(breaks) - 1]


# --------------------------------------------------------------------------- context picture

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

    Lambert's cosine law on the surface normal from central-difference gradients
    (``numpy.gradient``), the usual cartographic hillshade with light from the north-west.

    Parameters
    ----------
    z
        Heights [m], rows running south; NaN allowed.
    cell_x, cell_y
        Cell width and height [m], positive.
    azimuth_deg, altitude_deg
        Direction of the light [°], azimuth clockwise from north.
    """
    gy, gx = np.gradient(np.asarray(z, dtype=float), cell_y, cell_x)
    dzdx, dzdn = gx, -gy  # rows run south
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


def _scalar(v: Any) -> Any:
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
            u = units.get(col.name, col.unit)
            sections.setdefault(sec, []).append((col.name, format_value(row[col.name], u, col.kind)))
            done.add(col.name)
    for name in row:
        if name in done or name == "geometry":
            continue
        sections.setdefault("Other", []).append((name, format_value(row[name], units.get(name, ""))))
    return [(k, v) for k, v in sections.items()]


def _json_for_script(obj: Any) -> str:
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


# --------------------------------------------------------------------------- the page

def _leaflet_assets() -> tuple[str, str]:
    """Leaflet's JS and CSS from the xstatic-leaflet wheel, with the CSS's images as data URIs."""
    from pathlib import Path

    import xstatic.pkg.leaflet as xl

    base = Path(xl.BASE_DIR)
    js = (base / "leaflet.js").read_text(encoding="utf-8")
    js = "\n".join(line for line in js.splitlines() if not line.startswith("//# sourceMappingURL"))
    css = (base / "leaflet.css").read_text(encoding="utf-8")
    for name in ("layers.png", "layers-2x.png", "marker-icon.png"):
        data = base64.b64encode((base / "images" / name).read_bytes()).decode("ascii")
        css = css.replace(f"url(images/{name})", f"url(data:image/png;base64,{data})")
    js = js.replace("</script", "<\\/script")
    return js, css


_PAGE_CSS = """
html,body{height:100%;margin:0}
body{font:14px/1.4 system-ui,-apple-system,"Segoe UI",Roboto,sans-serif;color:#1d2321;background:#fff}
#wrap{display:flex;height:100%}
#side{width:340px;flex:none;overflow:auto;padding:10px 14px 16px;box-sizing:border-box;background:#fafaf6;
 border-right:1px solid #c9cbc2}
#map{flex:1;min-width:0;background:__BG__}
h1{font-size:17px;margin:2px 0 4px}
h2{font-size:13px;margin:12px 0 4px;color:#4a504b}
.sub{color:#4a504b;margin:0 0 6px}
.cautions{margin:0;padding-left:18px}
.cautions{font-size:12.5px;line-height:1.35}
.cautions li{margin:0 0 3px}
.warn{background:#fff3d6;border:1px solid #e2c37a;border-radius:4px;padding:6px 8px;margin:8px 0}
.legend .row{display:flex;align-items:center;gap:6px;margin:2px 0}
.maplegend{background:rgba(255,255,255,.93);border:1px solid #9a9d95;border-radius:4px;padding:4px 8px;
 max-height:55vh;overflow:auto;font-size:12px;max-width:260px}
.maplegend summary{cursor:pointer;font-weight:600}
.maplegend h2{font-size:11px;margin:6px 0 2px}
.maplegend .note{font-size:11px}
.sw{display:inline-block;width:22px;height:13px;border:1px solid #7d8079;flex:none}
.dot{display:inline-block;width:11px;height:11px;border-radius:50%;border:2px solid #1b2f4a;flex:none}
.ramp{height:12px;border:1px solid #7d8079;margin:2px 0}
.note{color:#5a605b;font-size:12px}
.pop h3{font-size:14px;margin:0 0 4px}
.pop h4{font-size:11px;margin:6px 0 2px;text-transform:uppercase;color:#4a504b}
.pop table{border-collapse:collapse;font-size:12px}
.pop td{padding:0 6px 0 0;vertical-align:top}
.pop td.k{color:#4a504b;white-space:nowrap}
.pop .note{white-space:pre-wrap;max-width:260px}
.lbl{background:rgba(255,255,255,.85);border:1px solid #555;font-weight:600;padding:0 4px}
@media (max-width:760px){
 #wrap{flex-direction:column;height:auto}
 #map{flex:none;height:68vh;order:1}
 #side{width:auto;order:2;border-right:0;border-top:1px solid #c9cbc2;overflow:visible}
}
@media print{#wrap{display:block}#map{height:60vh}#side{width:auto;border:0}}
"""

_PAGE_JS = r"""
(function(){
"use strict";
var D = JSON.parse(document.getElementById("plan-data").textContent);
function el(tag, cls, text){var e=document.createElement(tag); if(cls){e.className=cls;}
  if(text!==undefined&&text!==null){e.textContent=String(text);} return e;}
function table(rows){var t=el("table"); rows.forEach(function(r){var tr=el("tr");
  tr.appendChild(el("td","k",r[0])); tr.appendChild(el("td","v",r[1])); t.appendChild(tr);}); return t;}
function zonePopup(p){var d=el("div","pop"); d.appendChild(el("h3",null,"Zone "+p.id+" \u2014 "+p.verdict));
  p.sections.forEach(function(s){d.appendChild(el("h4",null,s[0])); d.appendChild(table(s[1]));}); return d;}
function obsPopup(p){var d=el("div","pop"); d.appendChild(el("h3",null,"Observation "+p.id));
  d.appendChild(table(p.rows));
  if(p.note){d.appendChild(el("h4",null,"note")); d.appendChild(el("div","note",p.note));}
  return d;}
var map = L.map("map", {zoomSnap:0.25, attributionControl:false, preferCanvas:false});
L.control.scale({imperial:false, maxWidth:160}).addTo(map);
var overlays = {}, base = {}, byZone = {}, byObs = {};
if (D.context){
  var ctx = L.imageOverlay(D.context.uri, D.context.bounds, {opacity:D.context.opacity, interactive:false});
  ctx.addTo(map); overlays[D.context.name] = ctx;
}
function zoneLayer(colourKey, register){
  return L.geoJSON(D.zones, {
    style:function(f){return {color:"#3b3f3a", weight:0.7, opacity:0.9, fillColor:f.properties[colourKey],
                              fillOpacity:D.fillOpacity};},
    onEachFeature:function(f, layer){
      layer.bindPopup(function(){return zonePopup(f.properties);}, {maxWidth:340, maxHeight:420});
      if(register){byZone[String(f.properties.id)] = layer;}}
  });
}
var zDose = zoneLayer("c_dose", true), zVerdict = zoneLayer("c_verdict", false);
base["Zones by dose"] = zDose; base["Zones by verdict"] = zVerdict; zDose.addTo(map);
var course = L.layerGroup();
if (D.course){ L.geoJSON(D.course, {interactive:false, style:function(){return {color:"#111", weight:1.3,
  fill:false, dashArray:null};}}).addTo(course); }
[["start","Start","#1a7f37"],["finish","Finish","#b3261e"]].forEach(function(s){
  if (D[s[0]]){ L.circleMarker(D[s[0]], {radius:7, color:"#fff", weight:2, fillColor:s[2], fillOpacity:1})
    .bindTooltip(el("span",null,s[1]), {permanent:true, direction:"right", className:"lbl"})
    .addTo(course);}});
course.addTo(map); overlays["Course, start and finish"] = course;
if (D.crews){
  var crews = L.geoJSON(D.crews, {
    style:function(f){return {color:f.properties.colour, weight:2, dashArray:"5 4", fill:false};},
    onEachFeature:function(f, layer){layer.bindTooltip(el("span",null,f.properties.label),
      {permanent:true, direction:"center", className:"lbl"});}
  });
  crews.addTo(map); overlays["Crews"] = crews;
}
if (D.obs){
  var obs = L.geoJSON(D.obs, {
    pointToLayer:function(f, ll){return L.circleMarker(ll, {radius:6, color:"#1b2f4a", weight:2,
      fillColor:f.properties.colour, fillOpacity:1});},
    onEachFeature:function(f, layer){
      layer.bindPopup(function(){return obsPopup(f.properties);}, {maxWidth:300, maxHeight:420});
      byObs[String(f.properties.id)] = layer;}
  });
  obs.addTo(map); overlays["Observations"] = obs;
}
L.control.layers(base, overlays, {collapsed:window.innerWidth<760}).addTo(map);
var Legend = L.Control.extend({options:{position:"bottomright"}, onAdd:function(){
  var box = L.DomUtil.create("details", "maplegend");
  var sm = el("summary", null, "Legend"); box.appendChild(sm);
  var copy = document.getElementById("legend").cloneNode(true); copy.removeAttribute("id");
  box.appendChild(copy);
  L.DomEvent.disableClickPropagation(box); L.DomEvent.disableScrollPropagation(box); return box;}});
new Legend().addTo(map);
map.fitBounds(D.bounds, {padding:[12,12]});
function openFromHash(){
  var m = /^#(zone|obs)=(.+)$/.exec(window.location.hash); if(!m){return;}
  var key = decodeURIComponent(m[2]); var layer = (m[1]==="zone" ? byZone : byObs)[key];
  if(layer){ layer.openPopup(layer.getBounds ? layer.getBounds().getCenter() : undefined); }
}
window.addEventListener("hashchange", openFromHash); openFromHash();
window.courseplanMap = map;
})();
"""


def render_map_html(zones: geopandas.GeoDataFrame, course: geopandas.GeoDataFrame, *, title: str,
                    agent_label: str, cautions: list[str],
                    observations: geopandas.GeoDataFrame | None = None,
                    crews: geopandas.GeoDataFrame | None = None, context: ContextImage | None = None,
                    start_xy: Any = None, finish_xy: Any = None, units: dict[str, str] | None = None,
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
        Picture of the hill placed under the zones (:func:`context_from_raster`).
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
    import geopandas as gpd
    from pyproj import Transformer

    if len(zones) == 0 and len(course) == 0:
        raise GeometryError("nothing to draw: no zones and no course", where="map")
    zm = _metric(zones, "zones") if len(zones) else zones
    cm = _metric(course, "course") if len(course) else course
    crm = _metric(crews, "crews") if crews is not None and len(crews) else None

    # --- per-zone properties (independent of the geometry)
    zrows = zones.drop(columns=zones.geometry.name).to_dict("records") if len(zones) else []
    doses = [_scalar(r.get("dose_g_m2")) for r in zrows]
    breaks = dose_breaks([d for d in doses if d is not None])
    verdicts: list[str] = []
    for r in zrows:
        v = str(_scalar(r.get("verdict")) or "—")
        if v not in verdicts:
            verdicts.append(v)
    vcol = {v: VERDICT_COLOURS[i % len(VERDICT_COLOURS)] for i, v in enumerate(verdicts)}
    zprops = []
    for i, r in enumerate(zrows):
        zid = _scalar(r.get("zone_id"))
        zprops.append({"id": zid if zid is not None else i + 1,
                       "verdict": str(_scalar(r.get("verdict")) or "—"),
                       "c_dose": dose_colour(doses[i], breaks),
                       "c_verdict": vcol[str(_scalar(r.get("verdict")) or "—")],
                       "sections": zone_popup_sections({k: _scalar(v) for k, v in r.items()}, units)})

    # --- geometry, simplified until it fits the budget
    tol = float(tolerance_m)
    while True:
        zg = _to_lonlat(simplify_for_display(zm.geometry.values, tol), zm.crs) if len(zm) else []
        cg = _to_lonlat(simplify_for_display(cm.geometry.values, tol), cm.crs) if len(cm) else []
        kg = _to_lonlat(simplify_for_display(crm.geometry.values, tol), crm.crs) if crm is not None else []
        zfc = {"type": "FeatureCollection", "features": [
            {"type": "Feature", "properties": p, "geometry": _geom_json(g)}
            for p, g in zip(zprops, zg, strict=True)]}
        cfc = {"type": "FeatureCollection", "features": [
            {"type": "Feature", "properties": {}, "geometry": _geom_json(g)} for g in cg]}
        size = (len(json.dumps([f["geometry"] for f in zfc["features"]]))
                + len(json.dumps([f["geometry"] for f in cfc["features"]])))
        if size <= budget_chars or tol >= 8.0:
            break
        tol = min(tol * 2, 8.0)

    data: dict[str, Any] = {"zones": zfc, "course": cfc if cg else None, "fillOpacity": ZONE_FILL_OPACITY}
    if crm is not None:
        feats = []
        crew_rows = crews.drop(columns=crews.geometry.name).to_dict("records")
        for i, (row, g) in enumerate(zip(crew_rows, kg, strict=True)):
            crew = _scalar(row.get("crew"))
            label = _scalar(row.get("label"))
            feats.append({"type": "Feature", "geometry": _geom_json(g), "properties": {
                "crew": crew, "label": str(label if label is not None else f"Crew {crew}"),
                "colour": CREW_COLOURS[(int(crew) - 1 if isinstance(crew, int) and crew > 0 else i)
                                       % len(CREW_COLOURS)]}})
        data["crews"] = {"type": "FeatureCollection", "features": feats}
    if observations is not None and len(observations):
        om = observations.to_crs(4326) if observations.crs is not None else observations
        feats = []
        obs_rows = om.drop(columns=om.geometry.name).to_dict("records")
        for row, g in zip(obs_rows, om.geometry.values, strict=True):
            vals = {k: _scalar(v) for k, v in row.items()}
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
                "colour": WETNESS_COLOURS.get(str(wet), "#9aa0a6")}})
        data["obs"] = {"type": "FeatureCollection", "features": feats}
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
    allg = [g for g in list(zg) + list(cg) if g is not None and not g.is_empty]
    minx, miny, maxx, maxy = gpd.GeoSeries(allg).total_bounds
    data["bounds"] = [[miny, minx], [maxy, maxx]]

    # --- static parts (escaped)
    esc = html.escape
    dose_unit = esc((units or {}).get("dose_g_m2", _columns.unit("dose_g_m2")) or "g/m²")
    legend = ['<div class="legend" id="legend">', f"<h2>Dose (P50, {dose_unit})</h2>"]
    lo = 0.0
    for c, hi in zip(DOSE_COLOURS, breaks, strict=False):
        legend.append(f'<div class="row"><span class="sw" style="background:{c}"></span>'
                      f"{_fmt_edge(lo)} – {_fmt_edge(hi)} {dose_unit}</div>")
        lo = hi
    legend.append(f'<div class="row"><span class="sw" style="background:{NO_DOSE_COLOUR}"></span>'
                  "no dose (not treated)</div>")
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
    total_kg = sum(float(_scalar(r.get("product_kg")) or 0.0) for r in zrows)
    summary = (f"{len(zrows)} zones, {treated} with a dose"
               + (f"; product {total_kg:,.0f} kg (P50)".replace(",", "\u202f") if total_kg else ""))
    js, css = _leaflet_assets()
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
<style>{_PAGE_CSS.replace("__BG__", MAP_BACKGROUND)}</style>
</head>
<body>
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
<script type="application/json" id="plan-data">{_json_for_script(data)}</script>
<script>
{js}
</script>
<script>{_PAGE_JS}</script>
</body>
</html>
"""
    return page


def _fmt_edge(x: float) -> str:
    return f"{x:g}"


__all__ = ["ContextImage", "context_from_raster", "dose_breaks", "dose_colour", "format_value",
           "hillshade", "render_map_html", "simplify_for_display", "zone_popup_sections",
           "DOSE_COLOURS", "NO_DOSE_COLOUR", "MAP_BACKGROUND", "ZONE_FILL_OPACITY"]
