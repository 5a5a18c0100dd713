"""GDAL/OGR session helpers shared by the I/O modules.

GDAL's exception mode is process-global. Inside QGIS other code may rely on the old mode, so
strikeline turns exceptions on only for the duration of its own calls and restores the previous
mode afterwards.
"""
from __future__ import annotations

import contextlib

from osgeo import gdal, ogr, osr

from strikeline.errors import one_line


@contextlib.contextmanager
def gdal_exceptions():
    """Enable GDAL/OGR/OSR exceptions inside the block, restoring the caller's mode after."""
    previous = (gdal.GetUseExceptions(), ogr.GetUseExceptions(), osr.GetUseExceptions())
    for module in (gdal, ogr, osr):
        module.UseExceptions()
    try:
        yield
    finally:
        # GDAL keeps a stack of error handlers: undo in the reverse order of setting.
        for module, was in reversed(list(zip((gdal, ogr, osr), previous))):
            if not was:
                module.DontUseExceptions()


@contextlib.contextmanager
def file_date(stamp: str | None):
    """Within the block (this thread), GDAL dates what it writes by ``stamp`` (ISO 8601, e.g.
    ``2026-01-31T12:00:00.000Z``) instead of its clock: GeoPackage layers' ``last_change``
    (GDAL's ``OGR_CURRENT_DATE``) and strikeline's layer styles, so the same results written
    twice are the same bytes. ``None`` leaves the clock."""
    name = "OGR_CURRENT_DATE"
    previous = gdal.GetThreadLocalConfigOption(name, None)
    if stamp is not None:
        gdal.SetThreadLocalConfigOption(name, stamp)
    try:
        yield
    finally:
        gdal.SetThreadLocalConfigOption(name, previous)


def gdal_message(exc: BaseException) -> str:
    """GDAL's own text for an exception, on one line."""
    return one_line(str(exc)) or type(exc).__name__


@contextlib.contextmanager
def quiet_close():
    """Drop GDAL/OGR handles on a failure path without a second error: inside the block GDAL's
    exception mode is off and its messages silenced (a dataset closed after a failed write may
    report more errors, which Python could only print as "Exception ignored"); the mode of the
    caller is restored after it."""
    previous = (gdal.GetUseExceptions(), ogr.GetUseExceptions(), osr.GetUseExceptions())
    for module, was in reversed(list(zip((gdal, ogr, osr), previous))):
        if was:
            module.DontUseExceptions()
    gdal.PushErrorHandler("CPLQuietErrorHandler")
    try:
        yield
    finally:
        gdal.PopErrorHandler()
        gdal.ErrorReset()
        for module, was in zip((gdal, ogr, osr), previous):
            if was:
                module.UseExceptions()
