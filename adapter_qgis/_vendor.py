"""Make the library importable as ``strikeline``.

Three ways, tried in this order:

1. The plugin zip carries a copy of the pure library in ``_vendor/strikeline`` (``make plugin``);
   it is put first on ``sys.path``, so the plugin runs the library it was built with.
2. A ``strikeline`` that QGIS's Python can already import (installed with pip, or the editable
   install of a source checkout) is used as it is.
3. A plugin folder that is a symbolic link to ``adapter_qgis/`` of a source checkout (for
   development) loads the checkout's ``algorithms/`` as ``strikeline``.
"""
from __future__ import annotations

import importlib.util
import os
import sys

HERE = os.path.dirname(os.path.abspath(__file__))
VENDOR_DIR = os.path.join(HERE, "_vendor")


def _checkout_library() -> str | None:
    """``algorithms/`` beside the real (symlink-resolved) adapter folder, if there is one."""
    lib = os.path.join(os.path.dirname(os.path.realpath(HERE)), "algorithms")
    return lib if os.path.isfile(os.path.join(lib, "__init__.py")) else None


def ensure_library() -> str:
    """Make ``strikeline`` importable; return where it comes from."""
    if "strikeline" in sys.modules:
        return os.path.dirname(sys.modules["strikeline"].__file__)
    if os.path.isdir(os.path.join(VENDOR_DIR, "strikeline")):
        if VENDOR_DIR not in sys.path:
            sys.path.insert(0, VENDOR_DIR)
        return os.path.join(VENDOR_DIR, "strikeline")
    if importlib.util.find_spec("strikeline") is not None:
        return "installed"
    lib = _checkout_library()
    if lib is not None:
        spec = importlib.util.spec_from_file_location(
            "strikeline", os.path.join(lib, "__init__.py"), submodule_search_locations=[lib])
        module = importlib.util.module_from_spec(spec)
        sys.modules["strikeline"] = module
        spec.loader.exec_module(module)
        return lib
    return "missing"
