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


def test_only_the_io_package_and_its_users_import_gdal():
    allowed = {"io", "pipeline", "cli"}
    offenders = [str(p) for p in ALGORITHMS.rglob("*.py")
                 if p.relative_to(ALGORITHMS).parts[0].removesuffix(".py") not in allowed
                 and any(m == "osgeo" or m.startswith("osgeo.") for m in _imports(p))]
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
