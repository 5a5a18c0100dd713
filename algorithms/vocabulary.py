"""The names of everything strikeline writes: layers and their fields, raster files, summary keys
and the QGIS tools' outputs, each once, with its unit and a one-line meaning.

One spelling per concept, in lower-case snake case, with the unit as a suffix where the quantity
has one (``dip_deg``, ``elevation_m``, ``excess_m2``) and none for counts, ratios and words
(``n_picks``, ``coplanarity``, ``quality``). The pipeline, the command line and the QGIS adapter
build their outputs from these lists, and the README's output reference is checked against them
(``tests/test_vocabulary.py``).

QGIS: a tool's outputs (feature sinks, raster and file destinations, numbers and strings) are named
exactly as here; a feature sink is named as its layer and a raster destination as its file
without ``.tif``.

Summary keys are dotted paths into the JSON (``plane.dip_deg``); a ``*`` stands for keys that are
data, not names (file names, group labels, model names, quality classes).

Imports nothing beyond the standard library, so every part of the package may use it.
"""
from __future__ import annotations

from dataclasses import dataclass

#: Units and the suffix that names them.
UNITS = {"m": "_m", "deg": "_deg", "m2": "_m2"}


@dataclass(frozen=True)
class Name:
    """One output name: a field, a summary key or a QGIS output."""

    name: str
    unit: str | None
    meaning: str
    type: str = "real"  # real, integer, bool, text, list, section (a JSON object)

    @property
    def leaf(self) -> str:
        """The last part of a dotted summary path."""
        return self.name.rsplit(".", 1)[-1]


@dataclass(frozen=True)
class Layer:
    """A vector layer: its name, geometry, meaning and fields in the order they are written.

    ``optional`` names the fields written only when their data exist (``written_when`` says when).
    """

    name: str
    geometry: str  # point, point_z, line, line_z (strikeline.io.vector.GEOMETRY_TYPES) or "as its input"
    meaning: str
    fields: tuple[Name, ...]
    optional: tuple[str, ...] = ()
    written_when: str = ""
    #: Prefix under which the layer also carries the attributes of the input feature each row
    #: came from (``attr_`` + the input's own field name, after the fields above); "" for none.
    input_attributes: str = ""

    @property
    def field_names(self) -> tuple[str, ...]:
        return tuple(f.name for f in self.fields)

    @property
    def required_names(self) -> tuple[str, ...]:
        return tuple(f.name for f in self.fields if f.name not in self.optional)

    def field(self, name: str) -> Name:
        for f in self.fields:
            if f.name == name:
                return f
        raise KeyError(f"layer '{self.name}' has no field '{name}' (fields: {', '.join(self.field_names)})")


@dataclass(frozen=True)
class Raster:
    """A GeoTIFF: file name, unit of its cells and meaning."""

    file: str
    unit: str | None
    meaning: str

    @property
    def name(self) -> str:
        """The file name without ``.tif`` (the QGIS raster destination's name)."""
        return self.file[:-4] if self.file.endswith(".tif") else self.file


def _n(name, unit, meaning, type="real") -> Name:  # noqa: A002
    return Name(name, unit, meaning, type)


# --------------------------------------------------------------------------- shared field sets
_CONTACT_ID = _n("contact_id", None, "feature id of the mapped contact", "integer")
_EXTRAPOLATED = _n("extrapolated", None, "true beyond the reach of the data (a forecast)", "bool")

#: The attitude of one plane (``strikeline.pipeline.attitude_of``): the ``plane`` of summary.json
#: and of ``strikeline attitude``, each group's plane, and the fields of the plane-attitude layer.
PLANE_KEYS: tuple[Name, ...] = (
    _n("dip_deg", "deg", "dip of the best-fit plane, 0-90 from horizontal"),
    _n("dip_direction_deg", "deg", "dip direction, 0-360 clockwise from grid north (null: horizontal plane)"),
    _n("strike_rhr_deg", "deg", "strike by the right-hand rule (dip direction - 90)"),
    _n("rms_m", "m", "RMS orthogonal residual of the picks from the plane"),
    _n("centroid_m", "m", "x, y, z of the picks' centroid, which the plane passes through", "list"),
    _n("n_picks", None, "picks the plane was fitted to", "integer"),
    _n("dip_ci95_deg", "deg", "95% confidence half-width of the dip"),
    _n("dip_direction_ci95_deg", "deg", "95% confidence half-width of the dip direction"),
    _n("cone95_deg", "deg", "95% confidence cone of the pole"),
    _n("confidence_method", None, "how the 95% half-widths were found (bootstrap, Monte Carlo, ...)", "text"),
    _n("quality", None, "good, weak or undetermined", "text"),
    _n("reason", None, "why the plane has that quality, in words", "text"),
    _n("advice", None, "what data would improve the plane", "text"),
    _n("coplanarity", None, "Woodcock's coplanarity M = ln(e2/e3) (ratio; above 4: a plane)"),
    _n("collinearity", None, "Woodcock's collinearity K (ratio; below 0.8: picks not along one line)"),
    _n("meridian_convergence_deg", "deg", "angle from true north to grid north at the centroid"),
    _n("dip_direction_true_deg", "deg", "dip direction from true north"),
    _n("dip_significant", None, "false when the dip does not differ from 0 at 95% (horizontal)", "bool"),
    _n("horizontal", None, "sentence saying the plane is horizontal within its confidence", "text"),
)

#: Where a contact came from, when several contact inputs are joined (``--contacts`` repeated).
_CONTACT_INPUT = _n("contact_input", None, "which contacts input the contact came from: 0 for the first, in the "
                    "order given (summary: inputs.contacts; top_picks: inputs.top_contacts)", "integer")
