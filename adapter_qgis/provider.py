"""The strikeline Processing provider: one algorithm per step, plus the whole chain."""
from __future__ import annotations

import os

from qgis.core import QgsProcessingProvider
from qgis.PyQt.QtGui import QIcon

ICON_PATH = os.path.join(os.path.dirname(os.path.abspath(__file__)), "icon.svg")


class StrikelineProvider(QgsProcessingProvider):
    """Processing provider ``strikeline``."""

    ID = "strikeline"

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
        from .tools import ALGORITHMS

        for cls in ALGORITHMS:
            self.addAlgorithm(cls())
