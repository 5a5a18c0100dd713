"""Tool: local attitudes in moving windows along the contacts and across the picks."""
from __future__ import annotations

from qgis.core import (
    QgsProcessing,
    QgsProcessingParameterFeatureSink,
)

from strikeline import vocabulary as V
from strikeline.errors import InputError
from strikeline.pipeline import attitudes_layer
from strikeline.attitude import CONFIDENCE_METHODS
from strikeline.pipeline.planes import point_local_attitudes
from strikeline.pipeline.options import option
from strikeline.pipeline.workload import check_resamples

from ..base import REF_FERNANDEZ, StrikelineAlgorithm
from ..inputs import PICKS, add_picks, read_picks
from ..params import add_parameters, option_names, parameter, value
from ..outputs import Table, add_outputs, write_sink
from ..styles import attach_style
from .plane_attitude import REF_EFRON, REF_WOODCOCK

class LocalAttitudes(StrikelineAlgorithm):
    NAME = "localattitudes"
    DISPLAY = "Local attitudes"
    GROUP = "picks"
    SUMMARY = (
        "Dip and dip direction of the contact in moving circular windows, where a single plane is "
        "not enough (folds, domes, curved surfaces): windows centred along every contact (using "
        "that contact's picks) and on a regular grid over the picks (using all picks: give picks "
        "of one surface). Every window reports its 95% confidence half-widths and its quality "
        "(good / weak / undetermined); undetermined windows carry no attitude. The default window "
        "holds about 50 picks around a typical pick; choose it from the geology (a fraction of the "
        "fold wavelength) when known. Output: one point per window centre, drawn as a strike "
        "symbol with its dip.")
    METHOD = (
        "Total least squares in every window, batched over windows; confidence by bootstrap (or "
        "the analytic covariance) plus a Monte Carlo of the vertical error when it is given; "
        "quality by Woodcock's eigenvalue shape measures, the window's relief and the dip's "
        "half-width.")
    REFERENCES = (REF_FERNANDEZ, REF_WOODCOCK, REF_EFRON)
    CONTACT_FIELD = option("contact_field").qgis
    WINDOW = option("window_m").qgis
    MIN_POINTS = option("min_points").qgis
    ALONG = option("along_contacts").qgis
    ACROSS = option("across_picks").qgis
    GRID_SPACING = option("grid_spacing_m").qgis
    CONFIDENCE = option("confidence_method").qgis
    RESAMPLES = option("window_resamples").qgis
    SIGMA_Z = option("dem_sigma_m").qgis
    SEED = option("seed").qgis
    OUTPUT = V.ATTITUDES.name
    DEFAULT_CONTACT_FIELD = option("contact_field").default

    def initAlgorithm(self, config=None):  # noqa: N802
        add_picks(self)
        self.addParameter(parameter(self, "contact_field"))
        self.addParameter(parameter(self, "window_m", parent=PICKS, advanced=False))
        add_parameters(self, "along_contacts", "across_picks", "min_points")
        self.addParameter(parameter(self, "grid_spacing_m", parent=PICKS))
        add_parameters(self, "confidence_method", "window_resamples", "dem_sigma_m", "seed")
        self.addParameter(QgsProcessingParameterFeatureSink(
            self.OUTPUT, self.tr("Local attitudes"), QgsProcessing.TypeVectorPoint))
        add_outputs(self, {"window_m": "Window radius used (m)", "n_windows": "Windows",
                           "n_windows_determined": "Windows with an attitude"})

    def process(self, parameters, context, steps):
        source = self.parameterAsSource(parameters, PICKS, context)
        cfield = self.parameterAsString(parameters, self.CONTACT_FIELD, context)
        if cfield and cfield not in source.fields().names():
            if cfield != self.DEFAULT_CONTACT_FIELD:
                raise InputError(f"picks layer '{source.sourceName()}' has no field '{cfield}' (fields: "
                                 f"{', '.join(source.fields().names()) or 'none'}); choose its contact id field")
            steps.log(f"the picks have no field '{cfield}': all picks are treated as one contact")
            cfield = ""
        xyz, source, _, name, vals = read_picks(self, parameters, context, steps,
                                                fields=(cfield,) if cfield else ())
        window = self.parameterAsDouble(parameters, self.WINDOW, context) or None
        spacing = self.parameterAsDouble(parameters, self.GRID_SPACING, context) or None
        sigma = self.parameterAsDouble(parameters, self.SIGMA_Z, context) or None
        resamples = value(self, parameters, "window_resamples", context)
        # refused before any draw, by the plane tool's check (the memory of one window's draws, and
        # resamples x picks as the work: the windows overlap, so the real work is a few times that)
        check_resamples(resamples, len(xyz), names={"resamples": option_names(self)["window_resamples"]})
        steps.feedback.setProgress(10)
        la, counts = point_local_attitudes(
            xyz, contact_id=vals[cfield] if cfield else None, what=f"picks {name.what}", window_m=window,
            min_points=self.parameterAsInt(parameters, self.MIN_POINTS, context),
            along_contacts=self.parameterAsBool(parameters, self.ALONG, context),
            across_picks=self.parameterAsBool(parameters, self.ACROSS, context),
            grid_spacing_m=spacing,
            method=CONFIDENCE_METHODS[self.parameterAsEnum(parameters, self.CONFIDENCE, context)],
            n_resamples=resamples, sigma_z_m=sigma, n_draws=resamples,
            seed=self.parameterAsInt(parameters, self.SEED, context),
            progress=steps.part(0.1, 0.9), is_cancelled=steps.is_cancelled)
        steps.check("local attitudes")
        steps.log(f"local attitudes: {len(la)} windows of radius {la.window_m:.0f} m "
                  f"(good {counts['good']}, weak {counts['weak']}, undetermined {counts['undetermined']})")
        if len(la) and counts["undetermined"] == len(la):
            steps.warn("every window is undetermined: use a larger window, or picks with more relief")
        # the attitudes layer of strikeline run: same fields, same builder
        dest = write_sink(self, parameters, self.OUTPUT, context, Table.of_layer(attitudes_layer(la)),
                          source.sourceCrs())
        attach_style(context, dest, "local_attitudes")
        return {self.OUTPUT: dest, "window_m": la.window_m, "n_windows": len(la),
                "n_windows_determined": len(la) - counts["undetermined"]}
