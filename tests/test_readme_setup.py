"""The README's account of what `make test` installs agrees with the Makefiles that install it,
and its QGIS install lines name QGIS's own interpreter."""
from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]


def _make_var(path: Path, name: str) -> list[str]:
    text = (REPO / path).read_text(encoding="utf-8").replace("\\\n", " ")
    m = re.search(rf"^{name}\s*:=\s*(.*)$", text, re.M)
    assert m, (path, name)
    return m.group(1).split()


def _setup_paragraph() -> str:
    text = (REPO / "README.md").read_text(encoding="utf-8")
    start = text.index("`make test` also installs Debian's packages for the tests")
    return re.sub(r"\s+", " ", text[start:text.index("The demo is the fictional", start)])


def _qgis_block() -> str:
    text = (REPO / "README.md").read_text(encoding="utf-8")
    start = text.index("- Install on Debian 12 (`make test` runs these lines")
    return re.search(r"```sh\n(.*?)```", text[start:], re.S).group(1)


def test_the_readme_lists_the_packages_the_makefiles_install():
    para = _setup_paragraph()
    for pkg in _make_var(Path("Makefile"), "TEST_APT"):
        assert f"`{pkg}`" in para, pkg
    qgis_apt = _make_var(Path("qgis.mk"), "QGIS_APT")
    assert f"(`{' '.join(qgis_apt)}`)" in para, qgis_apt
    # the desktop comes from the README's own install block, which .ci/qgis-installed-plugin runs
    apt = [ln.split("apt-get install", 1)[1].split() for ln in _qgis_block().splitlines() if "apt-get install" in ln]
    assert "qgis" in [p for line in apt for p in line]
    assert "the QGIS desktop package `qgis`" in para and ".ci/qgis-installed-plugin" in para


@pytest.mark.skipif(shutil.which("apt-cache") is None, reason="needs Debian's apt-cache")
def test_the_grass_packages_the_readme_names_are_what_qgis_brings():
    # Source: Debian's package metadata (apt-cache depends): qgis recommends qgis-plugin-grass,
    # which depends on grass-core.
    qgis = subprocess.run(["apt-cache", "depends", "qgis"], capture_output=True, text=True).stdout
    plugin = subprocess.run(["apt-cache", "depends", "qgis-plugin-grass"], capture_output=True, text=True).stdout
    if "Recommends" not in qgis:
        pytest.skip("apt-cache knows no qgis package here")
    assert re.search(r"Recommends: qgis-plugin-grass\b", qgis) and re.search(r"Depends: grass-core\b", plugin)
    para = _setup_paragraph()
    assert "`qgis-plugin-grass`" in para and "`grass-core`" in para and "recommended packages" in para


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