_CONTACT_FID = _n("contact_fid", None, "feature id of the contact in its own file (contact_id is unique over all "
                  "inputs: the first input's feature ids, later inputs numbered on after them)", "integer")
#: The prefix of the contact's own attributes copied into the picks and misfit segments.
CONTACT_ATTRIBUTE_PREFIX = "attr_"
_PICK_FIELDS = (_CONTACT_ID, _n("source", None, "where the pick came from: dem or contours", "text"),
                _n("elevation_m", "m", "elevation of the pick (also its Z)"), _CONTACT_INPUT, _CONTACT_FID)

# --------------------------------------------------------------------------- layers
PICKS = Layer("picks", "point_z", "elevation picks on the mapped contacts", _PICK_FIELDS,
              optional=("contact_input", "contact_fid"), input_attributes=CONTACT_ATTRIBUTE_PREFIX)
TOP_PICKS = Layer("top_picks", "point_z", "elevation picks on the unit's top contacts", _PICK_FIELDS,
                  optional=("contact_input", "contact_fid"), written_when="with top contacts",
                  input_attributes=CONTACT_ATTRIBUTE_PREFIX)
STRUCTURE_CONTOURS = Layer(
    "structure_contours", "line_z", "lines of equal elevation of the modelled surface",
    (_n("elevation_m", "m", "elevation of the line (also its Z)"), _EXTRAPOLATED,
     _n("below_ground", None, "true where the surface lies below the ground (QGIS tool, with a ground DEM)",
        "bool")),
    optional=("extrapolated", "below_ground"))
PREDICTED_TRACE = Layer("predicted_trace", "line",
                        "predicted outcrop: where the modelled surface meets the ground", (_EXTRAPOLATED,),
                        optional=("extrapolated",), written_when="with a DEM")
CONTACT_MISFIT = Layer(
    "contact_misfit", "line", "the mapped contacts cut into segments, each checked against the model",
    (_CONTACT_ID,
     _n("misfit_m", "m", "horizontal misfit of the segment (median distance to the predicted trace)"),
     _n("misfit_z_m", "m", "median vertical misfit, ground - surface forecast without the segment"),
     _n("se_m", "m", "standard error of that vertical misfit"),
     _n("z_score", None, "vertical misfit / its standard error"),
     _n("flag_m", "m", "horizontal misfit at which the segment would be flagged"),
     _n("flagged", None, "true where the segment misfits", "bool"), _CONTACT_INPUT, _CONTACT_FID),
    optional=("misfit_z_m", "se_m", "z_score", "flag_m", "contact_input", "contact_fid"), written_when="with a DEM",
    input_attributes=CONTACT_ATTRIBUTE_PREFIX)
_PLANE = {n.name: n for n in PLANE_KEYS}
ATTITUDES = Layer(
    "attitudes", "point", "local attitudes: one point per moving window's centre",
    (_n("elevation_m", "m", "elevation of the local plane at the window's centre"),
     *(_PLANE[k] for k in ("dip_deg", "dip_direction_deg", "strike_rhr_deg", "dip_ci95_deg",
                           "dip_direction_ci95_deg", "cone95_deg", "n_picks", "quality")),
     _n("reason_code", None, "short code of the reason for the quality", "text"),
     *(_PLANE[k] for k in ("coplanarity", "collinearity", "rms_m")),
     _n("window_kind", None, "contact (centred on a contact, its picks), grid (all picks) or given", "text"),
     _n("contact_id", None, "the contact whose picks the window used (-1: all picks)", "integer"),
     _n("window_m", "m", "radius of the window")))
UNIT_CONFLICTS = Layer(
    "unit_conflicts", "point", "check points where the surface still breaks the map's units",
    (_n("unit", None, "name of the map unit", "text"),
     _n("side", None, "above or below: where the unit puts the surface", "text"),
     _n("violation_m", "m", "how far the surface lies on the wrong side")),
    written_when="with map units")
PLANE_ATTITUDES = Layer(
    "plane_attitudes", "point_z", "QGIS plane-attitude tool: one point per plane at its picks' centroid",
    (*(f for f in PLANE_KEYS if f.name not in ("centroid_m", "dip_significant", "horizontal")),
     _n("group", None, "value of the grouping field ('' for all picks)", "text")))
TRACE_MISFIT = Layer("trace_misfit", "point", "QGIS depth tool: contact vertices on the DEM",
                     (_n("distance_m", "m", "distance from the vertex to the predicted trace"),))
ISOPACHS = Layer("isopachs", "line", "QGIS isopach tool: lines of equal true thickness",
                 (_n("true_thickness_m", "m", "true thickness of the unit along the line"),))
UNIT_THICKNESS = Layer(
    "unit_thickness", "as its input", "QGIS thickness tool: the measurements with their thickness",
    (_n("true_thickness_m", "m", "true thickness (perpendicular to the bedding)"),
     _n("vertical_thickness_m", "m", "vertical thickness (what a vertical hole drills)")),
    written_when="after the input's own fields")

#: The layers of ``results.gpkg`` in the order they are written.
RUN_LAYERS = (PICKS, STRUCTURE_CONTOURS, PREDICTED_TRACE, CONTACT_MISFIT, ATTITUDES, TOP_PICKS, UNIT_CONFLICTS)
#: Layers only the QGIS single-step tools write.
QGIS_LAYERS = (PLANE_ATTITUDES, TRACE_MISFIT, ISOPACHS, UNIT_THICKNESS)
LAYERS = {layer.name: layer for layer in RUN_LAYERS + QGIS_LAYERS}

