"""Build the installable plugin zip: the adapter plus the pure library vendored as ``strikeline``.

Usage: ``python3 adapter_qgis/build_zip.py --name strikeline_qgis --out dist/strikeline_qgis.zip``
(``make plugin``). The zip holds one folder, ``<name>/``: the adapter's files, and the library
(``algorithms/``) under ``<name>/_vendor/strikeline/``; caches, build helpers and the CLI's
egg-info are left out, and so is the library's command line (``cli/``). ``metadata.txt`` gets the library's version.
"""
from __future__ import annotations

import argparse
import os
import re
import zipfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
REPO = HERE.parent
SKIP_DIRS = {"__pycache__", ".pytest_cache", ".mypy_cache", "_vendor"}
SKIP_FILES = {"build_zip.py", "export_styles.py"}  # build helpers
SKIP_SUFFIXES = {".pyc", ".pyo", ".orig", ".rej", ".swp"}


def _files(root: Path, skip_dirs=()):
    for dirpath, dirnames, filenames in os.walk(root):
        dirnames[:] = sorted(d for d in dirnames if d not in SKIP_DIRS and d not in skip_dirs
                             and not d.endswith(".egg-info"))
        for f in sorted(filenames):
            p = Path(dirpath) / f
            if f in SKIP_FILES or p.suffix in SKIP_SUFFIXES or f.startswith("."):
                continue
            yield p


def library_version() -> str:
    text = (REPO / "algorithms" / "_version.py").read_text()
    return re.search(r"__version__\s*=\s*['\"]([^'\"]+)", text).group(1)


def build(name: str, out: Path) -> Path:
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = out.with_name(out.name + ".part")
    version = library_version()
    with zipfile.ZipFile(tmp, "w", zipfile.ZIP_DEFLATED) as z:
        for p in _files(HERE):
            arc = f"{name}/{p.relative_to(HERE).as_posix()}"
            if p.name == "metadata.txt":
                text = re.sub(r"(?m)^version=.*$", f"version={version}", p.read_text())
                z.writestr(arc, text)
            else:
                z.write(p, arc)
        # The library without its command line (the plugin calls the pipeline, not the CLI).
        for p in _files(REPO / "algorithms", skip_dirs={"cli"}):
            z.write(p, f"{name}/_vendor/strikeline/{p.relative_to(REPO / 'algorithms').as_posix()}")
    os.replace(tmp, out)
    return out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--name", default="strikeline_qgis")
    ap.add_argument("--out", default=str(REPO / "dist" / "strikeline_qgis.zip"))
    a = ap.parse_args()
    path = build(a.name, Path(a.out))
    with zipfile.ZipFile(path) as z:
        n = len(z.namelist())
    print(f"strikeline: plugin zip {path} ({n} files, {path.stat().st_size // 1024} KiB)")


if __name__ == "__main__":
    main()
