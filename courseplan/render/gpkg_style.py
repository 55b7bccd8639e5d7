"""Styles for the GeoPackage's ``layer_styles`` table: every map layer opens ready in a desktop GIS.

``layer_styles`` is the GeoPackage extension desktop GIS reads the default style of a layer from
(columns ``f_table_catalog``, ``f_table_schema``, ``f_table_name``, ``f_geometry_column``,
``styleName``, ``styleQML``, ``styleSLD``, ``useAsDefault``, ``description``, ``owner``, ``ui``,
``update_time``).  This module only builds the text, an OGC Symbology Encoding 1.1 SLD and a QML
document per layer: the zones filled by dose in the offline map's fixed classes and colours and
labelled, the no-salt areas cross-hatched, the crews' areas dashed and labelled, the depots as
labelled triangles, start and finish as labelled points.  Pure: data in, str out.
"""

from __future__ import annotations

import math
from xml.sax.saxutils import escape

from courseplan.render.webmap import DOSE_BREAKS, DOSE_COLOURS, dose_class_labels


def _classes() -> tuple[tuple[float, float | None, str, str], ...]:
    out, lo = [], 0.0
    for hi, colour, label in zip(DOSE_BREAKS, DOSE_COLOURS, dose_class_labels(DOSE_BREAKS), strict=True):
        out.append((lo, None if not math.isfinite(hi) else hi, colour, f"{label} g/m²"))
        lo = hi
    return tuple(out)


DOSE_CLASSES: tuple[tuple[float, float | None, str, str], ...] = _classes()
"""The offline map's fixed classes of ``dose_g_m2`` [g/m²]: lower bound (exclusive), upper bound
(inclusive; None = open), fill colour and legend text, from :data:`courseplan.render.webmap.DOSE_BREAKS`
and ``DOSE_COLOURS``, so the GIS and the map show a zone in the same colour."""

NO_DOSE_COLOUR = "#d9d9d9"
"""Fill of zones without a dose (0 or no value: no salt there), hatched."""

_SE = ('xmlns="http://www.opengis.net/sld" xmlns:ogc="http://www.opengis.net/ogc" '
       'xmlns:se="http://www.opengis.net/se" xmlns:xlink="http://www.w3.org/1999/xlink" '
       'xmlns:xsi="http://www.w3.org/2001/XMLSchema-instance" version="1.1.0" '
       'xsi:schemaLocation="http://www.opengis.net/sld http://schemas.opengis.net/sld/1.1.0/'
       'StyledLayerDescriptor.xsd"')


def _p(name: str, value: str) -> str:
    return f'<se:SvgParameter name="{name}">{value}</se:SvgParameter>'


def _sld(layer: str, style: str, rules: list[str]) -> str:
    return ('<?xml version="1.0" encoding="UTF-8"?>\n'
            f"<StyledLayerDescriptor {_SE}><NamedLayer><se:Name>{escape(layer)}</se:Name><UserStyle>"
            f"<se:Name>{escape(style)}</se:Name><se:FeatureTypeStyle>{''.join(rules)}</se:FeatureTypeStyle>"
            "</UserStyle></NamedLayer></StyledLayerDescriptor>\n")


def _rule(title: str, symbolizer: str, filt: str = "") -> str:
    return (f"<se:Rule><se:Name>{escape(title)}</se:Name><se:Description><se:Title>{escape(title)}</se:Title>"
            f"</se:Description>{filt}{symbolizer}</se:Rule>")


def _poly(fill: str | None, stroke: str = "#333333", width: float = 0.5, dash: str = "",
          hatch: str = "") -> str:
    if hatch:  # a well-known-name mark repeated as the fill (shape://times: cross, shape://slash)
        f = (f"<se:Fill><se:GraphicFill><se:Graphic><se:Mark><se:WellKnownName>{hatch}</se:WellKnownName>"
             f"<se:Stroke>{_p('stroke', stroke)}{_p('stroke-width', '0.5')}</se:Stroke></se:Mark>"
             "<se:Size>6</se:Size></se:Graphic></se:GraphicFill></se:Fill>")
    else:
        f = f"<se:Fill>{_p('fill', fill)}</se:Fill>" if fill else ""
    d = _p("stroke-dasharray", dash) if dash else ""
    return (f"<se:PolygonSymbolizer>{f}<se:Stroke>{_p('stroke', stroke)}{_p('stroke-width', f'{width:g}')}{d}"
            "</se:Stroke></se:PolygonSymbolizer>")


