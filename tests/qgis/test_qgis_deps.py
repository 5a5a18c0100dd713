"""The plugin checks QGIS's Python before it registers a tool, and says how to fix it.

# Source: Debian 12 (bookworm) ships python3-shapely 1.8.5 and python3-numpy 1.24.2
#   (`apt-cache policy python3-shapely python3-numpy`, packages.debian.org/bookworm).
# Source: PEP 668 - a Python whose stdlib folder holds EXTERNALLY-MANAGED refuses `pip install
#   --user` unless given --break-system-packages (pip >= 23.0.1).
# Source: pyproject.toml's [project] dependencies, the library's own lower bounds.
# Source: QGIS 3.22 qgis.utils (updateAvailablePlugins, loadPlugin, startPlugin), how the
#   desktop starts a plugin from a profile's python/plugins folder.
"""
from __future__ import annotations

import json
import re
import subprocess
import sys
import tomllib
import zipfile
from pathlib import Path
from types import SimpleNamespace

import pytest
from qgis.core import QgsApplication

import adapter_qgis
from adapter_qgis import deps

pytestmark = pytest.mark.qgis

REPO = Path(__file__).resolve().parents[2]
SYSTEM_PYTHON = "/usr/bin/python3"  # Debian's, the Python QGIS runs
DEBIAN_SHAPELY = "1.8.5"  # Source: Debian 12 python3-shapely 1.8.5-2


def readme_qgis_section() -> str:
    text = (REPO / "README.md").read_text(encoding="utf-8")
    return text.split("\n## In QGIS\n", 1)[1].split("\n## ", 1)[0]


def _flat(text: str) -> str:
    return re.sub(r"\s+", " ", text)


PLATFORMS = {
    "debian 12": dict(platform="linux", os_release={"ID": "debian"}, externally_managed=True),
    "ubuntu 24.04": dict(platform="linux", os_release={"ID": "ubuntu", "ID_LIKE": "debian"}, externally_managed=True),
    "ubuntu 22.04": dict(platform="linux", os_release={"ID": "ubuntu", "ID_LIKE": "debian"}, externally_managed=False),
    "fedora": dict(platform="linux", os_release={"ID": "fedora"}, externally_managed=False),
    "windows": dict(platform="win32"),
    "macos": dict(platform="darwin", executable="/Applications/QGIS-LTR.app/Contents/MacOS/QGIS"),
}


@pytest.mark.parametrize("system", sorted(PLATFORMS))
def test_every_command_the_plugin_shows_is_in_the_readme(system):
    commands = deps.install_commands(**PLATFORMS[system])
    assert commands
    section = _flat(readme_qgis_section())
    for command in commands:
        assert f"`{command}`" in section or f"\n  {command}\n" in readme_qgis_section(), (system, command)


def test_debian_commands_are_the_readme_block_and_use_pep_668s_flag():
    block = re.search(r"```sh\n(.*?)```", readme_qgis_section(), re.S).group(1)
    lines = [ln.strip() for ln in block.splitlines() if ln.strip()]
    debian = deps.install_commands(**PLATFORMS["debian 12"])
    assert list(debian) == [ln for ln in lines if ln in debian] == [lines[1], lines[2]]
    assert "--break-system-packages" in debian[1]  # Source: PEP 668, pip >= 23.0.1
    assert "--break-system-packages" not in " ".join(deps.install_commands(**PLATFORMS["ubuntu 22.04"]))
    # The pin is a shapely 2 (the library's floor) that pip can put beside Debian's numpy 1.24.
    assert re.search(r"shapely==2\.\d+\.\d+", debian[1])


@pytest.mark.parametrize("system", ["debian 12", "ubuntu 24.04", "ubuntu 22.04", "fedora"])
def test_linux_pip_commands_name_qgis_s_interpreter(system):
    # A bare python3 is the first on the user's PATH (a venv's, conda's); Debian's QGIS runs
    # /usr/bin/python3 (python3-qgis installs into /usr/lib/python3/dist-packages; dpkg -L python3-qgis).
    pips = [c for c in deps.install_commands(**PLATFORMS[system]) if " -m pip " in c]
    assert pips and all(c.startswith("/usr/bin/python3 -m pip install --user ") for c in pips), pips


def test_macos_command_names_the_running_app():
    got = deps.install_commands(platform="darwin", executable="/Users/geo/Apps/QGIS.app/Contents/MacOS/QGIS")
    assert got == ("/Users/geo/Apps/QGIS.app/Contents/MacOS/bin/python3 -m pip install --user shapely==2.0.6",)


def test_minimum_versions_are_pyproject_s():
    project = tomllib.loads((REPO / "pyproject.toml").read_text())["project"]
    floors = {}
    for dep in project["dependencies"]:
        m = re.match(r"([A-Za-z0-9_.-]+)\s*>=\s*([0-9.]+)", dep)
        if m:
            floors[m.group(1).lower()] = tuple(int(x) for x in m.group(2).split(".")[:2])
    checked = {r.module: r.minimum for r in deps.REQUIREMENTS if r.minimum is not None}
    assert checked == {k: v for k, v in floors.items() if k not in deps.COMMAND_LINE_ONLY}
    # what the plugin does not check, it must not import: the command-line-only packages stay out
    # of the library and the adapter except the command line itself
    for name in deps.COMMAND_LINE_ONLY:
        users = sorted(str(p.relative_to(REPO)) for p in [*(REPO / "algorithms").rglob("*.py"),
                                                         *(REPO / "adapter_qgis").rglob("*.py")]
                       if re.search(rf"^\s*(from|import) {name}\b", p.read_text(), re.M))
        assert users == ["algorithms/cli/progress.py"], (name, users)


