"""Styles for the GeoPackage's ``layer_styles`` table: the zones coloured by dose, labelled.

``layer_styles`` is the GeoPackage extension desktop GIS reads the default style of a layer from
(columns ``f_table_catalog``, ``f_table_schema``, ``f_table_name``, ``f_geometry_column``,
``styleName``, ``styleQML``, ``styleSLD``, ``useAsDefault``, ``description``, ``owner``, ``ui``,
``update_time``).  This module only builds the text: an OGC Symbology Encoding 1.1 SLD and a QML
document with the same fixed dose classes, fills and zone labels.  Pure: data in, str out.
"""

from __future__ import annotations

from xml.sax.saxutils import escape

DOSE_CLASSES: tuple[tuple[float, float | None, str], ...] = (
    (0.0, 50.0, "#ffffcc"),
    (50.0, 100.0, "#c7e9b4"),
    (100.0, 200.0, "#7fcdbb"),
    (200.0, 300.0, "#41b6c4"),
    (300.0, 500.0, "#2c7fb8"),
    (500.0, None, "#253494"),
)
"""Fixed classes of ``dose_g_m2`` [g/m²]: lower bound (inclusive), upper bound (exclusive; None =
open) and fill colour.  Fixed, not data-driven, so that two plans' maps compare at a glance."""

NO_DOSE_COLOUR = "#d9d9d9"
"""Fill of zones without a dose (NaN: no hardening in the verdict)."""


def class_label(lo: float, hi: float | None) -> str:
    """Legend text of a dose class, e.g. ``50–100 g/m²`` or ``≥ 500 g/m²``."""
    return f"≥ {lo:g} g/m²" if hi is None else f"{lo:g}–{hi:g} g/m²"


def _se_rule(title: str, filt: str, colour: str) -> str:
    return (f"<se:Rule><se:Name>{escape(title)}</se:Name><se:Description><se:Title>{escape(title)}</se:Title>"
            f"</se:Description>{filt}<se:PolygonSymbolizer><se:Fill>"
            f'<se:SvgParameter name="fill">{colour}</se:SvgParameter></se:Fill><se:Stroke>'
            '<se:SvgParameter name="stroke">#333333</se:SvgParameter>'
            '<se:SvgParameter name="stroke-width">0.5</se:SvgParameter></se:Stroke>'
            "</se:PolygonSymbolizer></se:Rule>")


def _between(field: str, lo: float, hi: float | None) -> str:
    ge = (f"<ogc:PropertyIsGreaterThanOrEqualTo><ogc:PropertyName>{field}</ogc:PropertyName>"
          f"<ogc:Literal>{lo:g}</ogc:Literal></ogc:PropertyIsGreaterThanOrEqualTo>")
    if hi is None:
        return f"<ogc:Filter>{ge}</ogc:Filter>"
    lt = (f"<ogc:PropertyIsLessThan><ogc:PropertyName>{field}</ogc:PropertyName>"
          f"<ogc:Literal>{hi:g}</ogc:Literal></ogc:PropertyIsLessThan>")
    return f"<ogc:Filter><ogc:And>{ge}{lt}</ogc:And></ogc:Filter>"


