"""strikeline: the 3D geometry of mapped geological contacts.

The numerical modules (:mod:`strikeline.geometry.orientation`, :mod:`strikeline.attitude.fitting`,
:mod:`strikeline.picks`, :mod:`strikeline.maps.dipgrids`, ...) take and return numpy arrays and
shapely geometries and do no I/O. :mod:`strikeline.io` is the only place that talks to
GDAL/OGR; :mod:`strikeline.pipeline` chains the steps; :mod:`strikeline.cli` is the command line.
"""
from strikeline._version import __version__

CAUTION = (
    "Caution: depths, structure contours and predicted outcrops are interpretations of map data, "
    "not a substitute for site investigation; engineering use (drill holes, tunnels, foundations) "
    "needs review by a qualified, licensed professional under local codes."
)

__all__ = ["__version__", "CAUTION"]
