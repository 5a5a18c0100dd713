"""Tool: the best-fit plane through elevation picks: attitude, 95% confidence and quality."""
from __future__ import annotations

from qgis.core import (
    QgsProcessing,
    QgsProcessingParameterFeatureSink,
)

from strikeline import vocabulary as V
from strikeline.pipeline import group_labels, plane_attitudes_layer, point_planes
from strikeline.pipeline.options import option
from strikeline.pipeline.workload import check_resamples

from ..base import REF_FERNANDEZ, StrikelineAlgorithm
from ..inputs import PICKS, add_picks, read_picks
from ..layers import crs_wkt as wkt_of_crs
from ..params import add_parameters, option_names, parameter, value
from ..outputs import Table, add_outputs, write_sink
from ..styles import attach_style

REF_WOODCOCK = ("Woodcock, N. H. (1977). Specification of fabric shapes using an eigenvalue method. "
                "Geological Society of America Bulletin 88(9), 1231–1236. "
                "doi:10.1130/0016-7606(1977)88<1231:SOFSUA>2.0.CO;2")
REF_JONES = ("Jones, R. R., Pearce, M. A., Jacquemyn, C. & Watson, F. E. (2016). Robust best-fit "
             "planes from geospatial data. Geosphere 12(1), 196–202. doi:10.1130/GES01247.1")
REF_EFRON = ("Efron, B. & Tibshirani, R. J. (1993). An Introduction to the Bootstrap. Chapman & "
             "Hall, New York (percentile intervals).")

#: Numbers of the plane returned as outputs (names: strikeline.vocabulary.QGIS_OUTPUTS, the keys
#: of strikeline.pipeline.attitude_of's dict): name -> label.
NUMBERS = {"dip_deg": "Dip (°)", "dip_direction_deg": "Dip direction (° from grid north)",
           "strike_rhr_deg": "Strike, right-hand rule (°)", "rms_m": "RMS orthogonal residual (m)",
           "n_picks": "Picks used"}
CONFIDENCE_NUMBERS = {"dip_direction_true_deg": "Dip direction from true north (°)",
                      "dip_ci95_deg": "Dip, 95% half-width (°)",
                      "dip_direction_ci95_deg": "Dip direction, 95% half-width (°)",
                      "cone95_deg": "95% confidence cone of the pole (°)",
                      "coplanarity": "Coplanarity M (Woodcock)",
                      "collinearity": "Collinearity K (Woodcock)"}


def add_plane_outputs(alg) -> None:
    add_outputs(alg, NUMBERS)


def report_quality(steps, att: dict, what: str = "plane") -> None:
    """Quality to the log: ``good`` as information, ``weak`` and ``undetermined`` as warnings
    with the reason and what data would help."""
    line = f"{what} quality {att['quality']}: {att['reason']}"
    if att["quality"] == "good":
        steps.log(line)
    else:
        steps.warn(f"{line}; {att['advice']}" if att.get("advice") else line)


