"""strikeline for QGIS: every step of the chain as a Processing tool.

This folder is a QGIS plugin (``classFactory``) and, for development, the package
``adapter_qgis`` importable from the repository root (the plugin zip names it
``strikeline_qgis``; all imports inside are relative). It stays thin: it turns QGIS parameters
into library inputs, calls :mod:`strikeline`, and writes QGIS outputs.

``initProcessing()`` registers the provider without a GUI (for ``qgis_process`` and scripts),
once :mod:`.deps` has found numpy, scipy, shapely 2, pyproj and GDAL's numpy bindings in QGIS's
Python; otherwise it registers nothing and logs why, with the command that installs them.
"""
from ._vendor import ensure_library

ensure_library()

_PROVIDER = None
#: Why the tools were not registered (the message of :func:`.deps.check`), or None.
LOAD_PROBLEM = None


def initProcessing():  # noqa: N802 (QGIS's name)
    """Register the strikeline Processing provider with QGIS (idempotent) and return it.

    Returns None, registering nothing, when QGIS's Python lacks a dependency of the library:
    the reason and the install command are in :data:`LOAD_PROBLEM` and QGIS's message log.
    """
    global _PROVIDER, LOAD_PROBLEM
    from qgis.core import Qgis, QgsApplication, QgsMessageLog

    from .deps import check
    from .provider import StrikelineProvider

    LOAD_PROBLEM = check()
    if LOAD_PROBLEM is not None:
        QgsMessageLog.logMessage(LOAD_PROBLEM, "strikeline", Qgis.Critical)
        return None

    registry = QgsApplication.processingRegistry()
    existing = registry.providerById(StrikelineProvider.ID)
    if existing is not None:
        _PROVIDER = existing
        return existing
    _PROVIDER = StrikelineProvider()
    registry.addProvider(_PROVIDER)
    return _PROVIDER


def unloadProcessing():  # noqa: N802
    """Remove the provider registered by :func:`initProcessing` (if any)."""
    global _PROVIDER
    from qgis.core import QgsApplication

    if _PROVIDER is not None:
        QgsApplication.processingRegistry().removeProvider(_PROVIDER)
        _PROVIDER = None


def classFactory(iface):  # noqa: N802 (QGIS's name)
    """QGIS's plugin entry point."""
    from .plugin import StrikelinePlugin

    return StrikelinePlugin(iface)
