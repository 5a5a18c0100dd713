"""Write the QML style documents that ``results.gpkg`` carries, from the adapter's own styles.

Usage (QGIS's Python; a build helper, left out of the plugin zip)::

    QT_QPA_PLATFORM=offscreen .venv-qgis/bin/python adapter_qgis/export_styles.py [--out DIR]

For every :data:`strikeline.io.gpkg_styles.STYLE_FILES` entry it makes an empty in-memory layer
with that layer's geometry and fields, applies the adapter style of :data:`styles.LAYER_STYLES`
and writes QGIS's style document (symbology, labels and rendering) to
``algorithms/styles/<stem>.qml``. The files are committed; ``tests/qgis/test_qgis_gpkg_styles.py``
regenerates them and fails when they differ, so the scheme is written once, in ``styles.py``.
Rule keys, random in QGIS, are set from the file's name so the output is the same every run.
"""
from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
REPO = HERE.parent
OUT = REPO / "algorithms" / "styles"

#: The document type line QGIS starts a style document with.
DOCTYPE = "<!DOCTYPE qgis PUBLIC 'http://mrcc.com/qgis.dtd' 'SYSTEM'>"
#: The vocabulary's geometry names as QGIS memory-layer geometry types.
GEOMETRY = {"point": "Point", "point_z": "PointZ", "line": "LineString", "line_z": "LineStringZ",
            "polygon": "Polygon"}


def _field_type(kind: str):
    from qgis.PyQt.QtCore import QVariant

    return {"real": QVariant.Double, "integer": QVariant.LongLong, "bool": QVariant.Bool,
            "text": QVariant.String}[kind]


def template_layer(style):
    """An empty memory layer with the geometry and fields ``style`` (a ``StyleFile``) was made for."""
    from qgis.core import QgsField, QgsVectorLayer

    layer = QgsVectorLayer(f"{GEOMETRY[style.layer.geometry]}?crs=EPSG:32633", style.stem, "memory")
    layer.dataProvider().addAttributes([QgsField(f, _field_type(style.layer.field(f).type))
                                        for f in style.template_fields])
    layer.updateFields()
    return layer


def style_document(style) -> str:
    """QGIS's QML of the adapter's style for ``style`` (a ``StyleFile``)."""
    from qgis.core import QgsMapLayer, QgsReadWriteContext, QgsRuleBasedRenderer
    from qgis.PyQt.QtXml import QDomDocument

    from adapter_qgis.styles import LAYER_STYLES, STYLES

    layer = template_layer(style)
    STYLES[LAYER_STYLES[style.layer.name]](layer)
    renderer = layer.renderer()
    if isinstance(renderer, QgsRuleBasedRenderer):
        for i, rule in enumerate(renderer.rootRule().descendants()):
            rule.setRuleKey(f"{style.stem}-{i}")
        renderer.rootRule().setRuleKey(f"{style.stem}-root")
    doc = QDomDocument("qgis")
    categories = QgsMapLayer.Symbology | QgsMapLayer.Labeling | QgsMapLayer.Rendering
    error = layer.exportNamedStyle(doc, QgsReadWriteContext(), categories)
    if error:
        raise RuntimeError(f"QGIS could not export the style of '{style.stem}': {error}")
    return canonical(doc.toString(1))


def canonical(qml: str) -> str:
    """``qml`` with every element's attributes in one order (W3C Canonical XML 2.0, Python's
    ``xml.etree.ElementTree.canonicalize``): QGIS writes them in hash order, different in every
    process, and keeps some symbols as XML text inside attributes, which are put in order too."""
    import xml.etree.ElementTree as ET

    root = ET.fromstring(qml)
    for el in root.iter():
        for key, value in el.attrib.items():
            if value.startswith("<"):
                try:
                    el.set(key, ET.canonicalize(value))
                except ET.ParseError:  # not XML (an expression beginning with '<')
                    pass
    return f"{DOCTYPE}\n{ET.canonicalize(ET.tostring(root, encoding='unicode'))}\n"


def export(out: Path = OUT) -> list[Path]:
    """Write every style document into ``out``; return the files written."""
    from strikeline.io.gpkg_styles import STYLE_FILES

    out.mkdir(parents=True, exist_ok=True)
    written = []
    for style in STYLE_FILES:
        path = out / style.file
        tmp = path.with_name(path.name + ".part")
        tmp.write_text(style_document(style), encoding="utf-8")
        os.replace(tmp, path)
        written.append(path)
    return written


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--out", default=str(OUT), help="folder of the .qml files (default: the library's)")
    a = ap.parse_args(argv)
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    if str(REPO) not in sys.path:
        sys.path.insert(0, str(REPO))
    from qgis.core import QgsApplication

    QgsApplication.setPrefixPath("/usr", True)
    app = QgsApplication([], False)
    app.initQgis()
    paths = export(Path(a.out))
    print(f"strikeline: {len(paths)} style documents in {a.out}")
    app.exitQgis()
    return 0


if __name__ == "__main__":
    sys.exit(main())