# --------------------------------------------------------------------------- rasters
SURFACE = Raster("surface.tif", "m", "elevation of the modelled surface")
DIP = Raster("dip.tif", "deg", "dip of the surface, 0-90")
DIP_DIRECTION = Raster("dip_direction.tif", "deg", "dip direction of the surface from grid north")
UNCERTAINTY = Raster("uncertainty.tif", "m", "standard error of the surface's elevation")
DEPTH = Raster("depth.tif", "m", "depth of the surface below ground (DEM - surface; negative above)")
VERTICAL_THICKNESS = Raster("vertical_thickness.tif", "m", "top - base surface")
TRUE_THICKNESS = Raster("true_thickness.tif", "m", "vertical thickness x cos(dip of the base)")
FORECAST_MASK = Raster("forecast_mask.tif", None, "QGIS surface tool: 1 beyond the reach of the data, else 0")
RASTERS = {r.name: r for r in (SURFACE, DIP, DIP_DIRECTION, UNCERTAINTY, DEPTH, VERTICAL_THICKNESS,
                               TRUE_THICKNESS, FORECAST_MASK)}
#: The name of the run's summary file and of the QGIS whole chain's summary destination.
SUMMARY_FILE = "summary.json"
RESULTS_FILE = "results.gpkg"
#: The list of the files strikeline wrote into an output folder (size, SHA-256): what --overwrite may replace.
MANIFEST_FILE = "strikeline_manifest.json"
#: The run's report: one self-contained HTML page with the caution, the answer and the figures.
REPORT_FILE = "report.html"
#: The files of a run's folder besides its GeoTIFFs, with their meaning (the README's output reference).
RUN_FILES = ((RESULTS_FILE, "the vector layers (above) and their QGIS styles"),
             (SUMMARY_FILE, "the run's numbers and words (keys below)"),
             (REPORT_FILE, "the caution, the answer in plain words and the figures, as one self-contained page "
                           "(strikeline run, unless --no-report; needs the plot extra)"),
             (MANIFEST_FILE, "the files strikeline wrote into the folder, with size and SHA-256"))
#: The table of results.gpkg that holds its layers' QGIS styles (QGIS's own name; not a layer).
STYLES_TABLE = "layer_styles"

# --------------------------------------------------------------------------- strikeline batch
#: The files a batch writes into its output folder, beside one folder per sheet.
BATCH_FILE = "batch.json"
INDEX_FILE = "index.gpkg"
INDEX_PAGE = "index.html"
#: Status of a sheet in a batch: run now and written, failed (its error in batch.json), or skipped
#: because its inputs and options are those of its intact earlier results.
SHEET_STATUSES = ("ok", "failed", "unchanged")
_SHEET = _n("sheet", None, "name of the sheet in the job file", "text")
_EDGE_FIELDS = (
    _n("sheet_a", None, "the first sheet of the edge (names in sorted order)", "text"),
    _n("sheet_b", None, "the second sheet of the edge", "text"),
    _n("contact", None, "the contact both sheets model (the job file's contact key)", "text"),
    _n("n_samples", None, "points along the edge where both surfaces have a value", "integer"),
    _n("median_dz_m", "m", "median absolute elevation difference of the two surfaces along the edge"),
    _n("max_dz_m", "m", "largest absolute elevation difference along the edge"),
    _n("median_offset_m", "m", "median distance along the edge between the two sheets' crossings of one "
       "structure-contour elevation"),
    _n("max_offset_m", "m", "largest such distance"),
    _n("n_samples_in_reach", None, "of those, points within reach of both sheets' data (each sheet's picks within its "
       "model's reach: where its structure contours are not forecasts)", "integer"),
    _n("median_dz_in_reach_m", "m", "median absolute elevation difference there, where both surfaces interpret "
       "nearby data"),
    _n("max_dz_in_reach_m", "m", "largest absolute elevation difference there"),
    _n("max_dz_extrapolated_m", "m", "largest absolute elevation difference where one or both sheets extrapolate "
       "(forecasts, which sheets fitting their own surfaces may disagree on by much)"))
SHEETS = Layer("sheets", "polygon", "batch: one footprint per sheet (its surface grid; else its DEM)",
               (_SHEET, _n("status", None, "ok, failed or unchanged (skipped: inputs and options as before)", "text"),
                _n("contact", None, "the contact the sheet models (the job file's contact key; null: none)", "text"),
                _n("error", None, "why the sheet failed, in one line (null: it did not)", "text")),
               optional=("contact", "error"))
SHEET_PLANES = Layer("sheet_planes", "point_z", "batch: each sheet's best-fit plane at its picks' centroid",
                     (_SHEET, *(_PLANE[k] for k in ("dip_deg", "dip_direction_deg", "strike_rhr_deg", "rms_m",
                                                    "n_picks", "dip_ci95_deg", "dip_direction_ci95_deg",
                                                    "cone95_deg", "quality"))))
SHEET_ATTITUDES = Layer("sheet_attitudes", "point", "batch: every sheet's local attitudes (its attitudes layer)",
                        (_SHEET, *ATTITUDES.fields))
SHEET_CONTOURS = Layer("sheet_structure_contours", "line_z",
                       "batch: every sheet's structure contours (its structure_contours layer)",
                       (_SHEET, *STRUCTURE_CONTOURS.fields), optional=STRUCTURE_CONTOURS.optional)
SHARED_EDGES = Layer("shared_edges", "line", "batch: where two sheets that model the same contact meet, with the "
                     "mismatch of their surfaces along the edge", _EDGE_FIELDS,
                     optional=("median_dz_m", "max_dz_m", "median_offset_m", "max_offset_m", "n_samples_in_reach",
                               "median_dz_in_reach_m", "max_dz_in_reach_m", "max_dz_extrapolated_m"))
#: The layers of a batch's index.gpkg in the order they are written.
INDEX_LAYERS = (SHEETS, SHEET_PLANES, SHEET_ATTITUDES, SHEET_CONTOURS, SHARED_EDGES)