def _point(mark: str, fill: str, size: float = 9.0) -> str:
    return (f"<se:PointSymbolizer><se:Graphic><se:Mark><se:WellKnownName>{mark}</se:WellKnownName>"
            f"<se:Fill>{_p('fill', fill)}</se:Fill><se:Stroke>{_p('stroke', '#ffffff')}{_p('stroke-width', '1')}"
            f"</se:Stroke></se:Mark><se:Size>{size:g}</se:Size></se:Graphic></se:PointSymbolizer>")


def _text(field: str) -> str:
    return ("<se:TextSymbolizer><se:Label>"
            f"<ogc:PropertyName>{escape(field)}</ogc:PropertyName></se:Label><se:Font>"
            f"{_p('font-family', 'Sans-Serif')}{_p('font-size', '11')}</se:Font>"
            f"<se:Halo><se:Radius>1.5</se:Radius><se:Fill>{_p('fill', '#ffffff')}</se:Fill></se:Halo>"
            f"<se:Fill>{_p('fill', '#000000')}</se:Fill></se:TextSymbolizer>")


def _cmp(op: str, field: str, value: str) -> str:
    return (f"<ogc:{op}><ogc:PropertyName>{escape(field)}</ogc:PropertyName><ogc:Literal>{escape(value)}"
            f"</ogc:Literal></ogc:{op}>")


def _between(field: str, lo: float, hi: float | None) -> str:
    gt = _cmp("PropertyIsGreaterThan", field, f"{lo:g}")
    if hi is None:
        return f"<ogc:Filter>{gt}</ogc:Filter>"
    return f"<ogc:Filter><ogc:And>{gt}{_cmp('PropertyIsLessThanOrEqualTo', field, f'{hi:g}')}</ogc:And></ogc:Filter>"


def zones_sld(layer: str = "zones", field: str = "dose_g_m2", label: str = "label") -> str:
    """SLD 1.1 of the zones: one rule per dose class, a hatched rule for no salt, zone labels."""
    rules = [_rule(title, _poly(c), _between(field, lo, hi)) for lo, hi, c, title in DOSE_CLASSES]
    none = (f"<ogc:Filter><ogc:Or><ogc:PropertyIsNull><ogc:PropertyName>{field}</ogc:PropertyName>"
            f"</ogc:PropertyIsNull>{_cmp('PropertyIsLessThanOrEqualTo', field, '0')}</ogc:Or></ogc:Filter>")
    rules.append(_rule("no salt (0 g/m²)", _poly(None, hatch="shape://slash", stroke="#555555"), none))
    rules.append(_rule("zone label", _text(label)))
    return _sld(layer, f"{layer} by dose", rules)


# --------------------------------------------------------------------------- QML

def _rgba(hex_colour: str) -> str:
    h = hex_colour.lstrip("#")
    return ",".join(str(int(h[i:i + 2], 16)) for i in (0, 2, 4)) + ",255"


def _fill_symbol(name: str, colour: str, style: str = "solid", outline: str = "#333333",
                 outline_style: str = "solid", width: float = 0.26) -> str:
    return (f'<symbol type="fill" name="{name}" alpha="1" clip_to_extent="1" force_rhr="0">'
            '<layer class="SimpleFill" enabled="1" locked="0" pass="0">'
            f'<prop k="color" v="{_rgba(colour)}"/><prop k="outline_color" v="{_rgba(outline)}"/>'
            f'<prop k="outline_style" v="{outline_style}"/><prop k="outline_width" v="{width:g}"/>'
            f'<prop k="outline_width_unit" v="MM"/><prop k="style" v="{style}"/></layer></symbol>')


def _marker_symbol(name: str, shape: str, colour: str, size: float = 3.2) -> str:
    return (f'<symbol type="marker" name="{name}" alpha="1" clip_to_extent="1" force_rhr="0">'
            '<layer class="SimpleMarker" enabled="1" locked="0" pass="0">'
            f'<prop k="name" v="{shape}"/><prop k="color" v="{_rgba(colour)}"/>'
            '<prop k="outline_color" v="255,255,255,255"/><prop k="outline_width" v="0.4"/>'
            f'<prop k="size" v="{size:g}"/><prop k="size_unit" v="MM"/></layer></symbol>')


def _labels(field: str) -> str:
    return ('<labeling type="simple"><settings calloutType="simple">'
            f'<text-style fieldName="{escape(field)}" isExpression="0" fontSize="9" fontFamily="Sans Serif" '
            'textColor="0,0,0,255"><text-buffer bufferDraw="1" bufferSize="1" bufferColor="255,255,255,255"/>'
            '</text-style><placement placement="1"/></settings></labeling>')


