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


def render(layers: list[QgsVectorLayer], png: Path, size: int) -> None:
    settings = QgsMapSettings()
    settings.setLayers(layers)
    settings.setBackgroundColor(QColor(255, 255, 255))
    settings.setOutputSize(QSize(size, size))
    settings.setDestinationCrs(layers[0].crs())
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
    render(spatial, png, size)
    print(json.dumps(report), flush=True)
    # QGIS 3.22 can crash while tearing down the application with layers alive in Python; the
    # report is out, so leave without the teardown
    os._exit(0)


if __name__ == "__main__":
    main()