# --------------------------------------------------------------------------- summary.json
def _under(prefix: str, names) -> tuple[Name, ...]:
    return tuple(Name(f"{prefix}.{n.name}", n.unit, n.meaning, n.type) for n in names)


def _s(name, unit, meaning, type="real") -> Name:  # noqa: A002
    return Name(name, unit, meaning, type)


_SEC = "section"
_CHI2 = (_s("consistent", None, "true when the residuals agree with the stated errors", "bool"),
         _s("critical", None, "chi-square critical value"), _s("statistic", None, "chi-square statistic"),
         _s("trimmed_rms_m", "m", "trimmed RMS of the held-out residuals"))
_MODEL_PARAMS = (
    _s("origin_m", "m", "x, y of the model's origin", "list"), _s("scale_m", "m", "length scale of the model"),
    _s("terms", None, "polynomial terms", "list"), _s("coefficients", None, "polynomial coefficients", "list"),
    _s("sigma_m", "m", "residual standard deviation of the fit"),
    _s("method", None, "how the model was fitted", "text"),
    _s("pick_sigma_prior_m", "m", "prior standard error of a pick"),
    _s("dip_deg", "deg", "dip of the plane model"), _s("dip_direction_deg", "deg", "dip direction of the plane model"),
    _s("strike_rhr_deg", "deg", "strike of the plane model"),
    _s("trend_dip_deg", "deg", "dip of the model's trend plane"),
    _s("trend_dip_direction_deg", "deg", "dip direction of the model's trend plane"),
    _s("trend_strike_rhr_deg", "deg", "strike of the model's trend plane"),
    _s("footprint_m", "m", "spline: footprint of a dip reading"), _s("smoothing", None, "spline: smoothing weight"),
    _s("smoothing_method", None, "spline: how the smoothing was chosen", "text"),
    _s("edf", None, "spline: effective degrees of freedom"), _s("gcv_score_m2", "m2", "spline: GCV score"),
    _s("bayes_scale", None, "spline: scale of the Bayesian standard error"),
    _s("n_nodes", None, "spline: nodes", "integer"), _s("n_boreholes", None, "boreholes used", "integer"),
    _s("n_orientations", None, "dip readings used", "integer"),
    _s("n_bounds", None, "inequality bounds (map units)", "integer"),
    _s("n_active_bounds", None, "spline with bounds: bounds held as equalities at the end", "integer"),
    _s("bound_iterations", None, "spline with bounds: rounds of the active-set solver", "integer"),
    _s("n_bounds_broken", None, "spline with bounds: bounds still broken beyond the tolerance", "integer"),
    _s("max_bound_violation_m", "m", "spline with bounds: largest violation of a bound"),
    _s("bound_method", None, "spline with bounds: how the bounds were solved", "text"))
_MODEL = (
    _s("chosen", None, "the surface model used: plane, trend2 or spline", "text"),
    _s("selection", None, "how it was chosen (asked, or auto and the rule)", "text"),
    _s("cv_rmse_m", "m", "cross-validation RMSE of each model", _SEC), _s("cv_rmse_m.*", "m", "of one model"),
    _s("cv_se_m", "m", "standard error of each model's RMSE", _SEC), _s("cv_se_m.*", "m", "of one model"),
    _s("cv_skipped", None, "models not scored and why", _SEC), _s("cv_skipped.*", None, "why", "text"),
    _s("cv_distance_m", "m", "typical distance of the held-out picks to the nearest datum"),
    _s("choice", None, "the model choice (auto)", _SEC),
    _s("choice.best", None, "model with the lowest trimmed error", "text"),
    _s("choice.rule", None, "rule of the choice", "text"),
    _s("choice.tolerance_m", "m", "how much worse a simpler model may be"),
    _s("choice.stated_pick_error_m", "m", "stated pick error the choice is judged against"),
    _s("choice.n_groups", None, "held-out segments", "integer"),
    _s("choice.chi2_alpha", None, "significance level of the chi-square test"),
    _s("choice.chi2", None, "chi-square test of each model", _SEC), _s("choice.chi2.*", None, "one model", _SEC),
    *_under("choice.chi2.*", _CHI2),
    _s("choice.reason", None, "why the model was chosen, in words", "text"),
    _s("holdout_block_m", "m", "side of the cross-validation blocks"),
    _s("check_block_m", "m", "side of the misfit check's blocks"),
    _s("check_model", None, "model the misfit check refits", "text"),
    _s("check_model_reason", None, "why that model", "text"),
    _s("n_groups", None, "held-out segments", "integer"),
    _s("stated_pick_error_m", "m", "RMS of the stated pick errors"),
    _s("error_growth", None, "calibration of the standard error on held-out picks", _SEC),
    _s("error_growth.excess_m2", "m2", "excess variance at the reference distance"),
    _s("error_growth.alpha", None, "exponent of the growth with distance"),
    _s("error_growth.distance_ref_m", "m", "reference distance"),
    _s("error_growth.kappa", None, "scale factor of the model's own standard error"),
    _s("error_growth.n_held_out", None, "held-out picks", "integer"),
    _s("n_folds", None, "cross-validation folds", "integer"), _s("n_picks", None, "picks given", "integer"),
    _s("n_used", None, "picks used (after thinning)", "integer"),
    _s("thin_cell_m", "m", "cell of the thinning (null: none)"),
    _s("reach_m", "m", "distance from the data beyond which the surface is extrapolated"),
    _s("taper_m", "m", "distance over which a trend or spline relaxes to the plane"),
    _s("params", None, "the fitted model's parameters", _SEC), *_under("params", _MODEL_PARAMS),
    _s("uncertainty", None, "what uncertainty.tif holds, in words", "text"),
    _s("boreholes", None, "boreholes the model honours", _SEC),
    _s("boreholes.n_boreholes", None, "boreholes", "integer"),
    _s("boreholes.max_abs_misfit_m", "m", "largest misfit of the surface at a borehole"),
    _s("boreholes.sigma_m", "m", "stated borehole error"),
    _s("orientations", None, "dip readings the model honours", _SEC),
    _s("orientations.n_orientations", None, "dip readings", "integer"),
    _s("orientations.sigma_deg", "deg", "stated error of a dip reading"))
