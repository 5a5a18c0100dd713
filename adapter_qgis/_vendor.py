"""Make the library importable as ``strikeline``.

The plugin zip carries a copy of the pure library in ``_vendor/strikeline`` (``make plugin``).
When that copy is present it is put first on ``sys.path``, so the plugin runs the library it
was built with. In a source checkout there is no copy and the installed (editable) library is
used.
"""
from __future__ import annotations

import os
import sys

VENDOR_DIR = os.path.join(os.path.dirname(os.path.abspath(__file__)), "_vendor")


def ensure_library() -> str:
    """Put the vendored library on ``sys.path`` when it exists; return where it comes from."""
    if os.path.isdir(os.path.join(VENDOR_DIR, "strikeline")):
        if VENDOR_DIR not in sys.path and "strikeline" not in sys.modules:
            sys.path.insert(0, VENDOR_DIR)
        return VENDOR_DIR
    return "installed"
