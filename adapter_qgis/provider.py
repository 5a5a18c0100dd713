"""The strikeline Processing provider: one algorithm per step, plus the whole chain."""
from __future__ import annotations

import os

from qgis.core import Qgis, QgsMessageLog, QgsProcessingProvider
from qgis.PyQt.QtGui import QIcon

ICON_PATH = os.path.join(os.path.dirname(os.path.abspath(__file__)), "icon.svg")


class StrikelineProvider(QgsProcessingProvider):
    """Processing provider ``strikeline``."""

    ID = "strikeline"
    load_error = None  # why loadAlgorithms found no tools, if it failed

    def id(self):
        return self.ID

    def name(self):
        return "strikeline"

    def longName(self):  # noqa: N802
        from strikeline import __version__

        return f"strikeline {__version__}: 3D geometry of mapped geological contacts"

    def icon(self):
        return QIcon(ICON_PATH)

    def svgIconPath(self):  # noqa: N802
        return ICON_PATH

    def versionInfo(self):  # noqa: N802
        from strikeline import __version__

        return __version__

    def supportedOutputRasterLayerExtensions(self):  # noqa: N802
        # The library writes float32 GeoTIFFs with nodata and CRS set.
        return ["tif"]

    def defaultRasterFileExtension(self):  # noqa: N802
        return "tif"

    def loadAlgorithms(self):  # noqa: N802
        # Called from C++: an exception escaping here would abort QGIS, so a broken install
        # (say, a missing dependency of the library) is reported in the log instead.
        try:
            from .tools import ALGORITHMS
        except Exception as exc:  # noqa: BLE001
            self.load_error = f"{type(exc).__name__}: {exc}"
            QgsMessageLog.logMessage(
                f"strikeline: the tools could not be loaded ({self.load_error}); check that numpy, "
                "scipy and shapely 2 are installed for QGIS's Python", "strikeline", Qgis.Critical)
            return
        self.load_error = None
        for cls in ALGORITHMS:
            self.addAlgorithm(cls())