def _fake_import(versions: dict):
    def import_module(name):
        if versions.get(name) is None:
            raise ImportError(f"No module named '{name}'")
        return SimpleNamespace(__version__=versions[name])
    return import_module


def test_problems_name_what_is_missing_or_too_old():
    ok = {"numpy": "1.24.2", "scipy": "1.10.1", "shapely": "2.0.6", "pyproj": "3.4.1", "osgeo.gdal_array": "3.6.2"}
    assert deps.problems(import_module=_fake_import(ok)) == []
    got = deps.problems(import_module=_fake_import({**ok, "shapely": DEBIAN_SHAPELY, "scipy": None}))
    assert got == ["scipy does not import (ImportError: No module named 'scipy')",
                   f"shapely is {DEBIAN_SHAPELY} (needs 2.0 or later)"]
    # Versions compare as numbers, not text: 1.100 is newer than 1.23.
    assert deps.problems(import_module=_fake_import({**ok, "numpy": "1.100.0"})) == []


def test_with_an_old_shapely_no_tool_is_registered_and_the_bar_says_why(monkeypatch):
    """In process: the check made to see Debian's shapely 1.8 (its version patched)."""
    real = deps.importlib.import_module

    def old_shapely(name):
        module = real(name)
        return SimpleNamespace(__version__=DEBIAN_SHAPELY) if name == "shapely" else module

    class Bar:
        messages = []

        def pushMessage(self, title, text, level, duration):  # noqa: N802
            self.messages.append(text)

    class Iface:
        bar = Bar()

        def messageBar(self):  # noqa: N802
            return self.bar

    registry = QgsApplication.processingRegistry()
    adapter_qgis.unloadProcessing()
    try:
        monkeypatch.setattr(deps, "_IMPORT", old_shapely)
        plugin = adapter_qgis.classFactory(Iface())
        plugin.initGui()
        plugin.initProcessing()  # the desktop may call both: the message is shown once
        assert registry.providerById("strikeline") is None
        assert registry.algorithmById("strikeline:modelcontact") is None
        assert len(Iface.bar.messages) == 1
        text = Iface.bar.messages[0]
        assert f"shapely is {DEBIAN_SHAPELY} (needs 2.0 or later)" in text
        assert all(c in text for c in deps.install_commands())
        assert "\n" not in text and adapter_qgis.LOAD_PROBLEM == text
    finally:
        monkeypatch.undo()
        assert adapter_qgis.initProcessing() is not None
    assert registry.algorithmById("strikeline:modelcontact") is not None


def test_installed_zip_on_debian_s_shapely_registers_nothing(tmp_path):
    """A real QGIS process: Debian's Python with its own python3-shapely 1.8, the plugin zip in a
    fresh profile, started as the desktop starts plugins (qgis.utils)."""
    probe = (
        "import json, sys\n"
        "from qgis.core import QgsApplication\n"
        "QgsApplication.setPrefixPath('/usr', True)\n"
        "app = QgsApplication([], False, sys.argv[1]); app.initQgis()\n"
        "import qgis.utils\n"
        "plugins = QgsApplication.qgisSettingsDirPath() + 'python/plugins'\n"
        "qgis.utils.plugin_paths = [plugins]; sys.path.insert(0, plugins)\n"
        "qgis.utils.updateAvailablePlugins()\n"
        "class Bar:\n"
        "    shown = []\n"
        "    def pushMessage(self, title, text, level=0, duration=0): self.shown.append(text)\n"
        "class Iface:\n"
        "    def messageBar(self): return Bar()\n"
        "qgis.utils.iface = Iface()\n"
        "started = qgis.utils.loadPlugin('strikeline_qgis') and qgis.utils.startPlugin('strikeline_qgis')\n"
        "import shapely\n"
        "reg = QgsApplication.processingRegistry()\n"
        "print(json.dumps({'started': started, 'shapely': shapely.__version__, 'shown': Bar.shown,\n"
        "                  'provider': reg.providerById('strikeline') is not None,\n"
        "                  'n_algorithms': len([a for a in reg.algorithms() if a.provider().id() == 'strikeline'])}))\n"
    )
    zip_path = tmp_path / "strikeline_qgis.zip"
    subprocess.run([sys.executable, str(REPO / "adapter_qgis" / "build_zip.py"), "--out", str(zip_path)],
                   check=True, capture_output=True)
    profile = tmp_path / "profile"
    with zipfile.ZipFile(zip_path) as z:
        z.extractall(profile / "python" / "plugins")
    done = subprocess.run([SYSTEM_PYTHON, "-c", probe, str(profile)], capture_output=True, text=True, timeout=120,
                          env={"PATH": "/usr/bin:/bin", "HOME": str(tmp_path), "QT_QPA_PLATFORM": "offscreen",
                               "PYTHONNOUSERSITE": "1", "XDG_RUNTIME_DIR": str(tmp_path)})
    assert done.returncode == 0, done.stderr
    got = json.loads(done.stdout.strip().splitlines()[-1])
    assert got["shapely"] == DEBIAN_SHAPELY, (
        "this test needs Debian's python3-shapely 1.8 for /usr/bin/python3 (make qgis-sysdeps installs it)")
    assert got["started"] is True  # the plugin loads (so the desktop lists it) ...
    assert got["provider"] is False and got["n_algorithms"] == 0  # ... but registers no tool
    assert len(got["shown"]) == 1
    shown = got["shown"][0]
    assert f"shapely is {DEBIAN_SHAPELY} (needs 2.0 or later)" in shown
    # The message gives the README's Debian commands, as written.
    for command in deps.install_commands(**PLATFORMS["debian 12"]):
        assert command in shown
