"""Reading and writing: the only part of strikeline that talks to GDAL/OGR.

``raster`` (rasters as ``(array with NaN, Grid)``, atomic GeoTIFF writing), ``vector`` (layers to
shapely, GeoPackage writing), ``crs`` (CRS checks and reprojection, CRS passed on as WKT),
``contours`` (GDAL's contour generator; the checks of levels and trimming of lines it uses are in
:mod:`strikeline.maps.contours`) and ``files`` (atomic folders and files, stable JSON, checksums).
Import from the module (``from strikeline.io.raster import read_raster``): importing this package
alone loads no GDAL.
"""