_MAP_UNITS = (
    _s("field", None, "field of the unit names", "text"), _s("units_above", None, "units above the surface", "list"),
    _s("units_below", None, "units below the surface", "list"), _s("units_ignored", None, "other units", "list"),
    _s("n_points", None, "constraint points", "integer"), _s("n_above", None, "points under units above", "integer"),
    _s("n_below", None, "points under units below", "integer"),
    _s("spacing_m", "m", "spacing of the constraint points"),
    _s("margin_m", "m", "distance of the points inside the units' outlines"),
    _s("tolerance_m", "m", "allowance for the DEM's error"),
    _s("check", None, "the surface checked against the units", _SEC),
    _s("check.n_points", None, "check points", "integer"), _s("check.spacing_m", "m", "spacing of the check points"),
    _s("check.threshold_m", "m", "violation counted beyond this"),
    _s("check.n_violated", None, "check points the surface breaks", "integer"),
    _s("check.share_violated", None, "share of check points broken (ratio)"),
    _s("check.max_violation_m", "m", "largest violation"),
    _s("check.n_violated_above", None, "broken points under units above", "integer"),
    _s("check.n_violated_below", None, "broken points under units below", "integer"),
    _s("meaning", None, "what the bounds mean, in words", "text"))

#: What the summary records of one input (``strikeline.pipeline.inputs.input_record``).
_INPUT_RECORD = (
    _s("path", None, "the file as given", "text"),
    _s("path_absolute", None, "the file as an absolute path (null: not a file)", "text"),
    _s("layer", None, "the layer read (null: a raster)", "text"),
    _s("where", None, "the SQL filter applied (null: none)", "text"),
    _s("fields", None, "the fields used, by option", _SEC), _s("fields.*", None, "the field one option names", "text"),
    _s("sha256", None, "SHA-256 of the file (null: not a file)", "text"))

#: The stretches of the contacts where the DEM has no value (outside it or over nodata): no DEM picks.
CONTACTS_OFF_DEM = _s("contacts_off_dem", None, "length of the contacts off the DEM (outside it or over nodata), "
                      "where no DEM pick is made (with a DEM)", _SEC)
_OFF_DEM = (_s("length_m", "m", "length of the contacts off the DEM"),
            _s("total_length_m", "m", "total length of the contacts"),
            _s("percent", None, "the length off the DEM as a percentage of the total"),
            _s("n_lines", None, "contact lines with a stretch off the DEM", "integer"))

