"""Shared parameters and input reading: contacts and topography into the library's ``Inputs``."""
from __future__ import annotations

import numpy as np
import shapely
from qgis.core import (
    QgsProcessing,
    QgsProcessingParameterFeatureSource,
    QgsProcessingParameterField,
    QgsProcessingParameterRasterLayer,
)

from strikeline.errors import InputError
from strikeline.pipeline import Inputs

from .layers import qgis_crs, raster_path, read_raster_layer, read_vector, vector_name

CONTACTS = "CONTACTS"
DEM = "DEM"
CONTOURS = "CONTOURS"
ELEV_FIELD = "ELEV_FIELD"

ELEV_FIELD_LABEL = "Elevation field of the contour lines"


def add_contact_and_topography(alg) -> None:
    """The inputs of picks and of the whole chain: contacts, DEM and/or contours with elevations."""
    alg.addParameter(QgsProcessingParameterFeatureSource(
        CONTACTS, alg.tr("Mapped contact lines"), [QgsProcessing.TypeVectorLine]))
    alg.addParameter(QgsProcessingParameterRasterLayer(
        DEM, alg.tr("DEM (ground elevation, metres)"), optional=True))
    alg.addParameter(QgsProcessingParameterFeatureSource(
        CONTOURS, alg.tr("Topographic contour lines"), [QgsProcessing.TypeVectorLine], optional=True))
    alg.addParameter(QgsProcessingParameterField(
        ELEV_FIELD, alg.tr(ELEV_FIELD_LABEL), parentLayerParameterName=CONTOURS,
        type=QgsProcessingParameterField.Numeric, optional=True))


def source_and_name(alg, parameters, key, context, label) -> tuple:
    """The feature source of parameter ``key`` (None if unset) and how to name it."""
    source = alg.parameterAsSource(parameters, key, context)
    if source is None:
        return None, None
    layer = alg.parameterAsVectorLayer(parameters, key, context)
    return source, vector_name(layer, source, label)


def read_dem(alg, parameters, key, context, steps, *, label="DEM"):
    """``(array, grid, path-or-name)`` of the raster parameter ``key``, or ``(None, None, None)``."""
    layer = alg.parameterAsRasterLayer(parameters, key, context)
    if layer is None:
        return None, None, None
    arr, grid = read_raster_layer(layer, label=label, is_cancelled=steps.is_cancelled)
    return arr, grid, raster_path(layer) or layer.name()


def read_contact_inputs(alg, parameters, context, steps, *, contact_fields=()) -> Inputs:
    """Contacts, DEM and contours of a tool as the library's :class:`strikeline.pipeline.Inputs`.

    Follows :func:`strikeline.pipeline.load_inputs`: at least one topography; the DEM's CRS
    (else the contacts') is the working CRS and the vector layers are transformed into it.
    ``contact_fields`` are attribute fields of the contacts to read as well.
    """
    contacts_src, contacts_name = source_and_name(alg, parameters, CONTACTS, context, "contacts")
    contours_src, contours_name = source_and_name(alg, parameters, CONTOURS, context, "contours")
    dem_given = alg.parameterAsRasterLayer(parameters, DEM, context) is not None
    if not dem_given and contours_src is None:
        raise InputError("no topography given: give a DEM, topographic contour lines with their "
                         "elevation field, or both")
    elev_field = alg.parameterAsString(parameters, ELEV_FIELD, context) if contours_src else ""
    if contours_src is not None and not elev_field:
        raise InputError(f"{contours_name.what}: the elevation field is not named; choose the "
                         f"'{ELEV_FIELD_LABEL}' (the numeric field that holds each contour's elevation)")
    dem, grid, dem_path = read_dem(alg, parameters, DEM, context, steps)
    target = qgis_crs(grid.crs_wkt) if grid is not None else contacts_src.sourceCrs()
    contacts = read_vector(contacts_src, contacts_name, geometry="line", target_crs=target,
                           fields=[f for f in contact_fields if f], context=context, log=steps.log,
                           is_cancelled=steps.is_cancelled)
    contours = elev = None
    if contours_src is not None:
        contours = read_vector(contours_src, contours_name, geometry="line", fields=[elev_field],
                               target_crs=target, context=context, log=steps.log,
                               is_cancelled=steps.is_cancelled)
        elev = contours.numeric_field(elev_field, option=f"the '{ELEV_FIELD_LABEL}'")
        if not np.isfinite(elev).any():
            raise InputError(
                f"field '{elev_field}' of {contours.what} holds no elevation (all null); "
                f"choose the field that holds the contour elevations as the '{ELEV_FIELD_LABEL}'")
    paths = {"contacts": contacts_name.path}
    if dem_path:
        paths["dem"] = dem_path
    if contours_name is not None:
        paths["contours"] = contours_name.path
    crs_wkt = grid.crs_wkt if grid is not None else contacts.srs.ExportToWkt()
    return Inputs(contacts=contacts, crs_wkt=crs_wkt, dem=dem, dem_grid=grid, contours=contours,
                  contour_elevations_m=elev, paths=paths)


PICKS = "PICKS"
PICKS_FIELD = "PICKS_ELEV_FIELD"


def add_picks(alg) -> None:
    """The picks input of the attitude and surface tools (the output of Contact elevation picks)."""
    alg.addParameter(QgsProcessingParameterFeatureSource(
        PICKS, alg.tr("Elevation picks (points)"), [QgsProcessing.TypeVectorPoint]))
    alg.addParameter(QgsProcessingParameterField(
        PICKS_FIELD, alg.tr("Elevation field of the picks (empty: the points' Z)"),
        parentLayerParameterName=PICKS, type=QgsProcessingParameterField.Numeric, optional=True))


def read_points_xyz(alg, parameters, key, field_key, context, steps, *, label, field_label,
                    target_crs=None, fields=(), text_fields=()):
    """Points of parameter ``key`` as ``(xyz (n, 3), source, LayerName, values)``.

    ``z`` comes from the field ``field_key`` or, when it is empty, from the points' Z. ``values``
    maps each of ``fields`` (numeric, float64 with NaN for null) and ``text_fields`` (any type,
    as read) to one value per point. All four are None when the parameter is unset.
    """
    source, name = source_and_name(alg, parameters, key, context, label)
    if source is None:
        return None, None, None, {}
    field = alg.parameterAsString(parameters, field_key, context) if field_key else ""
    wanted = list(dict.fromkeys(f for f in [field, *fields, *text_fields] if f))
    layer = read_vector(source, name, geometry="point", fields=wanted, keep_z=True,
                        target_crs=target_crs, context=context, log=steps.log,
                        is_cancelled=steps.is_cancelled)
    coords, owner = shapely.get_coordinates(layer.geoms, include_z=True, return_index=True)
    if field:
        z = layer.numeric_field(field, option=f"the '{field_label}'")[owner]
    elif not shapely.has_z(layer.geoms).all():
        raise InputError(f"{name.what} has points without Z; choose the '{field_label}' or give "
                         "points with elevations as Z")
    else:
        z = coords[:, 2]
    values = {f: layer.numeric_field(f, option=f"the field '{f}'")[owner] for f in fields}
    values.update({f: layer.fields[f][owner] for f in text_fields})
    return np.column_stack([coords[:, 0], coords[:, 1], z]), source, name, values
