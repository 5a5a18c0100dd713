"""The QGIS plugin object: registers the Processing provider while the plugin is loaded."""
from __future__ import annotations


class StrikelinePlugin:
    """What ``classFactory`` returns; QGIS calls ``initProcessing``, ``initGui`` and ``unload``."""

    def __init__(self, iface):
        self.iface = iface

    def initProcessing(self):  # noqa: N802 (QGIS's name)
        from . import initProcessing

        initProcessing()

    def initGui(self):  # noqa: N802
        self.initProcessing()

    def unload(self):
        from . import unloadProcessing

        unloadProcessing()
