"""Coordinate reference systems: checks that layers are projected in metres, and reprojection.

Past this module a CRS is text: WKT (``""`` for none). GDAL's ``osr`` objects are made here, from
that text, and never handed out.
"""
from __future__ import annotations

import numpy as np
import shapely
from osgeo import osr

from strikeline.errors import CRSError


def _srs(wkt: str | None) -> osr.SpatialReference | None:
    """GDAL's object for a WKT string (``None`` for no CRS), axes in x/y (easting, northing) order."""
    if not wkt:
        return None
    srs = osr.SpatialReference()
    srs.ImportFromWkt(wkt)
    srs.SetAxisMappingStrategy(osr.OAMS_TRADITIONAL_GIS_ORDER)
    return srs


def crs_label(wkt: str | None) -> str:
    """How messages and summary.json name a CRS given as WKT.

    ``EPSG:nnnn`` where the CRS as a whole has an authority code: written in the WKT, or found by
    GDAL (``AutoIdentifyEPSG``, else an exact match, confidence 100, in PROJ's database). Otherwise
    its own name (osr's ``GetName``; ``unnamed <projection method>`` when it has none), the words
    ``no EPSG code`` and its unit: ``"Sheet grid (no EPSG code, US survey foot)"``. The code of a
    part - the geographic CRS a custom projected CRS is based on - never labels the whole. A
    compound CRS is its horizontal and vertical labels joined by ``" + "``; no CRS is ``"no CRS"``.
    """
    srs = _srs(wkt)
    # a GeoPackage layer without a CRS reads back as GDAL's placeholder for srs_id 0 or -1
    # (OGC 12-128r18, requirement 11): no CRS, not a geographic one
    if srs is None or not srs.ExportToWkt() or srs.GetName() in ("Undefined geographic SRS",
                                                                  "Undefined Cartesian SRS"):
        return "no CRS"
    code = _authority_code(srs)
    if code:
        return code
    if srs.IsCompound():
        horizontal = srs.Clone()
        horizontal.StripVertical()
        vcode = (f"{srs.GetAuthorityName('VERT_CS')}:{srs.GetAuthorityCode('VERT_CS')}"
                 if srs.GetAuthorityName("VERT_CS") and srs.GetAuthorityCode("VERT_CS") else
                 f"{srs.GetAttrValue('VERT_CS') or 'unnamed vertical CRS'} (no EPSG code, "
                 f"{srs.GetAttrValue('VERT_CS|UNIT') or 'unknown unit'})")
        return f"{crs_label(horizontal.ExportToWkt())} + {vcode}"
    name = srs.GetName()
    if not name or name.lower() == "unknown":
        method = (srs.GetAttrValue("PROJECTION") or "").replace("_", " ")
        name = f"unnamed {method} CRS" if method else "unnamed CRS"
    unit = srs.GetAngularUnitsName() if srs.IsGeographic() else srs.GetLinearUnitsName()
    return f"{name} (no EPSG code, {unit or 'unknown unit'})"


def _authority_code(srs: osr.SpatialReference) -> str | None:
    """``AUTH:code`` of the CRS as a whole (its root node), as written or identified; else None."""
    auth, code = srs.GetAuthorityName(None), srs.GetAuthorityCode(None)
    if auth and code:
        return f"{auth}:{code}"
    probe = srs.Clone()
    try:
        if probe.AutoIdentifyEPSG() == 0 and probe.GetAuthorityName(None) and probe.GetAuthorityCode(None):
            return f"{probe.GetAuthorityName(None)}:{probe.GetAuthorityCode(None)}"
    except RuntimeError:
        pass
    try:
        matches = srs.FindMatches() or []
    except RuntimeError:
        matches = []
    for match, confidence in matches:
        if confidence == 100 and match.GetAuthorityName(None) and match.GetAuthorityCode(None):
            return f"{match.GetAuthorityName(None)}:{match.GetAuthorityCode(None)}"
    return None


def utm_suggestion(lon: float, lat: float) -> str:
    """The WGS 84 / UTM zone EPSG code for a longitude/latitude."""
    zone = int(np.clip(np.floor((lon + 180.0) / 6.0) + 1, 1, 60))
    return f"EPSG:{(32600 if lat >= 0 else 32700) + zone}"


