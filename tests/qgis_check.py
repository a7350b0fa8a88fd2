"""Open a walls.gpkg in a real QGIS and report what QGIS sees, as JSON on stdout.

Run by Debian's own interpreter (``/usr/bin/python3``, which has ``python3-qgis``), never by
the project's: ``QT_QPA_PLATFORM=offscreen /usr/bin/python3 tests/qgis_check.py walls.gpkg
out.png [size]``. For each layer: valid or not, geometry type, feature count, the renderer QGIS
applied on opening (its type, field and categories), and the saved styles QGIS lists; for the
spatial layers together, one PNG rendered by QGIS's own map renderer. The SLD of every saved
style is also read back by QGIS. The tests (tests/test_gis.py) make the assertions.
"""

from __future__ import annotations

import json
import os
import sqlite3
import sys
from pathlib import Path

from qgis.core import (  # type: ignore[import-not-found]
    NULL,
    Qgis,
    QgsApplication,
    QgsMapRendererParallelJob,
    QgsMapSettings,
    QgsRectangle,
    QgsVectorLayer,
    QgsWkbTypes,
)
from qgis.PyQt.QtCore import QSize  # type: ignore[import-not-found]
from qgis.PyQt.QtGui import QColor  # type: ignore[import-not-found]
from qgis.PyQt.QtXml import QDomDocument  # type: ignore[import-not-found]


def describe(layer: QgsVectorLayer) -> dict:
    info = {
        "valid": layer.isValid(),
        "geometry": QgsWkbTypes.displayString(layer.wkbType()),
        "spatial": layer.isSpatial(),
        "features": layer.featureCount(),
        "fields": [f.name() for f in layer.fields()],
    }
    if not layer.isSpatial():
        return info
    renderer = layer.renderer()
    info["renderer"] = renderer.type()
    if renderer.type() == "categorizedSymbol":
        info["field"] = renderer.classAttribute()
        info["categories"] = [
            {"value": str(c.value()), "label": c.label(), "colour": c.symbol().color().name()}
            for c in renderer.categories()
        ]
    # QGIS gives a NULL field as a NULL QVariant (or None, depending on the PyQt build)
    info["null_fields"] = {
        name: sum(1 for f in layer.getFeatures() if f[name] is None or f.attribute(name) == NULL)
        for name in ("margin_class", "utilisation_capped", "priority_band")
    }
    info["margin_classes"] = sorted({int(f["margin_class"]) for f in layer.getFeatures()})
    info["wall_ids"] = [f["wall_id"] for f in layer.getFeatures()]
    count, ids, names, _descriptions, _error = layer.listStylesInDatabase()
    info["saved_styles"] = list(names[:count])  # the first `count` belong to this layer
    info["styles"] = {}
    for style_id, name in zip(ids[:count], names[:count], strict=True):
        info["styles"][name] = {
            "qml": _qml_renderer(layer, style_id),
            "sld": _sld_rules(layer.source(), name),
        }
    return info


def _qml_renderer(layer: QgsVectorLayer, style_id: str) -> dict:
    """Apply a saved style's QML to a copy of the layer; the renderer it gives."""
    probe = QgsVectorLayer(layer.source(), "probe", "ogr")
    document = QDomDocument()
    document.setContent(layer.getStyleFromDatabase(style_id)[0])
    ok, message = probe.importNamedStyle(document)
    renderer = probe.renderer()
    out = {"ok": ok, "message": message, "renderer": renderer.type()}
    if renderer.type() == "categorizedSymbol":
        out["field"] = renderer.classAttribute()
        out["values"] = [str(c.value()) for c in renderer.categories()]
    return out


def _sld_rules(source: str, style_name: str) -> dict:
    """Read a saved style's SLD (from the table, with sqlite3) into QGIS; the rules it gives."""
    path, layer_name = source.split("|layername=")
    con = sqlite3.connect(path)
    try:
        text = con.execute(
            "SELECT styleSLD FROM layer_styles WHERE f_table_name = ? AND styleName = ?",
            (layer_name, style_name),
        ).fetchone()[0]
    finally:
        con.close()
    probe = QgsVectorLayer(source, "probe", "ogr")
    document = QDomDocument()
    document.setContent(text, True)
    ok = probe.readSld(document.documentElement().firstChildElement("NamedLayer"), "")
    renderer = probe.renderer()
    rules = renderer.rootRule().children() if renderer.type() == "RuleRenderer" else []
    return {
        "ok": bool(ok),
        "renderer": renderer.type(),
        "filters": [r.filterExpression() for r in rules],
        "colours": [r.symbol().color().name() for r in rules],
    }


