"""Saved styles for the GeoPackage layers: QML and SLD documents, written by our own code.

A GIS that reads the GeoPackage ``layer_styles`` table (QGIS does, as the layer's default style)
opens the walls coloured by priority band; a second saved style colours them by margin class.
The colours and words are the web map's and the workbook's, so every output reads alike.
Nothing from the register reaches these documents: only our own band and class names.
"""

from __future__ import annotations

import xml.etree.ElementTree as ET
from collections.abc import Sequence
from dataclasses import dataclass

from screening.outputs.webmap import MARGIN_CLASSES, OVERTURNS_TEXT, margin_colours
from screening.outputs.workbook import BAND_COLOURS
from screening.priority import BAND_LABELS, BANDS

LINE_WIDTH_MM = 1.4
POINT_SIZE_MM = 3.6
OUTLINE = "#333333"


@dataclass(frozen=True)
class Category:
    """One class of a categorised style: the field's value, its colour and its legend text."""

    value: str
    colour: str
    label: str


@dataclass(frozen=True)
class Style:
    """A saved style: a categorised renderer on one field, most critical walls drawn on top."""

    name: str
    description: str
    field: str
    order_by: str
    categories: Sequence[Category]


def band_style() -> Style:
    """The default style: colour by priority band."""
    return Style(
        name="priority band",
        description="Walls coloured by priority band (screening aid; review by a qualified engineer)",
        field="priority_band",
        order_by="priority_score",
        categories=[Category(b, BAND_COLOURS[b], BAND_LABELS[b]) for b in BANDS],
    )


def margin_style() -> Style:
    """The second style: colour by margin class of the worst case (the web map's classes)."""
    labels = [c[2] for c in MARGIN_CLASSES] + [OVERTURNS_TEXT]
    return Style(
        name="margin",
        description="Walls coloured by margin class of the worst case (0 most margin, 4 overturns)",
        field="margin_class",
        order_by="utilisation_capped",
        categories=[
            Category(str(i), colour, f"{i}: {label}")
            for i, (colour, label) in enumerate(zip(margin_colours(), labels, strict=True))
        ],
    )


def _rgba(colour: str) -> str:
    h = colour.lstrip("#")
    return ",".join(str(int(h[i : i + 2], 16)) for i in (0, 2, 4)) + ",255"


def _props(parent: ET.Element, props: dict[str, str]) -> None:
    for k, v in props.items():
        ET.SubElement(parent, "prop", k=k, v=v)


def _qml_symbol(parent: ET.Element, index: int, colour: str, geometry: str) -> None:
    kind = "line" if geometry == "line" else "marker"
    symbol = ET.SubElement(
        parent, "symbol", type=kind, name=str(index), alpha="1", clip_to_extent="1", force_rhr="0"
    )
    if kind == "line":
        layer = ET.SubElement(symbol, "layer", {"class": "SimpleLine", "enabled": "1", "locked": "0"})
        _props(
            layer,
            {
                "line_color": _rgba(colour),
                "line_width": str(LINE_WIDTH_MM),
                "line_width_unit": "MM",
                "line_style": "solid",
                "capstyle": "round",
                "joinstyle": "round",
            },
        )
    else:
        layer = ET.SubElement(symbol, "layer", {"class": "SimpleMarker", "enabled": "1", "locked": "0"})
        _props(
            layer,
            {
                "name": "circle",
                "color": _rgba(colour),
                "outline_color": _rgba(OUTLINE),
                "outline_width": "0.2",
                "outline_width_unit": "MM",
                "size": str(POINT_SIZE_MM),
                "size_unit": "MM",
            },
        )


