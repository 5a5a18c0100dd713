"""Default values of strikeline's options, with their basis (kept light: no heavy imports)."""

MODELS = ("auto", "plane", "trend2", "spline")

#: Default vertical standard error of DEM picks (metres). Basis: national DEMs of 5-25 m cells
#: state vertical accuracies (RMSE) of about 1-5 m; 2 m is a middle value (common practice).
DEFAULT_DEM_SIGMA_M = 2.0
#: Default horizontal positional standard error of contour picks (metres): half of a 5 m
#: positional tolerance, i.e. 0.5 mm at 1:10,000 (common practice for digitised line work).
DEFAULT_CONTOUR_SIGMA_M = 2.5
#: Default horizontal positional standard error of the mapped contact itself (metres), on the
#: same basis as contours: linework digitised at 1:10,000 (common practice). It turns into a
#: vertical error of DEM picks through the ground slope.
DEFAULT_CONTACT_SIGMA_M = 2.5
#: Default standard error of a borehole's surface elevation (metres).
DEFAULT_BOREHOLE_SIGMA_M = 1.0
#: Default standard error of a measured dip (degrees; compass-clinometer readings, common practice).
DEFAULT_ORIENTATION_SIGMA_DEG = 5.0
#: Misfit QA: contact segments are this many DEM cells long, flagged beyond this many cells.
SEGMENT_CELLS = 10
FLAG_CELLS = 3
#: Misfit QA: a segment is flagged when its vertical misfit against the forecast made without
#: it exceeds this many standard errors (two-sided 0.27 % for normal errors; common practice).
MISFIT_Z = 3.0