def layout_png(layers: list[QgsVectorLayer], png: Path, title: str) -> None:
    """A print layout of QGIS's own: the map in Web Mercator, the legend of the styles, a title."""
    from qgis.core import (  # type: ignore[import-not-found]
        QgsCoordinateReferenceSystem,
        QgsCoordinateTransform,
        QgsLayoutExporter,
        QgsLayoutItemLabel,
        QgsLayoutItemLegend,
        QgsLayoutItemPicture,
        QgsLayoutPoint,
        QgsLayoutSize,
        QgsPrintLayout,
        QgsProject,
        QgsUnitTypes,
    )
    from qgis.PyQt.QtGui import QFont  # type: ignore[import-not-found]

    project = QgsProject.instance()
    project.addMapLayers(layers)
    mercator = QgsCoordinateReferenceSystem("EPSG:3857")
    project.setCrs(mercator)
    layout = QgsPrintLayout(project)
    layout.initializeDefaults()
    page = layout.pageCollection().page(0)
    page.setPageSize(QgsLayoutSize(250, 150, QgsUnitTypes.LayoutMillimeters))
    mm = QgsUnitTypes.LayoutMillimeters
    label = QgsLayoutItemLabel(layout)
    label.setText(title)
    label.setFont(QFont("DejaVu Sans", 13))
    label.attemptMove(QgsLayoutPoint(6, 4, mm))
    label.attemptResize(QgsLayoutSize(228, 9, mm))
    layout.addLayoutItem(label)
    # the map drawn by QGIS's map renderer (a layout map item draws nothing offscreen in 3.22),
    # placed in the layout as a picture; the legend is the layout's own
    extent = QgsRectangle()
    for layer in layers:
        if layer.featureCount():
            to_map = QgsCoordinateTransform(layer.crs(), mercator, project)
            extent.combineExtentWith(to_map.transformBoundingBox(layer.extent()))
    extent.scale(1.08)
    width = 1500
    height = int(width * extent.height() / extent.width())
    drawn = png.with_name(png.stem + "-map.png")
    render(layers, drawn, width, height, mercator, extent, dpi=width / (150 / 25.4))  # 150 mm wide
    page.setPageSize(QgsLayoutSize(250, 20 + 150 * height / width, mm))
    picture = QgsLayoutItemPicture(layout)
    picture.setPicturePath(str(drawn))
    picture.attemptMove(QgsLayoutPoint(6, 14, mm))
    picture.attemptResize(QgsLayoutSize(150, 150 * height / width, mm))
    picture.setFrameEnabled(True)
    layout.addLayoutItem(picture)
    legend = QgsLayoutItemLegend(layout)
    legend.setTitle("Priority band")
    legend.setAutoUpdateModel(True)
    legend.attemptMove(QgsLayoutPoint(162, 14, mm))
    layout.addLayoutItem(legend)
    settings = QgsLayoutExporter.ImageExportSettings()
    settings.dpi = 110
    QgsLayoutExporter(layout).exportToImage(str(png), settings)


def render(
    layers: list[QgsVectorLayer], png: Path, width: int, height: int, crs=None, extent=None, dpi=96.0
) -> None:
    """One PNG from QGIS's own map renderer, white background."""
    settings = QgsMapSettings()
    settings.setOutputDpi(dpi)
    settings.setLayers(layers)
    settings.setBackgroundColor(QColor(255, 255, 255))
    settings.setOutputSize(QSize(width, height))
    settings.setDestinationCrs(crs or layers[0].crs())
    if extent is None:
        extent = QgsRectangle()
        for layer in layers:
            if layer.featureCount():
                extent.combineExtentWith(layer.extent())
        extent.scale(1.05)
    settings.setExtent(extent)
    job = QgsMapRendererParallelJob(settings)
    job.start()
    job.waitForFinished()
    job.renderedImage().save(str(png), "PNG")


def main() -> None:
    gpkg, png = Path(sys.argv[1]), Path(sys.argv[2])
    size = int(sys.argv[3]) if len(sys.argv) > 3 else 800
    app = QgsApplication([], False)
    app.initQgis()
    report: dict = {"qgis": Qgis.QGIS_VERSION}
    layers = {}
    for name in ("walls_lines", "walls_points", "walls_unlocated"):
        layer = QgsVectorLayer(f"{gpkg}|layername={name}", name, "ogr")
        layers[name] = layer
        report[name] = describe(layer)
    spatial = [layers["walls_points"], layers["walls_lines"]]  # points drawn over lines
    if len(sys.argv) > 4:  # a title: the README's picture, as a print layout with a legend
        layout_png(spatial, png, sys.argv[4])
    else:
        render(spatial, png, size, size)
    print(json.dumps(report), flush=True)
    # QGIS 3.22 can crash while tearing down the application with layers alive in Python; the
    # report is out, so leave without the teardown
    os._exit(0)


if __name__ == "__main__":
    main()
