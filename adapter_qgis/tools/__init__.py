"""The Processing tools, one class per module, one module per step of the chain.

A new step gets a module here and a place in ``ALGORITHMS``; further surface models become
options of :class:`SurfaceModel` (its ``METHODS``).
"""
from .contact_picks import ContactPicks
from .depth_trace import DepthTrace
from .dip_grids import DipGrids
from .isopachs import Isopachs
from .local_attitudes import LocalAttitudes
from .plane_attitude import PlaneAttitude
from .structure_contours import StructureContours
from .surface_model import SurfaceModel
from .unit_thickness import UnitThickness
from .whole_chain import WholeChain

ALGORITHMS = (WholeChain, ContactPicks, PlaneAttitude, LocalAttitudes, SurfaceModel, StructureContours, DipGrids,
              DepthTrace, UnitThickness, Isopachs)

__all__ = ["ALGORITHMS"]
