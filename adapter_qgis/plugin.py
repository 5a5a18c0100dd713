"""The QGIS plugin object: registers the Processing provider while the plugin is loaded."""
from __future__ import annotations

import sys


class StrikelinePlugin:
    """What ``classFactory`` returns; QGIS calls ``initProcessing``, ``initGui`` and ``unload``.

    When QGIS's Python lacks a dependency no tool is registered, and the reason with the command
    that installs it is shown once: in the message bar (desktop), on standard error
    (``qgis_process``, no interface), and in the message log.
    """

    def __init__(self, iface):
        self.iface = iface
        self.shown = None  # the message already shown

    def initProcessing(self):  # noqa: N802 (QGIS's name)
        from . import initProcessing

        if initProcessing() is None:
            from . import LOAD_PROBLEM

            self._show(LOAD_PROBLEM)

    def _show(self, text: str) -> None:
        if not text or text == self.shown:
            return
        self.shown = text
        bar = getattr(self.iface, "messageBar", None)
        if bar is None:
            print(text, file=sys.stderr)
            return
        from qgis.core import Qgis

        bar().pushMessage("strikeline", text, Qgis.Critical, 0)  # stays until closed

    def initGui(self):  # noqa: N802
        self.initProcessing()

    def unload(self):
        from . import unloadProcessing

        unloadProcessing()
