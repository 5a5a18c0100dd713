"""QGIS's own Python with the plugin as installed in a profile (run by .ci/qgis-installed-plugin).

Usage: /usr/bin/python3 .ci/qgis_installed_plugin.py PROFILE refused  "COMMAND" ...
       /usr/bin/python3 .ci/qgis_installed_plugin.py PROFILE chain    DEMO_DIR OUT_DIR

The profile is a fresh QGIS profile folder; the plugin lies in its python/plugins folder as
QGIS's *Install from ZIP* leaves it. The plugin is loaded as the desktop loads it (qgis.utils:
updateAvailablePlugins, loadPlugin, startPlugin with an interface whose message bar is recorded).

``refused``: the plugin must register no tool and show, in the message bar, every COMMAND (the
README's install lines). ``chain``: it must register its tools, run on its bundled library, and
the whole chain (processing.run) on the demo sheet must give the demo's plane and thickness.
Exit status 0 when so, 1 with one line saying what differs.
"""
from __future__ import annotations

import json
import os
import sys

PLUGIN = "strikeline_qgis"
PROCESSING_PLUGINS = "/usr/share/qgis/python/plugins"  # Debian's python3-qgis: the Processing framework


def fail(text: str) -> None:
    print(f"qgis-installed-plugin: FAILED: {text}", file=sys.stderr)
    sys.exit(1)


class Bar:
    """The part of QGIS's message bar the plugin uses."""

    def __init__(self):
        self.messages = []

    def pushMessage(self, title, text, level=0, duration=0):  # noqa: N802 (QGIS's name)
        self.messages.append(f"{title}: {text}")


class Iface:
    def __init__(self):
        self.bar = Bar()

    def messageBar(self):  # noqa: N802 (QGIS's name)
        return self.bar


def start(profile: str):
    from qgis.core import QgsApplication

    QgsApplication.setPrefixPath("/usr", True)
    app = QgsApplication([], False, profile)
    app.initQgis()
    settings_dir = os.path.realpath(QgsApplication.qgisSettingsDirPath())
    if settings_dir != os.path.realpath(profile):
        fail(f"QGIS uses the profile {settings_dir}, not the fresh one {profile}")
    sys.path.append(PROCESSING_PLUGINS)
    from processing.core.Processing import Processing

    Processing.initialize()
    import qgis.utils

    plugins = os.path.join(settings_dir, "python", "plugins")  # where Install from ZIP puts a plugin
    qgis.utils.plugin_paths = [plugins]
    sys.path.insert(0, plugins)
    qgis.utils.updateAvailablePlugins()
    if PLUGIN not in qgis.utils.available_plugins:
        fail(f"QGIS does not see {PLUGIN} in {plugins} (found {qgis.utils.available_plugins})")
    iface = Iface()
    qgis.utils.iface = iface
    if not qgis.utils.loadPlugin(PLUGIN) or not qgis.utils.startPlugin(PLUGIN):
        fail(f"QGIS could not start the plugin {PLUGIN}")
    return app, iface, plugins


def refused(profile: str, commands: list[str]) -> None:
    from qgis.core import QgsApplication

    _, iface, _ = start(profile)
    if QgsApplication.processingRegistry().providerById("strikeline") is not None:
        fail("the plugin registered its tools although QGIS's Python lacks a dependency")
    shown = " ".join(iface.bar.messages)
    if not shown:
        fail("the plugin registered no tool but showed no message")
    missing = [c for c in commands if c not in shown]
    if missing:
        fail(f"the plugin's message lacks the README's command(s) {missing}: {shown}")
    print(f"qgis-installed-plugin: refused as it should, with the README's commands: {shown}")


def chain(profile: str, demo: str, out: str) -> None:
    _, iface, plugins = start(profile)
    import processing
    from qgis.core import (
        QgsApplication,
        QgsProcessingContext,
        QgsProcessingFeedback,
        QgsProject,
        QgsVectorLayer,
    )

    if iface.bar.messages:
        fail(f"the plugin reported a problem: {iface.bar.messages}")
    provider = QgsApplication.processingRegistry().providerById("strikeline")
    if provider is None or not provider.algorithms():
        fail("the plugin registered no tools")
    import strikeline

    if not os.path.realpath(strikeline.__file__).startswith(os.path.realpath(plugins) + os.sep):
        fail(f"the plugin runs a library outside the profile: {strikeline.__file__}")
    lines = []
    feedback = QgsProcessingFeedback()
    feedback.pushInfo = lines.append
    context = QgsProcessingContext()
    context.setProject(QgsProject.instance())
    os.makedirs(out, exist_ok=True)
    outputs = {k: os.path.join(out, f"{k}.gpkg") for k in ("picks", "structure_contours", "predicted_trace")}
    outputs.update({k: os.path.join(out, f"{k}.tif") for k in ("surface", "dip", "dip_direction", "depth",
                                                                "true_thickness")})
    res = processing.run("strikeline:modelcontact", {
        "CONTACTS": f"{demo}/contacts.gpkg|layername=contacts", "DEM": f"{demo}/dem.tif",
        "TOP_CONTACTS": f"{demo}/top_contacts.gpkg|layername=top_contacts", "INTERVAL": 50.0,
        "RESAMPLES": 200, "summary": os.path.join(out, "summary.json"), **outputs},
        feedback=feedback, context=context)
    with open(os.path.join(demo, "truth.json"), encoding="utf-8") as f:
        truth = json.load(f)
    # The demo sheet's plane and unit thickness: test_data/demo/truth.json (the invented planes
    # the sheet was generated from).
    if abs(res["dip_deg"] - truth["dip_deg"]) > 0.5 or abs(res["dip_direction_deg"] - truth["dip_direction_deg"]) > 1.0:
        fail(f"plane {res['dip_deg']:.2f}/{res['dip_direction_deg']:.1f}, the demo's is "
             f"{truth['dip_deg']}/{truth['dip_direction_deg']}")
    with open(os.path.join(out, "summary.json"), encoding="utf-8") as f:
        summary = json.load(f)
    thick = summary["thickness"]["mean_m"]
    if abs(thick - truth["true_thickness_m"]) > 1.0:
        fail(f"mean true thickness {thick:.1f} m, the demo's is {truth['true_thickness_m']} m")
    for key, path in outputs.items():
        if not os.path.isfile(path):
            fail(f"output {key} was not written ({path})")
    contours = QgsVectorLayer(outputs["structure_contours"], "c", "ogr")
    if not contours.isValid() or contours.featureCount() == 0:
        fail("the structure contours layer is empty or unreadable")
    from qgis.core import Qgis

    print(f"qgis-installed-plugin: QGIS {Qgis.QGIS_VERSION}, plugin on {strikeline.__file__}: dip "
          f"{res['dip_deg']:.2f}° toward {res['dip_direction_deg']:.1f}° (demo {truth['dip_deg']}° toward "
          f"{truth['dip_direction_deg']}°), mean true thickness {thick:.1f} m (demo {truth['true_thickness_m']} m), "
          f"{contours.featureCount()} structure contour lines; log:")
    for line in lines:
        print(f"  {line}")


def main(argv: list[str]) -> None:
    if len(argv) < 2 or argv[1] not in ("refused", "chain"):
        fail(__doc__.split("\n\n")[1])
    if argv[1] == "refused":
        refused(argv[0], argv[2:])
    else:
        chain(argv[0], argv[2], argv[3])


if __name__ == "__main__":
    main(sys.argv[1:])
