"""Tool: the best-fit plane through elevation picks (attitude and its fit)."""
from __future__ import annotations

import numpy as np
import shapely
from qgis.core import (
    QgsProcessing,
    QgsProcessingOutputNumber,
    QgsProcessingParameterFeatureSink,
    QgsWkbTypes,
)

from strikeline.errors import InputError
from strikeline.fitting import fit_plane

from ..base import REF_FERNANDEZ, StrikelineAlgorithm
from ..inputs import add_picks, read_picks
from ..outputs import Table, write_sink
from ..styles import attach_style

NUMBERS = (("DIP_DEG", "Dip (°)"), ("DIP_DIRECTION_DEG", "Dip direction (° from grid north)"),
           ("STRIKE_RHR_DEG", "Strike, right-hand rule (°)"), ("RMS_M", "RMS orthogonal residual (m)"),
           ("N_PICKS", "Picks used"))


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


class PlaneAttitude(StrikelineAlgorithm):
    NAME = "planeattitude"
    DISPLAY = "Best-fit plane attitude"
    GROUP = "picks"
    SUMMARY = (
        "Dip, dip direction and right-hand-rule strike of the plane that fits the elevation picks "
        "best, with the RMS orthogonal residual (metres) as its quality. The output is one point at "
        "the picks' centroid carrying the attitude, plus the numbers as outputs for a model. Exactly "
        "three picks give the three-point solution; fewer, or picks all on one line, are refused "
        "with what data would help.")
    METHOD = (
        "Total least squares: the plane passes through the centroid of the picks and its normal is "
        "the eigenvector of the smallest eigenvalue of their scatter matrix (orientation tensor), "
        "which minimises the sum of squared orthogonal distances.")
    REFERENCES = (REF_FERNANDEZ,)
    OUTPUT = "ATTITUDE"

    def initAlgorithm(self, config=None):  # noqa: N802
        add_picks(self)
        self.addParameter(QgsProcessingParameterFeatureSink(
            self.OUTPUT, self.tr("Plane attitude"), QgsProcessing.TypeVectorPoint))
        add_plane_outputs(self)

    def process(self, parameters, context, steps):
        xyz, source, name = read_picks(self, parameters, context, steps)
        plane = fit_named(xyz, f"picks {name.what}")
        log_plane(steps, plane)
        steps.check("plane attitude")
        n = plane.normal
        table = Table(shapely.points(np.asarray(plane.centroid, dtype=float).reshape(1, 3)),
                      {"dip_deg": np.array([plane.dip_deg]),
                       "dip_direction_deg": np.array([plane.dip_direction_deg]),
                       "strike_rhr_deg": np.array([plane.strike_rhr_deg]),
                       "rms_m": np.array([plane.rms_m]),
                       "n_picks": np.array([plane.n_points], dtype=np.int64),
                       "normal_x": np.array([n[0]]), "normal_y": np.array([n[1]]),
                       "normal_z": np.array([n[2]])},
                      QgsWkbTypes.PointZ)
        dest = write_sink(self, parameters, self.OUTPUT, context, table, source.sourceCrs())
        attach_style(context, dest, "attitude")
        return {self.OUTPUT: dest, **plane_numbers(plane)}