SUMMARY_KEYS: tuple[Name, ...] = (
    _s("version", None, "strikeline version", "text"),
    _s("crs", None, "the CRS of the outputs (authority code or name)", "text"),
    _s("n_picks", None, "picks on the contacts", "integer"),
    _s("picks_by_source", None, "picks by source", _SEC), _s("picks_by_source.*", None, "picks from dem or contours",
                                                            "integer"),
    _s("plane", None, "the sheet-wide best-fit plane", _SEC), *_under("plane", PLANE_KEYS),
    _s("trace_misfit", None, "distance of the contact vertices to the predicted trace", _SEC),
    _s("trace_misfit.median_m", "m", "median distance"), _s("trace_misfit.p90_m", "m", "90th percentile distance"),
    _s("trace_misfit.n_vertices", None, "contact vertices on the DEM", "integer"),
    _s("trace_misfit.note", None, "why no misfit was measured", "text"),
    _s("structure_contours", None, "the structure contours", _SEC),
    _s("structure_contours.interval_m", "m", "contour interval"),
    _s("structure_contours.n_lines", None, "lines", "integer"),
    _s("structure_contours.n_extrapolated", None, "lines beyond the reach of the data", "integer"),
    _s("data_error", None, "the stated errors of the data", _SEC),
    _s("data_error.dem_sigma_m", "m", "vertical standard error of the DEM"),
    _s("data_error.contour_sigma_m", "m", "positional standard error of the contour lines"),
    _s("data_error.contact_sigma_m", "m", "positional standard error of the mapped contacts"),
    _s("data_error.basis", None, "how a pick's error is found, in words", "text"),
    _s("data_error.resamples", None, "bootstrap resamples and Monte Carlo draws", "integer"),
    _s("data_error.seed", None, "seed of the random draws", "integer"),
    _s("conventions", None, "angle conventions, in words", "text"),
    _s("inputs", None, "every input by role (contacts, dem, contours, boreholes, orientations, top_contacts, "
       "map_units)", _SEC),
    _s("inputs.contacts", None, "one record per contacts input, in the order given, with the keys of inputs.dem; "
       "its position is the picks' contact_input", "list"),
    _s("inputs.top_contacts", None, "one record per top-contacts input, as inputs.contacts", "list"),
    *(k for role in ("dem", "contours", "boreholes", "orientations", "map_units")
      for k in (_s(f"inputs.{role}", None, f"the {role.replace('_', ' ')} input", _SEC),
                *_under(f"inputs.{role}", _INPUT_RECORD))),
    _s("command_line", None, "the strikeline command as given, one item per argument (outside the command line, "
       "e.g. in QGIS: the process's sys.argv)", "list"),
    _s("caution", None, "the caution on forecasts", "text"),
    _s("model", None, "the surface model", _SEC), *_under("model", _MODEL),
    _s("groups", None, "one plane per group of contacts", _SEC),
    _s("groups.field", None, "the contacts' grouping field", "text"),
    _s("groups.planes", None, "the planes by group label", _SEC), _s("groups.planes.*", None, "one group", _SEC),
    *_under("groups.planes.*", PLANE_KEYS),
    _s("attitudes", None, "the local attitudes", _SEC),
    _s("attitudes.n_windows", None, "windows", "integer"), _s("attitudes.window_m", "m", "window radius"),
    _s("attitudes.confidence_method", None, "how the 95% half-widths were found", "text"),
    _s("attitudes.by_quality", None, "windows by quality", _SEC),
    _s("attitudes.by_quality.*", None, "windows of one quality", "integer"),
    _s("attitudes.note", None, "why the window was chosen so, or none made", "text"),
    _s("contact_misfit", None, "the misfit check of the contact segments", _SEC),
    _s("contact_misfit.segment_m", "m", "length of a segment"),
    _s("contact_misfit.check", None, "how segments were checked", _SEC),
    _s("contact_misfit.check.method", None, "in words", "text"),
    _s("contact_misfit.check.flag_rule", None, "when a segment is flagged", "text"),
    _s("contact_misfit.check.dem_sigma_m", "m", "vertical standard error of the DEM"),
    _s("contact_misfit.check.contact_sigma_m", "m", "positional standard error of the mapped contacts"),
    _s("contact_misfit.n_segments", None, "segments", "integer"),
    _s("contact_misfit.n_flagged", None, "segments flagged", "integer"),
    _s("contact_misfit.flagged_contact_ids", None, "contact_id of every contact with a flagged segment, ascending",
       "list"),
    _s("contact_misfit.n_unchecked", None, "segments that could not be checked", "integer"),
    _s("contact_misfit.unchecked_reason", None, "why, in words", "text"),
    _s("predicted_trace", None, "the predicted outcrop trace", _SEC),
    _s("predicted_trace.n_lines", None, "lines", "integer"),
    _s("predicted_trace.n_extrapolated", None, "lines beyond the reach of the data", "integer"),
    CONTACTS_OFF_DEM, *_under(CONTACTS_OFF_DEM.name, _OFF_DEM),
    _s("thickness", None, "the unit's thickness between the base and the top surface", _SEC),
    _s("thickness.top_model", None, "surface model of the top", "text"),
    _s("thickness.true_thickness_method", None, "in words", "text"),
    _s("thickness.n_cells", None, "cells within reach of data of both surfaces", "integer"),
    _s("thickness.mean_m", "m", "mean true thickness"), _s("thickness.std_m", "m", "its standard deviation"),
    _s("thickness.p10_m", "m", "10th percentile"), _s("thickness.p90_m", "m", "90th percentile"),
    _s("thickness.n_top_picks", None, "picks on the top contacts", "integer"),
    _s("thickness.note", None, "over which cells, in words", "text"),
    _s("thickness.reason", None, "why no thickness was computed", "text"),
    _s("map_units", None, "the map's units as bounds", _SEC), *_under("map_units", _MAP_UNITS),
)

#: The JSON of ``strikeline attitude --out`` (and what it prints).
ATTITUDE_REPORT_KEYS: tuple[Name, ...] = (
    _s("version", None, "strikeline version", "text"), _s("crs", None, "the points' CRS", "text"),
    _s("points", None, "the points layer", _SEC), _s("points.file", None, "file name", "text"),
    _s("points.sha256", None, "SHA-256 of the file", "text"), _s("points.layer", None, "layer name", "text"),
    _s("points.where", None, "SQL filter", "text"), _s("points.elevation_from", None, "Z or a field", "text"),
    _s("n_points", None, "points with an elevation", "integer"),
    _s("n_points_without_elevation", None, "points left out", "integer"),
    _s("options", None, "the options", _SEC), _s("options.dem_sigma_m", "m", "vertical standard error"),
    _s("options.resamples", None, "bootstrap resamples", "integer"),
    _s("options.seed", None, "seed", "integer"), _s("options.group_by", None, "grouping field", "text"),
    _s("plane", None, "the plane of all points", _SEC), *_under("plane", PLANE_KEYS),
    _s("groups", None, "one plane per group", _SEC), _s("groups.field", None, "the grouping field", "text"),
    _s("groups.planes", None, "the planes by group label", _SEC), _s("groups.planes.*", None, "one group", _SEC),
    *_under("groups.planes.*", PLANE_KEYS),
    _s("conventions", None, "angle conventions, in words", "text"),
    _s("caution", None, "the caution", "text"),
)

# --------------------------------------------------------------------------- QGIS numbers and strings
#: The numbers and strings the QGIS tools return besides their layers and rasters.
QGIS_OUTPUTS: tuple[Name, ...] = (
    *(_PLANE[k] for k in ("dip_deg", "dip_direction_deg", "strike_rhr_deg", "rms_m", "n_picks",
                          "dip_direction_true_deg", "dip_ci95_deg", "dip_direction_ci95_deg", "cone95_deg",
                          "coplanarity", "collinearity", "quality", "reason")),
    _n("model_chosen", None, "the surface model used (summary: model.chosen)", "text"),
    _n("cv_rmse_m", "m", "cross-validation RMSE of the model used"),
    _n("reach_m", "m", "distance from the data beyond which the surface is extrapolated"),
    _n("unit_check_n_violated", None, "map-unit check points the surface still breaks", "integer"),
    _n("trace_misfit_median_m", "m", "median distance of the contact vertices to the predicted trace"),
    _n("trace_misfit_p90_m", "m", "90th percentile of that distance"),
    _n("trace_misfit_n_vertices", None, "contact vertices on the DEM", "integer"),
    _n("n_picks_dem", None, "picks from the DEM", "integer"),
    _n("n_picks_contours", None, "picks from contour lines", "integer"),
    _n("n_lines", None, "structure-contour lines", "integer"),
    _n("window_m", "m", "local-attitude window radius used"),
    _n("n_windows", None, "local-attitude windows", "integer"),
    _n("n_windows_determined", None, "windows with an attitude", "integer"),
    _n("true_thickness_median_m", "m", "median true thickness"),
    _n("n_negative_cells", None, "cells where the top lies below the base", "integer"),
    _n("n_measurements", None, "measurements given a thickness", "integer"),
    _n("summary", None, "path of the summary JSON (the whole chain)", "text"),
    _n("report", None, "path of report.html (the whole chain; absent without matplotlib or with its no-report "
                       "parameter)", "text"),
)
QGIS_OUTPUT_NAMES = frozenset(n.name for n in QGIS_OUTPUTS)

