"""Tool: elevation picks along mapped contacts, from a DEM and/or topographic contour lines."""
from __future__ import annotations

from qgis.core import QgsProcessing, QgsProcessingParameterFeatureSink

from strikeline import vocabulary as V
from strikeline.pipeline import collect_picks

from ..base import REF_PRESS, REF_STR, StrikelineAlgorithm
from ..inputs import add_contact_and_topography, read_contact_inputs
from ..layers import qgis_crs
from ..outputs import add_outputs, write_sink
from ..styles import attach_style
from .common import picks_table


class ContactPicks(StrikelineAlgorithm):
    NAME = "contactpicks"
    DISPLAY = "Contact elevation picks"
    GROUP = "picks"
    SUMMARY = (
        "3D points on the mapped contact lines whose elevation comes from the topography: the DEM "
        "sampled along every contact (every DEM cell size, or at the spacing given), and/or every crossing of a contact "
        "with a topographic contour line (at the contour's elevation). Give a DEM, contour lines "
        "with their elevation field, or both. The output points (PointZ, fields contact_id, "
        "source, elevation_m) are the input of the attitude and surface tools. Several contact "
        "layers are used together as the command line's repeated contacts: the first in the contacts "
        "parameter, the others in the list of more contact layers; contact ids number on from one "
        "layer to the next. 'Selected features only' on the contacts parameter holds for every "
        "contact layer (each read with its own selection); without it every layer is read whole.")
    METHOD = (
        "DEM picks: the contacts are divided into equal steps no longer than one DEM cell (or the "
        "spacing given) and the "
        "DEM is interpolated bilinearly between cell centres; nodata cells give no pick. Contour "
        "picks: contacts and contours are cut into short pieces, paired through an STR-packed "
        "R-tree, and intersected exactly (GEOS); touching and tangent contacts give one pick; "
        "picks of one contact at one elevation closer than 1 mm are merged.")
    REFERENCES = (REF_PRESS, REF_STR)
    OUTPUT = V.PICKS.name

    def initAlgorithm(self, config=None):  # noqa: N802
        add_contact_and_topography(self)
        self.addParameter(QgsProcessingParameterFeatureSink(
            self.OUTPUT, self.tr("Contact picks"), QgsProcessing.TypeVectorPoint))
        add_outputs(self, {"n_picks": "Picks", "n_picks_dem": "Picks from the DEM",
                           "n_picks_contours": "Picks from contour lines"})

    def process(self, parameters, context, steps):
        inputs, opts = read_contact_inputs(self, parameters, context, steps)
        steps.feedback.setProgress(10)
        picks = collect_picks(inputs, spacing_m=opts.pick_spacing_m, log=steps.log,
                              progress=steps.part(0.1, 0.95), is_cancelled=steps.is_cancelled)
        steps.check("contact picks")
        counts = picks.counts_by_source()
        steps.log(f"picks: {len(picks)} (dem {counts['dem']}, contours {counts['contours']})")
        dest = write_sink(self, parameters, self.OUTPUT, context, picks_table(picks),
                          qgis_crs(inputs.crs_wkt))
        attach_style(context, dest, "picks")
        return {self.OUTPUT: dest, "n_picks": len(picks), "n_picks_dem": counts["dem"],
                "n_picks_contours": counts["contours"]}
