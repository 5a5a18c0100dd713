"""The README's QGIS install lines name QGIS's own interpreter."""
from __future__ import annotations

import re
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]


def test_every_linux_pip_line_for_qgis_names_qgis_s_python():
    # A bare `python3` is whichever is first on PATH (a venv's, conda's); Debian's QGIS runs
    # /usr/bin/python3 (python3-qgis installs into /usr/lib/python3/dist-packages - from memory,
    # and `dpkg -L python3-qgis`).
    text = (REPO / "README.md").read_text(encoding="utf-8")
    start = text.index("- Install on Debian 12 (`make test` runs these lines")
    section = text[start:text.index("- Develop:", start)]
    pips = re.findall(r"(\S*python3?) -m pip install", section)
    assert pips and len(pips) >= 3
    for exe in pips:
        assert exe.lstrip("`") in ("/usr/bin/python3", "python") or exe.lstrip("`").endswith(".app/Contents/MacOS/bin/python3"), exe
    # `python` alone is the Windows line, run in the OSGeo4W Shell, whose python is QGIS's
    assert re.search(r"OSGeo4W Shell[^`]*`python -m pip install", section)
