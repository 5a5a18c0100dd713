"""Reading and writing: the only part of strikeline that talks to GDAL/OGR.

``raster`` (rasters as ``(array with NaN, Grid)``, atomic GeoTIFF writing), ``vector`` (layers to
shapely, GeoPackage writing), ``crs`` (CRS checks and reprojection, CRS passed on as WKT),
``contours`` (GDAL's contour generator; the checks of levels and trimming of lines it uses are in
:mod:`strikeline.maps.contours`), ``files`` (output folders with a manifest, a lock and a
crash-safe replace; stable JSON, checksums) and ``interrupt`` (SIGINT/SIGTERM as exceptions,
progress callbacks that stop GDAL's long steps).
Import from the module (``from strikeline.io.raster import read_raster``): importing this package
alone loads no GDAL.
"""
