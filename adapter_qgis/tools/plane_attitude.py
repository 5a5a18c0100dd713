"""Tool: the best-fit plane through elevation picks: attitude, 95% confidence and quality."""
from __future__ import annotations

import numpy as np
import shapely
from qgis.core import (
    QgsProcessing,
    QgsProcessingOutputNumber,
    QgsProcessingOutputString,
    QgsProcessingParameterDefinition,
    QgsProcessingParameterFeatureSink,
    QgsProcessingParameterNumber,
    QgsWkbTypes,
)

from strikeline.diagnostics import assess_plane
from strikeline.errors import InputError
from strikeline.fitting import fit_plane
from strikeline.uncertainty import plane_confidence

from ..base import REF_FERNANDEZ, StrikelineAlgorithm
from ..inputs import add_picks, read_picks
from ..outputs import Table, write_sink
from ..styles import attach_style

REF_WOODCOCK = ("Woodcock, N. H. (1977). Specification of fabric shapes using an eigenvalue method. "
                "Geological Society of America Bulletin 88(9), 1231–1236. "
                "doi:10.1130/0016-7606(1977)88<1231:SOFSUA>2.0.CO;2")
REF_JONES = ("Jones, R. R., Pearce, M. A., Jacquemyn, C. & Watson, F. E. (2016). Robust best-fit "
             "planes from geospatial data. Geosphere 12(1), 196–202. doi:10.1130/GES01247.1")
REF_EFRON = ("Efron, B. & Tibshirani, R. J. (1993). An Introduction to the Bootstrap. Chapman & "
             "Hall, New York (percentile intervals).")

NUMBERS = (("DIP_DEG", "Dip (°)"), ("DIP_DIRECTION_DEG", "Dip direction (° from grid north)"),
           ("STRIKE_RHR_DEG", "Strike, right-hand rule (°)"), ("RMS_M", "RMS orthogonal residual (m)"),
           ("N_PICKS", "Picks used"))
CONFIDENCE_NUMBERS = (("DIP_CI95_DEG", "Dip, 95% half-width (°)"),
                      ("DIP_DIRECTION_CI95_DEG", "Dip direction, 95% half-width (°)"),
                      ("CONE95_DEG", "95% confidence cone of the pole (°)"),
                      ("COPLANARITY_M", "Coplanarity M (Woodcock)"),
                      ("COLLINEARITY_K", "Collinearity K (Woodcock)"))


def fit_named(xyz, what: str):
    """The library's plane fit; its errors name the picks layer (as ``pipeline.fit_picks``)."""
    try:
        return fit_plane(xyz)
    except InputError as exc:
        raise type(exc)(f"{what}: {exc}") from None


def plane_numbers(plane) -> dict:
    return {"DIP_DEG": plane.dip_deg, "DIP_DIRECTION_DEG": plane.dip_direction_deg,
            "STRIKE_RHR_DEG": plane.strike_rhr_deg, "RMS_M": plane.rms_m, "N_PICKS": plane.n_points}


def add_plane_outputs(alg) -> None:
    for key, label in NUMBERS:
        alg.addOutput(QgsProcessingOutputNumber(key, alg.tr(label)))


def log_plane(steps, plane) -> None:
    steps.log(f"best-fit plane: dip {plane.dip_deg:.2f}° toward {plane.dip_direction_deg:.1f}° "
              f"(strike {plane.strike_rhr_deg:.1f}° RHR), RMS residual {plane.rms_m:.2f} m "
              f"from {plane.n_points} picks")


def report_quality(steps, quality) -> None:
    """Quality to the log: ``undetermined`` as a warning with the advice, ``weak`` as a warning."""
    line = f"plane quality {quality.quality}: {quality.reason}"
    if quality.quality == "good":
        steps.log(line)
    else:
        steps.warn(f"{line}; {quality.advice}" if quality.advice else line)