def zones_sld(layer: str = "zones", field: str = "dose_g_m2", label: str = "label") -> str:
    """SLD 1.1 of the zones: one rule per dose class, a grey rule for no dose, zone labels."""
    rules = [_se_rule(class_label(lo, hi), _between(field, lo, hi), c) for lo, hi, c in DOSE_CLASSES]
    rules.append(_se_rule("no dose", f"<ogc:Filter><ogc:PropertyIsNull><ogc:PropertyName>{field}"
                                     "</ogc:PropertyName></ogc:PropertyIsNull></ogc:Filter>", NO_DOSE_COLOUR))
    text = ("<se:Rule><se:Name>zone label</se:Name><se:TextSymbolizer><se:Label>"
            f"<ogc:PropertyName>{label}</ogc:PropertyName></se:Label><se:Font>"
            '<se:SvgParameter name="font-family">Sans-Serif</se:SvgParameter>'
            '<se:SvgParameter name="font-size">11</se:SvgParameter></se:Font>'
            '<se:Halo><se:Radius>1.5</se:Radius><se:Fill><se:SvgParameter name="fill">#ffffff</se:SvgParameter>'
            '</se:Fill></se:Halo><se:Fill><se:SvgParameter name="fill">#000000</se:SvgParameter></se:Fill>'
            "</se:TextSymbolizer></se:Rule>")
    return ('<?xml version="1.0" encoding="UTF-8"?>\n'
            '<StyledLayerDescriptor xmlns="http://www.opengis.net/sld" xmlns:ogc="http://www.opengis.net/ogc" '
            'xmlns:se="http://www.opengis.net/se" xmlns:xlink="http://www.w3.org/1999/xlink" '
            'xmlns:xsi="http://www.w3.org/2001/XMLSchema-instance" version="1.1.0" '
            'xsi:schemaLocation="http://www.opengis.net/sld http://schemas.opengis.net/sld/1.1.0/'
            'StyledLayerDescriptor.xsd">'
            f"<NamedLayer><se:Name>{escape(layer)}</se:Name><UserStyle><se:Name>{escape(layer)} by dose</se:Name>"
            f"<se:FeatureTypeStyle>{''.join(rules)}{text}</se:FeatureTypeStyle></UserStyle></NamedLayer>"
            "</StyledLayerDescriptor>\n")


def _rgba(hex_colour: str) -> str:
    h = hex_colour.lstrip("#")
    return ",".join(str(int(h[i:i + 2], 16)) for i in (0, 2, 4)) + ",255"


def _qml_symbol(name: int, colour: str) -> str:
    return (f'<symbol type="fill" name="{name}" alpha="1" clip_to_extent="1" force_rhr="0">'
            '<layer class="SimpleFill" enabled="1" locked="0" pass="0">'
            f'<prop k="color" v="{_rgba(colour)}"/><prop k="outline_color" v="51,51,51,255"/>'
            '<prop k="outline_style" v="solid"/><prop k="outline_width" v="0.26"/>'
            '<prop k="outline_width_unit" v="MM"/><prop k="style" v="solid"/></layer></symbol>')


def zones_qml(field: str = "dose_g_m2", label: str = "label", open_top: float = 10000.0) -> str:
    """QML of the zones: a graduated renderer on *field* with the fixed classes, zone labels.

    The open top class is written as ``[500, open_top)`` because a graduated range needs an upper
    bound; *open_top* lies above any dose the model gives.
    """
    ranges, symbols = [], []
    for i, (lo, hi, c) in enumerate(DOSE_CLASSES):
        up = open_top if hi is None else hi
        ranges.append(f'<range lower="{lo:g}" upper="{up:g}" symbol="{i}" label="{escape(class_label(lo, hi))}" '
                      'render="true"/>')
        symbols.append(_qml_symbol(i, c))
    return ('<!DOCTYPE qgis PUBLIC \'http://mrcc.com/qgis.dtd\' \'SYSTEM\'>\n'
            '<qgis version="3.28" styleCategories="Symbology|Labeling">'
            f'<renderer-v2 type="graduatedSymbol" attr="{escape(field)}" graduatedMethod="GraduatedColor" '
            'symbollevels="0" enableorderby="0" forceraster="0">'
            f"<ranges>{''.join(ranges)}</ranges><symbols>{''.join(symbols)}</symbols>"
            f"<source-symbol>{_qml_symbol(0, NO_DOSE_COLOUR)}</source-symbol>"
            '<mode name="fixed"/></renderer-v2>'
            '<labeling type="simple"><settings calloutType="simple">'
            f'<text-style fieldName="{escape(label)}" isExpression="0" fontSize="9" fontFamily="Sans Serif" '
            'textColor="0,0,0,255"><text-buffer bufferDraw="1" bufferSize="1" bufferColor="255,255,255,255"/>'
            '</text-style><placement placement="1"/></settings></labeling>'
            "<layerGeometryType>2</layerGeometryType></qgis>\n")
