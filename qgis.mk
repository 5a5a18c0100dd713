# QGIS adapter: its environment (.venv-qgis), its tests (tests/qgis) and the plugin zip.
# Included by the Makefile. QGIS comes from Debian (python3-qgis) for the system Python; the venv
# sees it through --system-site-packages, so QGIS's own numpy and GDAL bindings stay in use.

QGIS_SYS_PY   := /usr/bin/python3
QGIS_VENV     := .venv-qgis
QGIS_PY       := $(QGIS_VENV)/bin/python
QGIS_PIP      := $(QGIS_PY) -m pip --disable-pip-version-check -q
QGIS_STAMP    := $(QGIS_VENV)/.strikeline-qgis-installed
# python3-shapely (1.8 on Debian 12) is what a desktop user has: the plugin's dependency check is
# tested against it; python3-pip runs the README's install step (.ci/qgis-installed-plugin).
QGIS_APT      := python3-qgis qgis-providers python3-venv python3-scipy python3-pyproj python3-gdal \
                 python3-shapely python3-pip
# Added on top of Debian's stack; numpy and scipy are pinned to Debian's own versions (constraints
# written at build time) so pip never replaces them.
QGIS_PIP_PKGS := shapely==2.0.6 pytest==8.3.4
QGIS_PROBE    := import qgis.core, venv, ensurepip, scipy, pyproj, shapely, pip; from osgeo import gdal_array
PLUGIN_NAME   := strikeline_qgis
PLUGIN_ZIP    := dist/$(PLUGIN_NAME).zip

.PHONY: test-qgis test-qgis-installed plugin qgis-sysdeps qgis-setup

qgis-sysdeps:
	@if ! $(QGIS_SYS_PY) -c '$(QGIS_PROBE)' >/dev/null 2>&1; then \
	  if [ "$$(id -u)" = 0 ]; then \
	    echo "strikeline: installing Debian packages for the QGIS tests: $(QGIS_APT)"; \
	    apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq $(QGIS_APT) >/dev/null; \
	  else \
	    echo "strikeline: QGIS (python3-qgis) is missing; run: sudo apt-get install -y $(QGIS_APT)"; \
	    exit 1; \
	  fi; \
	fi
	@$(QGIS_SYS_PY) -c '$(QGIS_PROBE)' || { echo "error: QGIS's Python bindings still do not import with $(QGIS_SYS_PY)"; exit 1; }

qgis-setup: $(QGIS_STAMP)

$(QGIS_STAMP): pyproject.toml qgis.mk | qgis-sysdeps
	@test -x $(QGIS_PY) || $(QGIS_SYS_PY) -m venv --system-site-packages $(QGIS_VENV)
	@$(QGIS_SYS_PY) -c 'import numpy, scipy; print(f"numpy=={numpy.__version__}\nscipy=={scipy.__version__}")' \
	  > $(QGIS_VENV)/constraints.txt
	$(QGIS_PIP) install -c $(QGIS_VENV)/constraints.txt $(QGIS_PIP_PKGS)
	$(QGIS_PIP) install --no-deps -e .
	$(QGIS_PY) -c 'import numpy, shapely, scipy, strikeline, qgis.core; from osgeo import gdal, gdal_array; \
	  print("strikeline: QGIS", qgis.core.Qgis.QGIS_VERSION, "numpy", numpy.__version__, "shapely", shapely.__version__, \
	        "GDAL", gdal.__version__, "strikeline", strikeline.__version__)'
	@touch $(QGIS_STAMP)

test-qgis: $(QGIS_STAMP)
	QT_QPA_PLATFORM=offscreen bash .ci/pytest-strict $(QGIS_PY) tests/qgis
	$(MAKE) --no-print-directory test-qgis-installed

# The plugin as the README installs it: Debian's packages, the README's pip step for a fresh
# user, the zip in a fresh profile, the whole chain in QGIS's own Python (no venv).
test-qgis-installed: | qgis-sysdeps
	bash .ci/qgis-installed-plugin

# An installable plugin zip: the adapter plus the pure library vendored as `strikeline`.
plugin:
	$(QGIS_SYS_PY) adapter_qgis/build_zip.py --name $(PLUGIN_NAME) --out $(PLUGIN_ZIP)
