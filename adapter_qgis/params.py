"""QGIS parameters built from strikeline's table of options (:mod:`strikeline.pipeline.options`).

:func:`parameter` turns one option into the matching ``QgsProcessingParameter*`` (a number with
its bounds, a distance, an enum of the allowed values, a string, a field, a layer), with the
table's default, label and advanced flag; :func:`value` reads it back as the library takes it
(an unset number - 0 in QGIS - as None, an enum as its allowed value) and checks it against the
table, so a refusal names the parameter's label as the command line names the flag.
"""
from __future__ import annotations

from qgis.core import (
    QgsProcessing,
    QgsProcessingParameterBoolean,
    QgsProcessingParameterDefinition,
    QgsProcessingParameterDistance,
    QgsProcessingParameterEnum,
    QgsProcessingParameterExtent,
    QgsProcessingParameterFeatureSource,
    QgsProcessingParameterField,
    QgsProcessingParameterNumber,
    QgsProcessingParameterRasterLayer,
    QgsProcessingParameterString,
)

from strikeline.pipeline.options import CLI_OPTION_NAMES, check_value, option, options_of

#: Layer geometry of a ``"path"`` option -> the QGIS source type.
SOURCE_TYPES = {"line": QgsProcessing.TypeVectorLine, "point": QgsProcessing.TypeVectorPoint,
                "polygon": QgsProcessing.TypeVectorPolygon, "any": QgsProcessing.TypeVectorAnyGeometry}


def parameter(alg, name: str, *, parent: str | None = None, optional: bool | None = None,
              advanced: bool | None = None):
    """The QGIS parameter of table option ``name`` for tool ``alg``.

    ``parent`` is the parameter whose layer a field belongs to (default: the table's parent
    option's parameter) or, for a length in metres, whose CRS gives the distance its unit (the
    parameter is then a distance). ``optional`` defaults to "not required by the table",
    ``advanced`` to the table's flag (a tool whose main setting the option is shows it at once).
    """
    o = option(name)
    if not o.qgis:
        raise ValueError(f"option {name!r} has no QGIS parameter in the table")
    label = alg.tr(o.label_for(alg.name()))
    optional = (not o.required) if optional is None else optional
    if o.kind == "path":
        if o.geometry == "raster":
            p = QgsProcessingParameterRasterLayer(o.qgis, label, optional=optional)
        else:
            p = QgsProcessingParameterFeatureSource(o.qgis, label, [SOURCE_TYPES[o.geometry]], optional=optional)
    elif o.kind == "field":
        parent = parent or option(o.parent).qgis
        kind = QgsProcessingParameterField.Numeric if o.numeric else QgsProcessingParameterField.Any
        p = QgsProcessingParameterField(o.qgis, label, defaultValue=o.default, parentLayerParameterName=parent,
                                        type=kind, optional=optional)
    elif o.choices:  # without a default the choice may stay empty: the library then chooses (o.unset)
        p = QgsProcessingParameterEnum(o.qgis, label, options=[alg.tr(x) for x in o.choice_labels],
                                       defaultValue=o.qgis_default, optional=o.default is None)
    elif o.nargs == 4 and o.unit == "m":  # an extent XMIN YMIN XMAX YMAX: read with extent_value()
        p = QgsProcessingParameterExtent(o.qgis, label, optional=True)
    elif o.kind is bool:
        p = QgsProcessingParameterBoolean(o.qgis, label, defaultValue=o.default)
    elif o.kind is str:
        p = QgsProcessingParameterString(o.qgis, label, defaultValue=o.default, optional=optional)
    elif o.is_number:
        bounds = {}
        if o.minimum is not None:
            bounds["minValue"] = o.minimum
        if o.maximum is not None:
            bounds["maxValue"] = o.maximum
        if o.kind is float and o.unit == "m" and parent is not None:
            p = QgsProcessingParameterDistance(o.qgis, label, defaultValue=o.qgis_default, parentParameterName=parent,
                                               optional=optional, **bounds)
        else:
            kind = QgsProcessingParameterNumber.Integer if o.kind is int else QgsProcessingParameterNumber.Double
            p = QgsProcessingParameterNumber(o.qgis, label, kind, defaultValue=o.qgis_default, optional=optional,
                                             **bounds)
    else:
        raise ValueError(f"option {name!r} of kind {o.kind!r} has no QGIS parameter type")
    if o.advanced if advanced is None else advanced:
        p.setFlags(p.flags() | QgsProcessingParameterDefinition.FlagAdvanced)
    return p


