"""Coordinate reference systems: checks that layers are projected in metres, and reprojection."""
from __future__ import annotations

import numpy as np
import shapely
from osgeo import osr

from strikeline.errors import CRSError


def srs_from_wkt(wkt: str) -> osr.SpatialReference | None:
    if not wkt:
        return None
    srs = osr.SpatialReference()
    srs.ImportFromWkt(wkt)
    srs.SetAxisMappingStrategy(osr.OAMS_TRADITIONAL_GIS_ORDER)
    return srs


def crs_label(srs: osr.SpatialReference | None) -> str:
    """``EPSG:nnnn`` where the CRS has an EPSG code, else its name."""
    if srs is None:
        return "no CRS"
    probe = srs.Clone()
    try:
        probe.AutoIdentifyEPSG()
    except RuntimeError:
        pass
    for key in ("PROJCS", "GEOGCS", None):
        auth, code = probe.GetAuthorityName(key), probe.GetAuthorityCode(key)
        if auth and code:
            return f"{auth}:{code}"
    return probe.GetName() or "unnamed CRS"


def utm_suggestion(lon: float, lat: float) -> str:
    """The WGS 84 / UTM zone EPSG code for a longitude/latitude."""
    zone = int(np.clip(np.floor((lon + 180.0) / 6.0) + 1, 1, 60))
    return f"EPSG:{(32600 if lat >= 0 else 32700) + zone}"


def require_projected_metres(srs: osr.SpatialReference | None, *, what: str, centre_xy=None) -> None:
    """Refuse a missing CRS, a geographic CRS, or a projected CRS not in metres.

    Parameters
    ----------
    srs : osr.SpatialReference or None
    what : str
        How to name the input in a message, e.g. ``"DEM 'dem.tif'"``.
    centre_xy : (float, float), optional
        Centre of the data in the layer's own coordinates, used to suggest a UTM zone.
    """
    if srs is None:
        raise CRSError(
            f"{what} has no coordinate reference system; assign its projected CRS "
            "(for example with gdal_edit.py -a_srs or ogr2ogr -a_srs) and try again"
        )
    if srs.IsGeographic() or not srs.IsProjected():
        hint = ""
        if centre_xy is not None and srs.IsGeographic():
            lon, lat = centre_xy
            hint = f" such as {utm_suggestion(lon, lat)} (the UTM zone of the data's centre)"
        raise CRSError(
            f"{what} is in the geographic CRS {crs_label(srs)} (degrees); strikeline works in metres - "
            f"reproject it to a projected CRS in metres{hint}"
        )
    units = srs.GetLinearUnits()
    if abs(units - 1.0) > 1e-9:
        raise CRSError(
            f"{what} is in {crs_label(srs)} whose unit is {srs.GetLinearUnitsName()} "
            f"({units} m); strikeline needs metres - reproject it to a projected CRS in metres"
        )


def same_crs(a: osr.SpatialReference, b: osr.SpatialReference) -> bool:
    return bool(a.IsSame(b))


def reproject_geometries(geoms, src: osr.SpatialReference, dst: osr.SpatialReference):
    """Reproject an array of shapely geometries from ``src`` to ``dst`` (2-D, vectorised)."""
    ct = osr.CoordinateTransformation(src, dst)

    def _transform(coords: np.ndarray) -> np.ndarray:
        if len(coords) == 0:
            return coords
        out = np.asarray(ct.TransformPoints(coords.tolist()), dtype=float)
        return out[:, :2]

    return shapely.transform(np.asarray(geoms, dtype=object), _transform)
