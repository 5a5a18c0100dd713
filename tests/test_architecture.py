"""The layering of the design card: numerical modules free of GDAL and QGIS."""
import ast
import subprocess
import sys
from pathlib import Path

ALGORITHMS = Path(__file__).resolve().parents[1] / "algorithms"
# The numerical modules (common practice of this project's design card: no I/O in them).
NUMERICAL = ["errors", "geometry", "picks", "attitude", "stats", "surfaces", "maps"]


def _imports(path):
    tree = ast.parse(path.read_text())
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            yield from (a.name for a in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module:
            yield node.module


def test_nothing_under_algorithms_imports_qgis():
    offenders = [str(p) for p in ALGORITHMS.rglob("*.py")
                 if any(m == "qgis" or m.startswith("qgis.") for m in _imports(p))]
    assert offenders == []


def test_only_the_io_package_imports_gdal():
    # The design card: one I/O module speaks GDAL/OGR; everything past it sees CRSs as text.
    offenders = [str(p) for p in ALGORITHMS.rglob("*.py")
                 if p.relative_to(ALGORITHMS).parts[0] != "io"
                 and any(m == "osgeo" or m.startswith("osgeo.") for m in _imports(p))]
    assert offenders == []


def test_gdal_objects_do_not_cross_the_io_boundary():
    # No public function or field of strikeline.io takes or returns an osr/ogr object: a CRS is
    # WKT text and a geometry type a name. The check reads the signatures' annotations.
    leaks = []
    for p in (ALGORITHMS / "io").glob("*.py"):
        tree = ast.parse(p.read_text())
        for node in ast.walk(tree):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)) and not node.name.startswith("_"):
                notes = [a.annotation for a in node.args.args + node.args.kwonlyargs] + [node.returns]
            elif isinstance(node, ast.AnnAssign):
                notes = [node.annotation]
            else:
                continue
            for note in notes:
                if note is not None and any(s in ast.unparse(note) for s in ("osr.", "ogr.", "gdal.")):
                    leaks.append(f"{p.name}:{node.lineno} {ast.unparse(note)}")
    assert leaks == []


def test_the_pipeline_and_the_cli_never_touch_gdal_objects():
    # Past io/ no code calls methods that only GDAL's objects have.
    gdal_methods = ("ExportToWkt", "ImportFromWkt", "GetSpatialRef", "SetAxisMappingStrategy", "wkbPoint",
                    "wkbLineString")
    offenders = [f"{p.relative_to(ALGORITHMS)}: {m}" for p in ALGORITHMS.rglob("*.py")
                 if p.relative_to(ALGORITHMS).parts[0] != "io"
                 for m in gdal_methods if m in p.read_text()]
    assert offenders == []


def test_numerical_modules_import_without_gdal_or_qgis():
    code = (
        "import sys\n"
        "sys.modules['osgeo'] = None\n"  # any import of GDAL now fails
        "sys.modules['qgis'] = None\n"
        + "".join(f"import strikeline.{m}\n" for m in NUMERICAL)
        + "print('ok')\n"
    )
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert proc.returncode == 0 and proc.stdout.strip() == "ok", proc.stderr
