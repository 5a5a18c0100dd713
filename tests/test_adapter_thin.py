"""The QGIS adapter stays thin: its tools read parameters, call pipeline steps and write outputs.

Read with ``ast`` (no QGIS needed). The rule chosen:

* numpy and shapely are imported only by the two modules that convert between QGIS objects and
  the library's arrays, ``layers.py`` (QGIS features and raster blocks in) and ``outputs.py``
  (arrays and geometries out to feature sinks), and there only for a short list of constructors,
  dtypes and conversions (WKB in and out, NaN written as NULL). A ban on numpy everywhere would
  push those dtype conversions into QGIS-typed library code; allowing numpy everywhere is how the
  maths crept in. scipy is imported nowhere.
* The tools import the library's functions only from ``strikeline.pipeline`` (the steps), with
  ``strikeline.io`` (reading and writing) and ``strikeline.errors``; from the numerical families
  they may take constants (allowed values of an option), not functions.

Source: common practice of this project (``STYLE.md``: "``adapter_qgis/`` is as thin as the CLI";
QGIS's own processing algorithms, minus their maths inside ``processAlgorithm``).
"""
from __future__ import annotations

import ast
import importlib
from pathlib import Path

import pytest

ADAPTER = Path(__file__).resolve().parents[1] / "adapter_qgis"
CONVERSION_MODULES = {"layers.py", "outputs.py"}
#: What the conversion modules may use of numpy: array constructors, dtypes and type tests, and
#: isfinite (NaN written as a NULL attribute).
NUMPY_ALLOWED = {"array", "asarray", "empty", "frombuffer", "ndarray", "dtype", "uint8", "uint16", "int16",
                 "uint32", "int32", "int64", "float32", "float64", "object_", "floating", "integer", "bool_",
                 "isfinite"}
#: ... and of shapely: WKB in and out, and dropping or adding Z.
SHAPELY_ALLOWED = {"from_wkb", "to_wkb", "force_2d", "force_3d"}
#: Library packages a tool may take functions from.
#: What a tool may call: the pipeline's steps, I/O, errors, names, and the report's words (sentences
#: of a summary, no computation).
STEP_PACKAGES = ("strikeline.pipeline", "strikeline.io", "strikeline.errors", "strikeline.vocabulary",
                 "strikeline.report")


def _modules():
    return sorted(p for p in ADAPTER.rglob("*.py") if "_vendor" not in p.parts)


def _aliases(tree, package):
    """Names bound to ``package`` by ``import package [as x]``; and names imported from it."""
    aliases, names = set(), set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for a in node.names:
                if a.name == package or a.name.startswith(package + "."):
                    aliases.add(a.asname or a.name.split(".")[0])
        elif isinstance(node, ast.ImportFrom) and node.module and (
                node.module == package or node.module.startswith(package + ".")):
            names |= {a.asname or a.name for a in node.names}
    return aliases, names


def numeric_offences(source: str, filename: str) -> list[str]:
    """Uses of numpy, shapely or scipy that the rule above forbids in one adapter module."""
    tree = ast.parse(source)
    out = []
    conversion = Path(filename).name in CONVERSION_MODULES and Path(filename).parent.name == "adapter_qgis"
    for package, allowed in (("numpy", NUMPY_ALLOWED), ("shapely", SHAPELY_ALLOWED), ("scipy", set())):
        aliases, names = _aliases(tree, package)
        if not conversion and (aliases or names):
            out.append(f"{filename} imports {package}")
            continue
        out += [f"{filename} imports {n} from {package}" for n in sorted(names)]
        for node in ast.walk(tree):
            if isinstance(node, ast.Attribute) and isinstance(node.value, ast.Name) and node.value.id in aliases \
                    and node.attr not in allowed:
                out.append(f"{filename}:{node.lineno} uses {package}.{node.attr}")
    return out


def test_no_numerical_code_in_the_adapter():
    offences = [o for p in _modules() for o in numeric_offences(p.read_text(), str(p.relative_to(ADAPTER.parent)))]
    assert offences == []


@pytest.mark.parametrize("filename,source,found", [
    ("adapter_qgis/tools/t.py", "import numpy as np\nx = np.asarray([1])\n", "imports numpy"),
    ("adapter_qgis/tools/t.py", "from numpy import nanmedian\n", "imports numpy"),
    ("adapter_qgis/tools/t.py", "import shapely\n", "imports shapely"),
    ("adapter_qgis/inputs.py", "from scipy.spatial import cKDTree\n", "imports scipy"),
    ("adapter_qgis/outputs.py", "import numpy as np\nm = np.median([1.0])\n", "uses numpy.median"),
    ("adapter_qgis/layers.py", "import shapely\nd = shapely.distance(a, b)\n", "uses shapely.distance"),
    ("adapter_qgis/outputs.py", "from numpy import mean\n", "imports mean from numpy"),
])
def test_the_check_finds_maths(filename, source, found):
    assert any(found in o for o in numeric_offences(source, filename))


def test_the_check_allows_conversions():
    src = ("import numpy as np\nimport shapely\n"
           "a = np.asarray(x, dtype=np.float64)\nb = np.frombuffer(buf, dtype=np.uint8)\n"
           "w = shapely.to_wkb(g)\nok = np.isfinite(v)\n")
    assert numeric_offences(src, "adapter_qgis/outputs.py") == []


def library_functions_imported(source: str) -> list[tuple[str, str]]:
    """``(module, name)`` of every name a module imports from ``strikeline`` outside the step packages."""
    out = []
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.ImportFrom) and node.module and node.level == 0 and (
                node.module == "strikeline" or node.module.startswith("strikeline.")):
            if node.module.startswith(STEP_PACKAGES):
                continue
            out += [(node.module, a.name) for a in node.names]
    return out


def test_tools_call_pipeline_steps_not_numerical_functions():
    offences = []
    for p in sorted((ADAPTER / "tools").glob("*.py")):
        for module, name in library_functions_imported(p.read_text()):
            try:
                obj = getattr(importlib.import_module(module), name)
            except AttributeError:  # a submodule (``from strikeline import vocabulary``)
                obj = importlib.import_module(f"{module}.{name}")
            if callable(obj) and not isinstance(obj, type):
                offences.append(f"{p.name} imports the function {module}.{name}; call a strikeline.pipeline step")
    assert offences == []


def test_the_step_check_finds_a_numerical_function():
    src = "from strikeline.maps.dipgrids import dip_grids\nfrom strikeline.maps.thickness import SLOPE_SENSES\n"
    found = library_functions_imported(src)
    assert found == [("strikeline.maps.dipgrids", "dip_grids"), ("strikeline.maps.thickness", "SLOPE_SENSES")]
    assert callable(getattr(importlib.import_module(found[0][0]), found[0][1]))
    assert not callable(getattr(importlib.import_module(found[1][0]), found[1][1]))