def _qml(renderer: str, geometry_type: int, label: str | None) -> str:
    return ('<!DOCTYPE qgis PUBLIC \'http://mrcc.com/qgis.dtd\' \'SYSTEM\'>\n'
            '<qgis version="3.28" styleCategories="Symbology|Labeling">'
            f"{renderer}{_labels(label) if label else ''}"
            f"<layerGeometryType>{geometry_type}</layerGeometryType></qgis>\n")


def zones_qml(field: str = "dose_g_m2", label: str = "label") -> str:
    """QML of the zones: a rule-based renderer on *field* with the map's classes, no salt hatched, labels."""
    rules, symbols = [], []
    for i, (lo, hi, c, title) in enumerate(DOSE_CLASSES):
        f = f"&quot;{escape(field)}&quot;"
        expr = f"{f} &gt; {lo:g}" + (f" AND {f} &lt;= {hi:g}" if hi is not None else "")
        rules.append(f'<rule key="r{i}" symbol="{i}" label="{escape(title)}" filter="{expr}"/>')
        symbols.append(_fill_symbol(str(i), c))
    n = len(DOSE_CLASSES)
    rules.append(f'<rule key="r{n}" symbol="{n}" label="no salt (0 g/m²)" '
                 f'filter="&quot;{field}&quot; IS NULL OR &quot;{field}&quot; &lt;= 0"/>')
    symbols.append(_fill_symbol(str(n), NO_DOSE_COLOUR, style="b_diagonal", outline="#555555"))
    rules_xml = "".join(rules)
    renderer = (f'<renderer-v2 type="RuleRenderer" symbollevels="0" enableorderby="0" forceraster="0">'
                f'<rules key="root">{rules_xml}</rules><symbols>{"".join(symbols)}</symbols></renderer-v2>')
    return _qml(renderer, 2, label)


def _single(symbol: str) -> str:
    return (f'<renderer-v2 type="singleSymbol" symbollevels="0" enableorderby="0" forceraster="0">'
            f"<symbols>{symbol}</symbols></renderer-v2>")


LAYER_STYLES: dict[str, tuple[str, str]] = {
    "no_salt": ("no salt, cross-hatched", "name"),
    "crews": ("crew areas, dashed", "label"),
    "depots": ("depots, triangles", "depot"),
    "start_finish": ("start and finish", "name"),
}
"""The other styled layers: style name and the field that labels them."""


def layer_style(layer: str) -> tuple[str, str]:
    """``(SLD, QML)`` of one of :data:`LAYER_STYLES`'s layers."""
    title, label = LAYER_STYLES[layer]
    if layer == "no_salt":
        sld = _sld(layer, title, [_rule("no salt", _poly(None, stroke="#9b1c1c", width=1.0, hatch="shape://times")),
                                  _rule("name", _text(label))])
        qml = _qml(_single(_fill_symbol("0", "#9b1c1c", style="diagonal_x", outline="#9b1c1c", width=0.5)), 2,
                   label)
    elif layer == "crews":
        sld = _sld(layer, title, [_rule("crew area", _poly(None, stroke="#1b2f4a", width=1.2, dash="5 4")),
                                  _rule("label", _text(label))])
        qml = _qml(_single(_fill_symbol("0", "#1b2f4a", style="no", outline="#1b2f4a", outline_style="dash",
                                        width=0.5)), 2, label)
    elif layer == "depots":
        sld = _sld(layer, title, [_rule("depot", _point("triangle", "#111111")), _rule("depot", _text(label))])
        qml = _qml(_single(_marker_symbol("0", "triangle", "#111111")), 0, label)
    else:
        rules = [_rule(f"{n}", _point("circle", c), f"<ogc:Filter>{_cmp('PropertyIsEqualTo', 'name', n)}</ogc:Filter>")
                 for n, c in (("start", "#1a7f37"), ("finish", "#b3261e"))]
        sld = _sld(layer, title, rules + [_rule("name", _text(label))])
        cats = ('<categories><category value="start" symbol="0" label="start" render="true"/>'
                '<category value="finish" symbol="1" label="finish" render="true"/></categories>')
        symbols = _marker_symbol("0", "circle", "#1a7f37") + _marker_symbol("1", "circle", "#b3261e")
        qml = _qml(f'<renderer-v2 type="categorizedSymbol" attr="name" symbollevels="0" enableorderby="0" '
                   f'forceraster="0">{cats}<symbols>{symbols}</symbols></renderer-v2>', 0, label)
    return sld, qml