#: The keys of a batch's batch.json (``strikeline batch``; ``*``: a sheet's or an edge's name).
BATCH_KEYS: tuple[Name, ...] = (
    _s("version", None, "strikeline version", "text"),
    _s("job_file", None, "the job file, as an absolute path", "text"),
    _s("caution", None, "the caution on forecasts", "text"),
    _s("n_ok", None, "sheets run and written", "integer"), _s("n_failed", None, "sheets that failed", "integer"),
    _s("n_unchanged", None, "sheets skipped: inputs and options as in their intact earlier results", "integer"),
    _s("seconds", None, "wall-clock time of the batch, in seconds (a timing: differs between runs)"),
    _s("sheets", None, "one record per sheet, by name", _SEC), _s("sheets.*", None, "one sheet", _SEC),
    _s("sheets.*.status", None, "ok, failed or unchanged", "text"),
    _s("sheets.*.error", None, "why the sheet failed, in one line (null: it did not)", "text"),
    _s("sheets.*.folder", None, "the sheet's output folder, relative to the batch folder", "text"),
    _s("sheets.*.contact", None, "the contact the sheet models (the job file's contact key)", "text"),
    _s("sheets.*.inputs", None, "SHA-256 of every input file (GDAL's side files included), by absolute path", _SEC),
    _s("sheets.*.inputs.*", None, "SHA-256 of one file", "text"),
    _s("sheets.*.options", None, "the run options of the sheet (absolute paths; out and overwrite left out)", _SEC),
    _s("sheets.*.options.*", None, "one option, by its name", "text"),
    _s("sheets.*.version", None, "strikeline version of the sheet's record (a new version redoes the sheet)", "text"),
    _s("sheets.*.seconds", None, "wall-clock time of the sheet's run, in seconds (a timing; null: not run now)"),
    _s("sheets.*.earlier_results", None, "true when the sheet failed and its folder still holds the results of an "
       "earlier run (not of this run's inputs and options: a failed run leaves the folder as it was)", "bool"),
    _s("sheets.*.earlier_results_utc", None, "when those earlier results were written (ISO 8601, UTC: the time "
       "of the folder's manifest); null when there are none or the sheet did not fail", "text"),
    _s("sheets.*.warnings", None, "the lines the sheet's run logged as warnings, in order (a sheet skipped as "
       "unchanged keeps those of the run that made its results)", "text"),
    _s("sheets.*.plane", None, "the sheet's best-fit plane (its summary's plane)", _SEC),
    *_under("sheets.*.plane", tuple(_PLANE[k] for k in ("dip_deg", "dip_direction_deg", "strike_rhr_deg",
                                                        "dip_ci95_deg", "dip_direction_ci95_deg", "n_picks",
                                                        "quality"))),
    _s("edges", None, "one record per shared edge of two sheets that model the same contact", _SEC),
    _s("edges.*", None, "one edge, named sheet_a/sheet_b", _SEC),
    *_under("edges.*", _EDGE_FIELDS),
    _s("edges.*.length_m", "m", "length of the shared edge"),
    _s("edges.*.n_levels", None, "structure-contour elevations crossing the edge in both sheets", "integer"),
    _s("edges.*.interval_m", "m", "elevation step of the compared crossings (the finer contour interval)"),
    _s("edges.*.note", None, "why the edge was not compared, or how it was sampled, in words", "text"),
)


#: The keys of a ``--log-json`` file (``strikeline.cli.progress``): one JSON object per line and
#: event; each line holds ``event`` and the keys of its kind.
LOG_KEYS: tuple[Name, ...] = (
    _s("event", None, "start, step_start, step_end, message or end", "text"),
    _s("format", None, "start: strikeline-log, the mark that lets a later run replace the file", "text"),
    _s("log_version", None, "start: version of this layout of events", "integer"),
    _s("version", None, "start: strikeline version", "text"),
    _s("command", None, "start: the command line, as a list of words", "text"),
    _s("time_utc", None, "start: when the command began (ISO 8601, UTC)", "text"),
    _s("step", None, "step_start, step_end: the step's name (reading inputs, picks, ..., writing outputs)", "text"),
    _s("index", None, "step_start, step_end: the step's place in the run, from 1", "integer"),
    _s("total", None, "step_start, step_end: steps in the run", "integer"),
    _s("sheet", None, "the sheet of a series the event belongs to (absent for a single run)", "text"),
    _s("wall_s", None, "step_end, end: wall-clock seconds of the step or the command (a timing)"),
    _s("cpu_s", None, "step_end, end: CPU seconds of the process over the step or the command, all threads"),
    _s("peak_rss_mib", None, "step_end, end: peak resident memory of the process so far, MiB"),
    _s("level", None, "message: info, warning or error", "text"),
    _s("text", None, "message: the line, as the log prints it", "text"),
    _s("status", None, "end: ok or error", "text"),
    _s("message", None, "end: the one-line error (null when ok)", "text"),
    _s("exit_code", None, "end: the command's exit status", "integer"),
    _s("t_s", None, "every event but start: seconds since the log began"),
)


