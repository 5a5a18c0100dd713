"""What every strikeline Processing tool shares: names, help, feedback and error handling."""
from __future__ import annotations

import configparser
import os
import re
import traceback

from qgis.core import (
    Qgis,
    QgsMessageLog,
    QgsProcessingAlgorithm,
    QgsProcessingException,
)
from qgis.PyQt.QtCore import QCoreApplication
from qgis.PyQt.QtGui import QIcon
from strikeline import CAUTION
from strikeline.errors import CancelledError, StrikelineError
from strikeline.pipeline.progress import RUN_STEPS, WARNING, Reporter, RunProgress

from .provider import ICON_PATH

#: Group id -> display name. Tools are grouped by the step of the chain they belong to; the
#: Processing toolbox sorts groups by their displayed name, so the number puts them in the order
#: of the work (the whole chain first, then picks, surfaces, maps, thickness).
GROUPS = {
    "chain": "1 · Whole chain",
    "picks": "2 · Picks and attitudes",
    "surfaces": "3 · Surface models",
    "maps": "4 · Maps from a surface",
    "thickness": "5 · Thickness",
}


def _metadata() -> dict:
    meta = configparser.ConfigParser(interpolation=None)
    meta.read(os.path.join(os.path.dirname(os.path.abspath(__file__)), "metadata.txt"), encoding="utf-8")
    return dict(meta["general"]) if meta.has_section("general") else {}


#: The plugin's metadata (homepage, tags, ...), read once; the help link and tags come from it.
METADATA = _metadata()
#: Where each tool's help button leads: the README's QGIS section.
HELP_URL = f"{METADATA.get('homepage', '').rstrip('/')}/README.md#in-qgis"
#: Words the toolbox search finds every tool by (the plugin's tags), besides each tool's own.
TAGS = tuple(t.strip() for t in METADATA.get("tags", "").split(",") if t.strip())

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

    def tracker(self, steps=RUN_STEPS, *, lo: float = 0.0, hi: float = 1.0) -> RunProgress:
        """The named steps of a chain (:class:`strikeline.pipeline.progress.RunProgress`) shown on
        the feedback: each step's name as the progress text, the share done of ``lo``-``hi`` as
        the progress bar, each step's timing and every message in the log."""
        return RunProgress(FeedbackReporter(self), steps=steps, progress=self.part(lo, hi),
                           is_cancelled=self.is_cancelled)


class FeedbackReporter(Reporter):
    """The library's run events on a Processing feedback (through :class:`Steps`): the step in
    progress as ``setProgressText``, its wall and CPU seconds and peak memory as a log line when
    it ends, messages as ``pushInfo`` or ``pushWarning``."""

    def __init__(self, steps: Steps):
        self.steps = steps

    def start(self, step):
        self.steps.feedback.setProgressText(f"{step.label} ({step.index}/{step.total})")

    def finish(self, step, timing):
        self.steps.feedback.pushInfo(f"step {step.index}/{step.total} {step.label}: {timing.wall_s:.2f} s, "
                                     f"CPU {timing.cpu_s:.2f} s, peak memory {timing.peak_rss_mib:.0f} MiB")

    def message(self, text, *, level="info", sheet=None):
        line = text if sheet is None else f"{sheet}: {text}"
        if level == WARNING and not line.startswith("warning:"):
            self.steps.warn(line)
        else:
            self.steps.log(line)


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
    TAGS: tuple = ()  # words of this tool for the toolbox search, besides the plugin's TAGS

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

    def tags(self):
        return [self.tr(t) for t in (*self.TAGS, *TAGS)]

    def shortDescription(self):  # noqa: N802 - the toolbox's tooltip: the summary's first sentence
        return self.tr(self.SUMMARY).split(". ")[0].rstrip(".") + "."

    def helpUrl(self):  # noqa: N802
        return HELP_URL

    def shortHelpString(self):  # noqa: N802
        # The caution comes first on forecasts: the help panel shows its top, not its foot.
        parts = [f"<p><b>{self.tr(CAUTION)}</b></p>"] if self.FORECAST else []
        parts.append(f"<p>{self.tr(self.SUMMARY)}</p>")
        if self.METHOD:
            parts.append(f"<p><b>{self.tr('Method')}.</b> {self.tr(self.METHOD)}</p>")
        parts.append(f"<p><b>{self.tr('Conventions')}.</b> {self.tr(CONVENTIONS)}</p>")
        if self.REFERENCES:
            refs = "".join(f"<li>{r}</li>" for r in self.REFERENCES)
            parts.append(f"<p><b>{self.tr('References')}</b></p><ul>{refs}</ul>")
        return "".join(parts)

    def checkParameterValues(self, parameters, context):  # noqa: N802
        """QGIS's checks, except that a raster parameter naming a file that exists but does not
        load is refused with strikeline's own one line (the file, that GDAL cannot read it as a
        raster, the fix) instead of QGIS's "... not found"."""
        ok, message = super().checkParameterValues(parameters, context)
        if not ok:
            from .inputs import unreadable_rasters

            ours = unreadable_rasters(self, parameters, context)
            if ours:
                return False, one_line(ours)
        return ok, message

    def processAlgorithm(self, parameters, context, feedback):  # noqa: N802
        """Run :meth:`process`; every failure leaves as ONE line of ``QgsProcessingException``.

        The library's errors keep their own message (as the command line prints it); anything
        else is an internal failure, named with its type and message, and its traceback goes
        to QGIS's message log (*strikeline* tab) for a bug report, not into the dialog.
        """
        steps = Steps(feedback)
        if self.FORECAST:
            feedback.pushInfo(CAUTION)
        try:
            results = self.process(parameters, context, steps)
        except StrikelineError as exc:
            raise QgsProcessingException(one_line(str(exc))) from None
        except QgsProcessingException as exc:
            raise QgsProcessingException(one_line(str(exc))) from None
        except MemoryError:
            raise QgsProcessingException(
                f"{self.displayName()}: out of memory; use a coarser cell size, a smaller extent or "
                "fewer resamples") from None
        except Exception as exc:  # noqa: BLE001 - the one place where every other failure is caught
            QgsMessageLog.logMessage(f"{self.displayName()}: internal failure:\n{traceback.format_exc()}",
                                     "strikeline", Qgis.Critical)
            raise QgsProcessingException(one_line(
                f"{self.displayName()}: internal failure ({type(exc).__name__}: {exc}); please report it "
                "with the traceback from the log's strikeline tab")) from None
        return results

    def process(self, parameters, context, steps: Steps) -> dict:
        raise NotImplementedError(f"{type(self).__name__} must implement process()")


def one_line(text: str) -> str:
    """A message on one line: its lines joined, runs of white space made one space."""
    return re.sub(r"\s+", " ", str(text)).strip()