def add_parameters(alg, *names: str, parent: str | None = None) -> None:
    """Add the parameters of ``names`` (as :func:`parameter`) to ``alg``."""
    for name in names:
        alg.addParameter(parameter(alg, name, parent=parent))


def option_names(alg) -> dict:
    """How messages name the options: ``the '<parameter label>'`` for the tool's parameters, the
    command-line flag for any other."""
    names = dict(CLI_OPTION_NAMES)
    for o in options_of(tool=alg.name()):
        definition = alg.parameterDefinition(o.qgis)
        if definition is not None:
            names[o.name] = f"the '{definition.description()}'"
    return names


def value(alg, parameters, name: str, context):
    """The value of option ``name``'s parameter as the library takes it, checked against the table.

    An unset number (0 where the table's default is None) and an empty text are None, an enum
    is its allowed value; a value outside the table's bounds is refused with the parameter's
    label (:func:`strikeline.pipeline.options.check_value`).
    """
    o = option(name)
    if o.nargs == 4:
        raise ValueError(f"option {name!r} is an extent: read it with extent_value(), in the CRS it is meant in")
    if o.choices and o.default is None and parameters.get(o.qgis) in (None, ""):
        v = None  # left empty: the library chooses, as without the flag
    elif o.choices:
        v = o.choices[alg.parameterAsEnum(parameters, o.qgis, context)]
    elif o.kind is bool:
        v = alg.parameterAsBool(parameters, o.qgis, context)
    elif o.kind is int:
        v = alg.parameterAsInt(parameters, o.qgis, context)
    elif o.kind is float:
        v = alg.parameterAsDouble(parameters, o.qgis, context)
        if o.default is None and v == 0:
            v = None
    else:
        v = alg.parameterAsString(parameters, o.qgis, context) or None
    return check_value(name, v, names=option_names(alg))


def values(alg, parameters, context, *names: str) -> dict:
    """``{name: value(...)}`` for each of ``names``."""
    return {name: value(alg, parameters, name, context) for name in names}


def extent_value(alg, parameters, name: str, context, crs_wkt: str) -> tuple | None:
    """The extent parameter of option ``name`` as ``(xmin, ymin, xmax, ymax)`` in the CRS
    ``crs_wkt`` (QGIS transforms an extent drawn or taken from a layer in another CRS), checked as
    the command line checks ``--extent``; None when it is left empty."""
    from strikeline.geometry.grid import check_extent

    from .layers import qgis_crs

    o = option(name)
    if alg.parameterAsExtent(parameters, o.qgis, context).isNull():
        return None
    ext = alg.parameterAsExtent(parameters, o.qgis, context, qgis_crs(crs_wkt))
    return check_extent((ext.xMinimum(), ext.yMinimum(), ext.xMaximum(), ext.yMaximum()),
                        what=option_names(alg)[name])


#: The options of ``strikeline run`` that the whole-chain tool has no parameter for, and why: every
#: other option of ``run`` is one of its parameters (tests/qgis/test_qgis_options.py holds both ways).
CLI_ONLY = {
    "contacts_layer": "a QGIS layer parameter names its layer; a GeoPackage's layers are chosen as layers",
    "where": "QGIS filters a layer itself (the layer's filter, or 'Selected features only')",
    "contours_layer": "a QGIS layer parameter names its layer",
    "out": "each QGIS output has a destination of its own",
    "overwrite": "QGIS asks before it replaces a destination",
    "quiet": "QGIS shows progress and messages in the tool's dialog and log",
    "log_json": "the step timings and messages go to the QGIS log",
    "block_cells": "the QGIS tools hand their grids to QGIS from memory; block-wise grids written to files "
                   "are the command line's (the workload check refuses a grid too large for memory)",
    "boreholes_layer": "a QGIS layer parameter names its layer",
    "orientations_layer": "a QGIS layer parameter names its layer",
    "top_contacts_layer": "a QGIS layer parameter names its layer",
    "top_where": "QGIS filters a layer itself (the layer's filter, or 'Selected features only')",
    "x_field": "QGIS opens delimited text as a point layer with its own X and Y fields",
    "y_field": "QGIS opens delimited text as a point layer with its own X and Y fields",
    "crs": "a QGIS layer carries its CRS (set it in the layer's properties)",
    "map_units_layer": "a QGIS layer parameter names its layer",
}