def summary_path_names(keys=SUMMARY_KEYS) -> frozenset[str]:
    """The dotted paths of a summary's vocabulary."""
    return frozenset(k.name for k in keys)


def json_paths(obj, keys=SUMMARY_KEYS, prefix: str = "") -> set[str]:
    """The dotted paths of a JSON object, with ``*`` where the vocabulary says the keys are data.

    >>> sorted(json_paths({"groups": {"planes": {"Kv": {}}}, "n_picks": 3}))
    ['groups', 'groups.planes', 'groups.planes.*', 'n_picks']
    """
    known = summary_path_names(keys)
    out = set()
    if not isinstance(obj, dict):
        return out
    for k, v in obj.items():
        path = f"{prefix}.{k}" if prefix else k
        if path not in known and f"{prefix}.*" in known:
            path = f"{prefix}.*"
        out.add(path)
        out |= json_paths(v, keys, path)
    return out


def all_names() -> dict[str, tuple]:
    """Every name by where it is written: ``{"layer:<name>": fields, "raster": ..., ...}``."""
    out = {f"layer:{layer.name}": layer.fields for layer in LAYERS.values()}
    out["summary"] = SUMMARY_KEYS
    out["attitude_report"] = ATTITUDE_REPORT_KEYS
    out["qgis_outputs"] = QGIS_OUTPUTS
    out.update({f"layer:{layer.name}": layer.fields for layer in INDEX_LAYERS})
    out["batch"] = BATCH_KEYS
    out["log"] = LOG_KEYS
    return out


# --------------------------------------------------------------------------- the README's reference
#: The markers around the output reference in README.md.
README_START = "<!-- output reference: generated by python -m strikeline.vocabulary; do not edit by hand -->"
README_END = "<!-- end of output reference -->"


def _row(*cells) -> str:
    return "| " + " | ".join(c.replace("|", "/") for c in cells) + " |"


def _unit(u: str | None) -> str:
    return u or "-"


def reference_markdown() -> str:
    """The README's output reference: every layer and field, raster, summary key and QGIS output,
    with its unit and meaning (``tests/test_vocabulary.py`` checks the README against this)."""
    lines = [README_START, "", "### Layers (`results.gpkg`, and the QGIS tools' vector outputs)", "",
             _row("layer", "field", "unit", "meaning"), _row("---", "---", "---", "---")]
    for layer in LAYERS.values():
        when = f" ({layer.written_when})" if layer.written_when else ""
        lines.append(_row(f"`{layer.name}`", f"({layer.geometry})", "-", layer.meaning + when))
        for f in layer.fields:
            opt = " (when known)" if f.name in layer.optional else ""
            lines.append(_row(f"`{layer.name}`", f"`{f.name}`", _unit(f.unit), f.meaning + opt))
        if layer.input_attributes:
            lines.append(_row(f"`{layer.name}`", f"`{layer.input_attributes}*`", "-",
                              "each attribute of the contact feature, under its own name after this prefix "
                              "(numbers as real, others as text; null where its input lacks the field)"))
    lines += ["", "### Rasters (float32 GeoTIFF)", "", _row("file", "unit", "meaning"), _row("---", "---", "---")]
    lines += [_row(f"`{r.file}`", _unit(r.unit), r.meaning) for r in RASTERS.values()]
    lines += ["", "### Other files of a run's folder", "", _row("file", "unit", "meaning"), _row("---", "---", "---")]
    lines += [_row(f"`{name}`", "-", meaning) for name, meaning in RUN_FILES]
    for title, keys in (("`summary.json`", SUMMARY_KEYS), ("`strikeline attitude --out`", ATTITUDE_REPORT_KEYS)):
        lines += ["", f"### Keys of {title} (`*`: a key that is data - file, group, model or class)", "",
                  _row("key", "unit", "meaning"), _row("---", "---", "---")]
        lines += [_row(f"`{k.name}`", _unit(k.unit), k.meaning) for k in keys]
    lines += ["", "### Layers of a batch's `index.gpkg` (`strikeline batch`)", "",
              _row("layer", "field", "unit", "meaning"), _row("---", "---", "---", "---")]
    for layer in INDEX_LAYERS:
        lines.append(_row(f"`{layer.name}`", f"({layer.geometry})", "-", layer.meaning))
        lines += [_row(f"`{layer.name}`", f"`{f.name}`", _unit(f.unit),
                       f.meaning + (" (when known)" if f.name in layer.optional else "")) for f in layer.fields]
    lines += ["", "### Keys of a batch's `batch.json` (`*`: a sheet's or an edge's name)", "",
              _row("key", "unit", "meaning"), _row("---", "---", "---")]
    lines += [_row(f"`{k.name}`", _unit(k.unit), k.meaning) for k in BATCH_KEYS]
    lines += ["", "### Keys of a `--log-json` file (one JSON object per line and event)", "",
              _row("key", "unit", "meaning"), _row("---", "---", "---")]
    lines += [_row(f"`{k.name}`", _unit(k.unit), k.meaning) for k in LOG_KEYS]
    lines += ["", "### QGIS numbers and strings (besides the layers and rasters above)", "",
              _row("output", "unit", "meaning"), _row("---", "---", "---")]
    lines += [_row(f"`{n.name}`", _unit(n.unit), n.meaning) for n in QGIS_OUTPUTS]
    lines += ["", README_END]
    return "\n".join(lines) + "\n"


if __name__ == "__main__":  # print the README's output reference
    print(reference_markdown(), end="")
