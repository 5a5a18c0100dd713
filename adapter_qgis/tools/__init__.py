"""The Processing tools, one class per module, one module per step of the chain.

Issues still to come add their tools here: local attitudes with confidence (``picks`` group),
further surface models (an option of :class:`SurfaceModel`), isopachs from two surfaces
(``thickness`` group, beside :class:`UnitThickness`).
"""
from .contact_picks import ContactPicks
from .depth_trace import DepthTrace
from .dip_grids import DipGrids
from .plane_attitude import PlaneAttitude
from .structure_contours import StructureContours
from .surface_model import SurfaceModel
from .unit_thickness import UnitThickness
from .whole_chain import WholeChain

ALGORITHMS = (WholeChain, ContactPicks, PlaneAttitude, SurfaceModel, StructureContours, DipGrids,
              DepthTrace, UnitThickness)

__all__ = ["ALGORITHMS"]