class PlaneAttitude(StrikelineAlgorithm):
    NAME = "planeattitude"
    DISPLAY = "Best-fit plane attitude"
    GROUP = "picks"
    SUMMARY = (
        "Dip, dip direction and right-hand-rule strike of the plane that fits the elevation picks "
        "(or any points with elevations) best, as `strikeline attitude` reports it: the RMS "
        "orthogonal residual, 95% confidence half-widths (bootstrap over the points, plus a Monte "
        "Carlo of their vertical error when it is given), the dip direction from true north, and a "
        "quality verdict (good / weak / undetermined) with the reason and what data would help. An "
        "undetermined plane gets no attitude. With a grouping field, one plane per group as well. "
        "The output has one point per plane at its centroid; the sheet-wide numbers are outputs "
        "for a model.")
    METHOD = (
        "Total least squares: the plane passes through the centroid of the picks and its normal is "
        "the eigenvector of the smallest eigenvalue of their scatter matrix (three picks: the "
        "three-point solution). Confidence: percentile bootstrap of the picks (and Monte Carlo of the "
        "vertical error). Quality: Woodcock's eigenvalue shape measures (coplanarity M, collinearity "
        "K) with Fernández's limits for a reliable plane, the picks' relief and the dip's half-width.")
    REFERENCES = (REF_FERNANDEZ, REF_WOODCOCK, REF_JONES, REF_EFRON)
    OUTPUT = V.PLANE_ATTITUDES.name
    GROUP_BY = option("group_by").qgis
    RESAMPLES = option("resamples").qgis
    SIGMA_Z = option("dem_sigma_m").qgis
    SEED = option("seed").qgis

    def initAlgorithm(self, config=None):  # noqa: N802
        add_picks(self)
        self.addParameter(parameter(self, "group_by", parent=PICKS))
        add_parameters(self, "resamples", "dem_sigma_m", "seed")
        self.addParameter(QgsProcessingParameterFeatureSink(
            self.OUTPUT, self.tr("Plane attitude"), QgsProcessing.TypeVectorPoint))
        add_plane_outputs(self)
        add_outputs(self, {**CONFIDENCE_NUMBERS, "quality": "Quality (good, weak, undetermined)",
                           "reason": "Reason for the quality"})

    def process(self, parameters, context, steps):
        group_by = self.parameterAsString(parameters, self.GROUP_BY, context)
        picks_src = self.parameterAsSource(parameters, PICKS, context)
        numeric = ("contact_id",) if "contact_id" in picks_src.fields().names() else ()
        xyz, source, _, name, extra = read_picks(self, parameters, context, steps, fields=numeric,
                                                 text_fields=(group_by,) if group_by else ())
        labels = group_labels(extra[group_by]) if group_by else None
        resamples = value(self, parameters, "resamples", context)
        check_resamples(resamples, len(xyz), names=option_names(self))  # as strikeline attitude, before any draw
        steps.feedback.setProgress(10)
        # picks with a contact_id are bootstrapped by contact segment, as strikeline run does
        pp = point_planes(xyz, crs_wkt=wkt_of_crs(source.sourceCrs()), labels=labels,
                          contact_id=extra.get("contact_id"),
                          sigma_z_m=self.parameterAsDouble(parameters, self.SIGMA_Z, context),
                          what=f"picks {name.what}", group_what=f"group {group_by} = {{}}",
                          resamples=resamples,
                          seed=self.parameterAsInt(parameters, self.SEED, context),
                          progress=steps.part(0.1, 0.9), is_cancelled=steps.is_cancelled)
        if pp.n_missing:
            steps.warn(f"{pp.n_missing} of {pp.n_points + pp.n_missing} picks have no elevation and are left out")
        whole = pp.plane
        if whole.get("dip_deg") is not None and whole.get("dip_direction_deg") is None:
            steps.log(f"best-fit plane: dip {whole['dip_deg']:.3f}° ± {whole.get('dip_ci95_deg') or 0:.3f}°, horizontal "
                      f"within its 95% confidence: no dip direction or strike; RMS residual {whole['rms_m']:.2f} m "
                      f"from {whole['n_picks']} picks")
        elif whole.get("dip_deg") is not None:
            steps.log(f"best-fit plane: dip {whole['dip_deg']:.2f}° toward {whole['dip_direction_deg']:.1f}° "
                      f"(strike {whole['strike_rhr_deg']:.1f}° RHR; {whole['dip_direction_true_deg']:.1f}° from true "
                      f"north), RMS residual {whole['rms_m']:.2f} m from {whole['n_picks']} picks")
            if whole.get("dip_ci95_deg") is not None:
                steps.log(f"95% confidence ({whole['confidence_method']}): dip ± {whole['dip_ci95_deg']:.3f}°, "
                          f"dip direction ± {whole['dip_direction_ci95_deg']:.3f}°, pole cone {whole['cone95_deg']:.3f}°")
        report_quality(steps, whole)
        for g, att in pp.groups.items():
            report_quality(steps, att, f"group {g}")
        steps.check("plane attitude")
        dest = write_sink(self, parameters, self.OUTPUT, context, Table.of_layer(plane_attitudes_layer(pp)), source.sourceCrs())
        attach_style(context, dest, "attitude")
        out = {self.OUTPUT: dest}
        for key in (*NUMBERS, *CONFIDENCE_NUMBERS, "quality", "reason"):
            out[key] = whole.get(key)
        return out
