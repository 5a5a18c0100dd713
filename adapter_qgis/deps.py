"""Does QGIS's Python have what the library needs? Checked when the plugin loads, before any tool
is registered, so a desktop without shapely 2 (Debian 12 ships 1.8) gets one clear message with
the command that fixes it instead of tools that end in a traceback.

No QGIS import here: the check and the commands are plain Python, tested without a desktop. The
commands are the README's (*In QGIS* ▸ install), which ``tests/qgis/test_qgis_deps.py`` checks
word for word and ``.ci/qgis-installed-plugin`` runs as written on Debian's own QGIS.
"""
from __future__ import annotations

import importlib
import os
import re
import sys
import sysconfig
from typing import NamedTuple

#: The shapely the install commands put beside the distribution's numpy: 2.0.6 is the last 2.0
#: release, with wheels for Python 3.9-3.13 that run on numpy 1.x (Debian 12: 1.24.2).
SHAPELY_PIN = "shapely==2.0.6"


class Requirement(NamedTuple):
    """One module the library imports: its name for users, its import name, the lowest version."""

    name: str
    module: str
    minimum: tuple | None  # (major, minor); None: importing it is the test


#: The lower bounds are pyproject.toml's ``dependencies`` (the test reads them from there);
#: GDAL's bindings must import ``gdal_array`` (built against the numpy in use).
REQUIREMENTS = (
    Requirement("numpy", "numpy", (1, 23)),
    Requirement("scipy", "scipy", (1, 10)),
    Requirement("shapely", "shapely", (2, 0)),
    Requirement("pyproj", "pyproj", (3, 4)),
    Requirement("GDAL's Python bindings with numpy arrays (osgeo.gdal_array)", "osgeo.gdal_array", None),
)
#: pyproject.toml's dependencies that only the command line imports (its progress bar), so the
#: plugin neither checks nor asks for them.
COMMAND_LINE_ONLY = ("tqdm",)

#: The commands, per platform (see :func:`install_commands`); the README shows each one as is.
DEBIAN_APT = "sudo apt-get install python3-scipy python3-pyproj python3-gdal python3-pip"
#: QGIS's own interpreter on Linux distributions' QGIS (Debian's python3-qgis installs into
#: /usr/lib/python3/dist-packages, which /usr/bin/python3 reads): named in full, since the first
#: python3 on a user's PATH may be a venv's, conda's or pyenv's, where the install would not reach QGIS.
QGIS_LINUX_PYTHON = "/usr/bin/python3"
DEBIAN_PIP = f"{QGIS_LINUX_PYTHON} -m pip install --user --break-system-packages {SHAPELY_PIN}"
#: The same where the system Python is not marked externally managed (Ubuntu 22.04: pip 22
#: does not know --break-system-packages).
LINUX_PIP = f"{QGIS_LINUX_PYTHON} -m pip install --user {SHAPELY_PIN}"
#: In the OSGeo4W Shell (as administrator); QGIS's Windows installers bring numpy, scipy, pyproj
#: and GDAL, so shapely alone is installed and --no-deps keeps pip away from their numpy.
WINDOWS_PIP = f"python -m pip install --no-deps {SHAPELY_PIN}"
#: The Python inside the macOS application bundle (from memory: QGIS.app/Contents/MacOS/bin).
MACOS_APP = "/Applications/QGIS-LTR.app"
MACOS_PIP = "{app}/Contents/MacOS/bin/python3 -m pip install --user " + SHAPELY_PIN


def _version_tuple(text: str) -> tuple:
    return tuple(int(p) for p in re.findall(r"\d+", str(text))[:2])


#: How :func:`problems` imports a module (a test replaces it to see an old shapely).
_IMPORT = importlib.import_module


def problems(requirements=REQUIREMENTS, *, import_module=None) -> list[str]:
    """What is missing or too old, one phrase each (empty when everything is there)."""
    import_module = import_module or _IMPORT
    out = []
    for req in requirements:
        try:
            module = import_module(req.module)
        except Exception as exc:  # noqa: BLE001 - a broken build raises more than ImportError
            out.append(f"{req.name} does not import ({type(exc).__name__}: {exc})")
            continue
        if req.minimum is None:
            continue
        version = getattr(module, "__version__", "")
        if _version_tuple(version) < req.minimum:
            need = ".".join(str(v) for v in req.minimum)
            out.append(f"{req.name} is {version or 'of unknown version'} (needs {need} or later)")
    return out


def _os_release(path: str = "/etc/os-release") -> dict:
    try:
        with open(path, encoding="utf-8") as f:
            pairs = (line.rstrip("\n").split("=", 1) for line in f if "=" in line)
            return {k: v.strip('"') for k, v in pairs}
    except OSError:
        return {}


def _externally_managed() -> bool:
    """True where pip needs ``--break-system-packages`` for a user install (PEP 668)."""
    return os.path.isfile(os.path.join(sysconfig.get_path("stdlib"), "EXTERNALLY-MANAGED"))


def install_commands(*, platform: str | None = None, os_release: dict | None = None,
                     externally_managed: bool | None = None, executable: str | None = None) -> tuple[str, ...]:
    """The commands that give QGIS's Python the library's dependencies on this computer.

    The arguments default to this computer's (``sys.platform``, ``/etc/os-release``, PEP 668's
    marker, ``sys.executable``); tests pass them to see every platform's commands.
    """
    platform = sys.platform if platform is None else platform
    if platform.startswith("win"):
        return (WINDOWS_PIP,)
    if platform == "darwin":
        exe = sys.executable if executable is None else executable
        m = re.match(r"(.*?\.app)/", exe or "")
        return (MACOS_PIP.format(app=m.group(1) if m else MACOS_APP),)
    release = _os_release() if os_release is None else os_release
    family = f"{release.get('ID', '')} {release.get('ID_LIKE', '')}".split()
    managed = _externally_managed() if externally_managed is None else externally_managed
    pip = DEBIAN_PIP if managed else LINUX_PIP
    if "debian" in family or "ubuntu" in family:
        return (DEBIAN_APT, pip)
    return (pip,)


def _where(platform: str) -> str:
    if platform.startswith("win"):
        return "in the OSGeo4W Shell (Start menu ▸ OSGeo4W Shell, run as administrator)"
    if platform == "darwin":
        return "in a Terminal"
    return "in a terminal"


def message(found: list[str], *, platform: str | None = None, **where) -> str:
    """The text shown when :func:`problems` found something: what, then the commands, one line."""
    platform = sys.platform if platform is None else platform
    commands = install_commands(platform=platform, **where)
    return (f"the strikeline tools are not loaded because QGIS's Python ({sys.version.split()[0]}) lacks what "
            f"they need: {'; '.join(found)}. Install it {_where(platform)} with: {' && '.join(commands)} "
            "- then restart QGIS (README, 'In QGIS').")


def check() -> str | None:
    """None when the tools can be loaded, else the message to show."""
    found = problems()
    return message(found) if found else None