class PlaneAttitude(StrikelineAlgorithm):
    NAME = "planeattitude"
    DISPLAY = "Best-fit plane attitude"
    GROUP = "picks"
    SUMMARY = (
        "Dip, dip direction and right-hand-rule strike of the plane that fits the elevation picks "
        "best, with the RMS orthogonal residual, 95% confidence half-widths (bootstrap over the picks, "
        "plus a Monte Carlo of the picks' vertical error when it is given) and a quality verdict "
        "(good / weak / undetermined, with the reason and what data would help). The output is one "
        "point at the picks' centroid carrying all of it, and the numbers as outputs for a model. "
        "Exactly three picks give the three-point solution; fewer, or picks all on one line, are "
        "refused with what data would help.")
    METHOD = (
        "Total least squares: the plane passes through the centroid of the picks and its normal is "
        "the eigenvector of the smallest eigenvalue of their scatter matrix. Confidence: percentile "
        "bootstrap of the picks (and Monte Carlo of the vertical error). Quality: Woodcock's "
        "eigenvalue shape measures (coplanarity M, collinearity K) with Fernández's limits for a "
        "reliable plane, the picks' relief and the dip's half-width.")
    REFERENCES = (REF_FERNANDEZ, REF_WOODCOCK, REF_JONES, REF_EFRON)
    OUTPUT = "ATTITUDE"
    RESAMPLES = "RESAMPLES"
    SIGMA_Z = "SIGMA_Z"
    SEED = "SEED"

    def initAlgorithm(self, config=None):  # noqa: N802
        add_picks(self)
        self.addParameter(QgsProcessingParameterNumber(
            self.RESAMPLES, self.tr("Bootstrap resamples for the 95% confidence (0: none)"),
            QgsProcessingParameterNumber.Integer, defaultValue=1000, minValue=0, optional=True))
        self.addParameter(QgsProcessingParameterNumber(
            self.SIGMA_Z, self.tr("Vertical standard error of the picks (m, 0: unknown)"),
            QgsProcessingParameterNumber.Double, defaultValue=0.0, minValue=0.0, optional=True))
        seed = QgsProcessingParameterNumber(self.SEED, self.tr("Random seed"),
                                            QgsProcessingParameterNumber.Integer, defaultValue=0, minValue=0,
                                            optional=True)
        seed.setFlags(seed.flags() | QgsProcessingParameterDefinition.FlagAdvanced)
        self.addParameter(seed)
        self.addParameter(QgsProcessingParameterFeatureSink(
            self.OUTPUT, self.tr("Plane attitude"), QgsProcessing.TypeVectorPoint))
        add_plane_outputs(self)
        for key, label in CONFIDENCE_NUMBERS:
            self.addOutput(QgsProcessingOutputNumber(key, self.tr(label)))
        self.addOutput(QgsProcessingOutputString("QUALITY", self.tr("Quality (good, weak, undetermined)")))
        self.addOutput(QgsProcessingOutputString("QUALITY_REASON", self.tr("Reason for the quality")))

    def process(self, parameters, context, steps):
        xyz, source, name = read_picks(self, parameters, context, steps)
        n_resamples = self.parameterAsInt(parameters, self.RESAMPLES, context)
        sigma = self.parameterAsDouble(parameters, self.SIGMA_Z, context) or None
        seed = self.parameterAsInt(parameters, self.SEED, context)
        plane = fit_named(xyz, f"picks {name.what}")
        log_plane(steps, plane)
        steps.feedback.setProgress(10)
        conf = None
        if n_resamples > 0:
            conf = plane_confidence(xyz, sigma_z_m=sigma, n_resamples=n_resamples, n_draws=n_resamples,
                                    seed=seed, progress=steps.part(0.1, 0.9), is_cancelled=steps.is_cancelled)
            steps.log(f"95% confidence ({conf.method}): dip ± {conf.dip_ci95_deg:.3f}°, dip direction "
                      f"± {conf.dip_direction_ci95_deg:.3f}°, pole cone {conf.cone95_deg:.3f}°")
        quality = assess_plane(xyz, sigma_z_m=sigma, dip_ci95_deg=None if conf is None else conf.dip_ci95_deg)
        report_quality(steps, quality)
        steps.check("plane attitude")
        n = plane.normal
        nan = float("nan")
        ci = {"dip_ci95_deg": conf.dip_ci95_deg if conf else nan,
              "dip_direction_ci95_deg": conf.dip_direction_ci95_deg if conf else nan,
              "cone95_deg": conf.cone95_deg if conf else nan}
        table = Table(shapely.points(np.asarray(plane.centroid, dtype=float).reshape(1, 3)),
                      {"dip_deg": np.array([plane.dip_deg]),
                       "dip_direction_deg": np.array([plane.dip_direction_deg]),
                       "strike_rhr_deg": np.array([plane.strike_rhr_deg]),
                       "rms_m": np.array([plane.rms_m]),
                       "n_picks": np.array([plane.n_points], dtype=np.int64),
                       **{k: np.array([v]) for k, v in ci.items()},
                       "quality": np.array([quality.quality], dtype=object),
                       "quality_reason": np.array([quality.reason], dtype=object),
                       "coplanarity_m": np.array([quality.coplanarity]),
                       "collinearity_k": np.array([quality.collinearity]),
                       "normal_x": np.array([n[0]]), "normal_y": np.array([n[1]]),
                       "normal_z": np.array([n[2]])},
                      QgsWkbTypes.PointZ)
        dest = write_sink(self, parameters, self.OUTPUT, context, table, source.sourceCrs())
        attach_style(context, dest, "attitude")
        return {self.OUTPUT: dest, **plane_numbers(plane),
                "DIP_CI95_DEG": ci["dip_ci95_deg"] if conf else None,
                "DIP_DIRECTION_CI95_DEG": ci["dip_direction_ci95_deg"] if conf else None,
                "CONE95_DEG": ci["cone95_deg"] if conf else None,
                "COPLANARITY_M": quality.coplanarity, "COLLINEARITY_K": quality.collinearity,
                "QUALITY": quality.quality, "QUALITY_REASON": quality.reason}
