"""What every strikeline Processing tool shares: names, help, feedback and error handling."""
from __future__ import annotations

from qgis.core import QgsProcessingAlgorithm, QgsProcessingException
from qgis.PyQt.QtCore import QCoreApplication
from qgis.PyQt.QtGui import QIcon

from strikeline import CAUTION
from strikeline.errors import CancelledError, StrikelineError

from .provider import ICON_PATH

#: Group id -> display name. Tools are grouped by the step of the chain they belong to.
GROUPS = {
    "chain": "Whole chain",
    "picks": "Picks and attitudes",
    "surfaces": "Surface models",
    "maps": "Maps from a surface",
    "thickness": "Thickness",
}

CONVENTIONS = (
    "Dip direction is 0–360° clockwise from grid north of the layer CRS (not true or magnetic "
    "north); dip is 0–90° down from horizontal; strike follows the right-hand rule (strike = dip "
    "direction − 90°, the layer dips to the right when facing along strike); normals point up. "
    "All inputs must be in a projected CRS in metres: layers in another projected CRS are "
    "reprojected to the DEM's CRS (or the contacts' CRS without a DEM), a geographic CRS is refused."
)

REF_FERNANDEZ = ("Fernández, O. (2005). Obtaining a best fitting plane through 3D georeferenced "
                 "data. Journal of Structural Geology 27(5), 855–858. doi:10.1016/j.jsg.2004.12.004")
REF_ZT = ("Zevenbergen, L. W. & Thorne, C. R. (1987). Quantitative analysis of land surface "
          "topography. Earth Surface Processes and Landforms 12(1), 47–56. doi:10.1002/esp.3290120107")
REF_PRESS = ("Press, W. H., Teukolsky, S. A., Vetterling, W. T. & Flannery, B. P. (2007). Numerical "
             "Recipes, 3rd ed., Cambridge University Press, §3.6 (bilinear interpolation).")
REF_STR = ("Leutenegger, S. T., Lopez, M. A. & Edgington, J. (1997). STR: a simple and efficient "
           "algorithm for R-tree packing. Proc. 13th Int. Conf. on Data Engineering, 497–506. "
           "doi:10.1109/ICDE.1997.582015")
REF_GDAL_CONTOUR = ("GDAL/OGR contributors. GDAL/OGR Geospatial Data Abstraction software Library, "
                    "Open Source Geospatial Foundation, https://gdal.org (contour generator).")


class Steps:
    """The library's callbacks, bound to a Processing feedback object.

    ``log`` sends library messages to the feedback log (lines starting with ``warning:`` as
    warnings), ``part(lo, hi)`` makes a ``progress(fraction)`` callable for one stage of the
    tool, and ``is_cancelled`` is the feedback's own ``isCanceled``.
    """

    def __init__(self, feedback):
        self.feedback = feedback
        self.is_cancelled = feedback.isCanceled

    def log(self, message: str) -> None:
        if message.startswith("warning:"):
            self.feedback.pushWarning(message[len("warning:"):].strip())
        else:
            self.feedback.pushInfo(message)

    def warn(self, message: str) -> None:
        self.feedback.pushWarning(message)

    def part(self, lo: float, hi: float):
        fb = self.feedback

        def progress(fraction: float) -> None:
            fb.setProgress(100.0 * (lo + (hi - lo) * min(max(float(fraction), 0.0), 1.0)))

        return progress

    def check(self, what: str = "cancelled") -> None:
        if self.is_cancelled():
            raise CancelledError(f"{what}: cancelled; nothing was written")


class StrikelineAlgorithm(QgsProcessingAlgorithm):
    """Base of the strikeline tools.

    Subclasses set the class attributes below, declare parameters in ``initAlgorithm`` and do
    their work in ``process(parameters, context, steps)``, which reads inputs, calls the
    library and writes outputs. Library errors become ``QgsProcessingException`` with the
    library's own message.
    """

    NAME = ""
    DISPLAY = ""
    GROUP = "picks"
    SUMMARY = ""
    METHOD = ""
    REFERENCES: tuple = ()
    FORECAST = False  # True for tools whose outputs are forecasts (carry the caution)

    def name(self):
        return self.NAME

    def displayName(self):  # noqa: N802
        return self.tr(self.DISPLAY)

    def group(self):
        return self.tr(GROUPS[self.GROUP])

    def groupId(self):  # noqa: N802
        return self.GROUP

    def icon(self):
        return QIcon(ICON_PATH)

    def svgIconPath(self):  # noqa: N802
        return ICON_PATH

    def tr(self, text):
        return QCoreApplication.translate("strikeline", text)

    def createInstance(self):  # noqa: N802
        return type(self)()

    def shortHelpString(self):  # noqa: N802
        parts = [f"<p>{self.tr(self.SUMMARY)}</p>"]
        if self.METHOD:
            parts.append(f"<p><b>{self.tr('Method')}.</b> {self.tr(self.METHOD)}</p>")
        parts.append(f"<p><b>{self.tr('Conventions')}.</b> {self.tr(CONVENTIONS)}</p>")
        if self.REFERENCES:
            refs = "".join(f"<li>{r}</li>" for r in self.REFERENCES)
            parts.append(f"<p><b>{self.tr('References')}</b></p><ul>{refs}</ul>")
        if self.FORECAST:
            parts.append(f"<p><i>{self.tr(CAUTION)}</i></p>")
        return "".join(parts)

    def processAlgorithm(self, parameters, context, feedback):  # noqa: N802
        steps = Steps(feedback)
        try:
            results = self.process(parameters, context, steps)
        except StrikelineError as exc:
            raise QgsProcessingException(str(exc)) from None
        if self.FORECAST:
            feedback.pushInfo(CAUTION)
        return results

    def process(self, parameters, context, steps: Steps) -> dict:
        raise NotImplementedError(f"{type(self).__name__} must implement process()")