#: Names GDAL gives the placeholders a GeoPackage records for a layer without a CRS (srs_id 0 and
#: -1 of the GeoPackage standard, OGC 12-128r18, requirement 11): no CRS, not a geographic one.
UNDEFINED_CRS_NAMES = ("Undefined geographic SRS", "Undefined Cartesian SRS")


def _degrees(xy) -> bool:
    """Whether a point can be a longitude and latitude."""
    x, y = xy
    return bool(np.isfinite(x) and np.isfinite(y) and -360.0 <= x <= 360.0 and -90.0 <= y <= 90.0)


def require_projected_metres(wkt: str | None, *, what: str, centre_xy=None) -> None:
    """Refuse a missing CRS, a geographic CRS, or a projected CRS not in metres.

    Parameters
    ----------
    wkt : str or None
        The CRS as WKT; ``""`` or ``None`` for none.
    what : str
        How to name the input in a message, e.g. ``"DEM 'dem.tif'"``.
    centre_xy : (float, float), optional
        Centre of the data in the layer's own coordinates, used to suggest a UTM zone.
    """
    srs = _srs(wkt)
    placeholder = srs is not None and srs.GetName() in UNDEFINED_CRS_NAMES
    if srs is None or placeholder:
        said = f" (its file records only the placeholder '{srs.GetName()}')" if placeholder else ""
        raise CRSError(
            f"{what} has no coordinate reference system{said}; assign the projected CRS its coordinates are in "
            "(gdal_edit.py -a_srs EPSG:nnnn for a raster, ogr2ogr -a_srs EPSG:nnnn for a vector layer) "
            "and try again"
        )
    if srs.IsLocal():
        raise CRSError(
            f"{what} has only a local (engineering) coordinate system '{srs.GetName()}', not a projected CRS; "
            "assign the projected CRS its coordinates are in (gdal_edit.py -a_srs or ogr2ogr -a_srs) and try again"
        )
    if srs.IsGeographic() or not srs.IsProjected():
        if centre_xy is not None and srs.IsGeographic() and not _degrees(centre_xy):
            x, y = centre_xy
            raise CRSError(
                f"{what} declares the geographic CRS {crs_label(wkt)} (degrees) but its coordinates (centre "
                f"{x:.10g}, {y:.10g}) are not longitudes and latitudes, so the declared CRS is wrong (a GeoJSON "
                "file without a 'crs' member is read as WGS 84); assign the projected CRS the coordinates are "
                "really in (ogr2ogr -a_srs EPSG:nnnn, gdal_edit.py -a_srs for a raster) and try again"
            )
        hint = ""
        if centre_xy is not None and srs.IsGeographic():
            lon, lat = centre_xy
            hint = f" such as {utm_suggestion(lon, lat)} (the UTM zone of the data's centre)"
        raise CRSError(
            f"{what} is in the geographic CRS {crs_label(wkt)} (degrees); strikeline works in metres - "
            f"reproject it to a projected CRS in metres{hint}"
        )
    units = srs.GetLinearUnits()
    if abs(units - 1.0) > 1e-9:
        raise CRSError(
            f"{what} is in {crs_label(wkt)} whose unit is {srs.GetLinearUnitsName()} "
            f"({units} m); strikeline needs metres - reproject it to a projected CRS in metres"
        )


def same_crs(a: str | None, b: str | None) -> bool:
    """Whether two CRSs (WKT) are the same; two missing CRSs are the same, one missing is not."""
    sa, sb = _srs(a), _srs(b)
    if sa is None or sb is None:
        return sa is None and sb is None
    return bool(sa.IsSame(sb))


def _wkt_of(srs: osr.SpatialReference | None) -> str:
    """The WKT of a GDAL CRS object (``""`` for none): how io/ hands a CRS on."""
    return srs.ExportToWkt() if srs is not None else ""


def reproject_geometries(geoms, src: str, dst: str):
    """Reproject an array of shapely geometries from CRS ``src`` to ``dst`` (WKT; 2-D, vectorised)."""
    ct = osr.CoordinateTransformation(_srs(src), _srs(dst))

    def _transform(coords: np.ndarray) -> np.ndarray:
        if len(coords) == 0:
            return coords
        out = np.asarray(ct.TransformPoints(coords.tolist()), dtype=float)
        return out[:, :2]

    return shapely.transform(np.asarray(geoms, dtype=object), _transform)