def qml(style: Style, geometry: str) -> str:
    """The style as a QGIS layer style document (QML) for a ``"line"`` or ``"point"`` layer."""
    root = ET.Element("qgis", version="3.22.0", styleCategories="Symbology")
    renderer = ET.SubElement(
        root,
        "renderer-v2",
        type="categorizedSymbol",
        attr=style.field,
        symbollevels="0",
        forceraster="0",
        enableorderby="1",
    )
    categories = ET.SubElement(renderer, "categories")
    symbols = ET.SubElement(renderer, "symbols")
    for i, c in enumerate(style.categories):
        ET.SubElement(categories, "category", value=c.value, symbol=str(i), label=c.label, render="true")
        _qml_symbol(symbols, i, c.colour, geometry)
    order = ET.SubElement(renderer, "orderby")
    # ascending: the most critical walls are drawn last, on top
    clause = ET.SubElement(order, "orderByClause", asc="1", nullsFirst="1")
    clause.text = f'"{style.order_by}"'
    body = ET.tostring(root, encoding="unicode")
    return "<!DOCTYPE qgis PUBLIC 'http://mrcc.com/qgis.dtd' 'SYSTEM'>\n" + body


SLD = "http://www.opengis.net/sld"
SE = "http://www.opengis.net/se"
OGC = "http://www.opengis.net/ogc"


def _svg(parent: ET.Element, name: str, value: str) -> None:
    ET.SubElement(parent, f"{{{SE}}}SvgParameter", name=name).text = value


def _sld_symbolizer(rule: ET.Element, colour: str, geometry: str) -> None:
    if geometry == "line":
        stroke = ET.SubElement(ET.SubElement(rule, f"{{{SE}}}LineSymbolizer"), f"{{{SE}}}Stroke")
        _svg(stroke, "stroke", colour)
        _svg(stroke, "stroke-width", f"{LINE_WIDTH_MM * 3.78:.0f}")  # px at 96 dpi
        _svg(stroke, "stroke-linecap", "round")
        return
    graphic = ET.SubElement(ET.SubElement(rule, f"{{{SE}}}PointSymbolizer"), f"{{{SE}}}Graphic")
    mark = ET.SubElement(graphic, f"{{{SE}}}Mark")
    ET.SubElement(mark, f"{{{SE}}}WellKnownName").text = "circle"
    _svg(ET.SubElement(mark, f"{{{SE}}}Fill"), "fill", colour)
    stroke = ET.SubElement(mark, f"{{{SE}}}Stroke")
    _svg(stroke, "stroke", OUTLINE)
    _svg(stroke, "stroke-width", "1")
    ET.SubElement(graphic, f"{{{SE}}}Size").text = f"{POINT_SIZE_MM * 3.78:.0f}"


def sld(style: Style, layer: str, geometry: str) -> str:
    """The style as an OGC Styled Layer Descriptor 1.1 (Symbology Encoding) document."""
    ET.register_namespace("", SLD)
    ET.register_namespace("se", SE)
    ET.register_namespace("ogc", OGC)
    root = ET.Element(f"{{{SLD}}}StyledLayerDescriptor", version="1.1.0")
    named = ET.SubElement(root, f"{{{SLD}}}NamedLayer")
    ET.SubElement(named, f"{{{SE}}}Name").text = layer
    user = ET.SubElement(named, f"{{{SLD}}}UserStyle")
    ET.SubElement(user, f"{{{SE}}}Name").text = style.name
    fts = ET.SubElement(user, f"{{{SE}}}FeatureTypeStyle")
    for c in style.categories:
        rule = ET.SubElement(fts, f"{{{SE}}}Rule")
        ET.SubElement(rule, f"{{{SE}}}Name").text = c.label
        desc = ET.SubElement(rule, f"{{{SE}}}Description")
        ET.SubElement(desc, f"{{{SE}}}Title").text = c.label
        equal = ET.SubElement(ET.SubElement(rule, f"{{{OGC}}}Filter"), f"{{{OGC}}}PropertyIsEqualTo")
        ET.SubElement(equal, f"{{{OGC}}}PropertyName").text = style.field
        ET.SubElement(equal, f"{{{OGC}}}Literal").text = c.value
        _sld_symbolizer(rule, c.colour, geometry)
    return '<?xml version="1.0" encoding="UTF-8"?>\n' + ET.tostring(root, encoding="unicode")
