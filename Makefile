# strikeline: the two set-up commands are `make demo` and `make test`.
# Both work from nothing on Debian/Ubuntu: system packages, the .venv, then the package.

PYTHON      ?= python3
VENV        := .venv
VPY         := $(VENV)/bin/python
VPIP        := $(VPY) -m pip --disable-pip-version-check -q
STAMP       := $(VENV)/.strikeline-installed
APT_PKGS    := libgdal-dev gdal-bin
# for the tests only: Debian's headless Chromium renders report.html (tests/report)
TEST_APT    := chromium
# numpy is pinned below 2 because GDAL 3.6's bindings (Debian 12) predate numpy 2's C API.
NUMPY_PIN   := numpy==1.26.4

.PHONY: demo test setup sysdeps testdeps bench clean

# QGIS adapter: its environment, tests and plugin zip live in qgis.mk
include qgis.mk

demo: setup
	$(VENV)/bin/strikeline demo --out demo-output --overwrite

test: setup testdeps
	bash .ci/pytest-strict $(VPY) tests algorithms --doctest-modules --ignore=tests/qgis
	$(MAKE) --no-print-directory test-qgis

setup: $(STAMP)

testdeps:
	@if ! command -v chromium >/dev/null 2>&1; then \
	  if [ "$$(id -u)" = 0 ]; then \
	    echo "strikeline: installing Debian packages for the tests: $(TEST_APT)"; \
	    apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq $(TEST_APT) >/dev/null; \
	  else \
	    echo "strikeline: the report's browser test needs: sudo apt-get install -y $(TEST_APT)"; \
	  fi; \
	fi

sysdeps:
	@if ! command -v gdal-config >/dev/null 2>&1 || ! command -v gdal_contour >/dev/null 2>&1 \
	    || ! $(PYTHON) -c 'import venv, ensurepip' >/dev/null 2>&1; then \
	  if [ "$$(id -u)" = 0 ]; then \
	    echo "strikeline: installing Debian packages: $(APT_PKGS) python3-venv python3-dev"; \
	    apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq $(APT_PKGS) python3-venv python3-dev >/dev/null; \
	  else \
	    echo "strikeline: missing system packages; run: sudo apt-get install -y $(APT_PKGS) python3-venv python3-dev"; \
	    exit 1; \
	  fi; \
	fi

$(STAMP): pyproject.toml | sysdeps
	@test -x $(VPY) || $(PYTHON) -m venv $(VENV)
	$(VPIP) install --upgrade pip 'setuptools>=68' wheel
	$(VPIP) install $(NUMPY_PIN)
	@$(VPY) -c 'from osgeo import gdal_array' 2>/dev/null || \
	  $(VPIP) install --no-build-isolation --no-cache-dir GDAL==$$(gdal-config --version)
	$(VPY) -c 'from osgeo import gdal, gdal_array; print("strikeline: GDAL", gdal.__version__, "with numpy arrays")'
	$(VPIP) install -e '.[dev,plot,dask]' $(NUMPY_PIN)
	@touch $(STAMP)

# the suite, one table at the end; BENCH_ARGS=--huge adds the 30,000 x 30,000 sheet, --quick the smallest sizes
bench: setup
	$(VPY) bench/run_all.py $(BENCH_ARGS)

clean:
	rm -rf $(VENV) .venv-qgis dist demo-output .pytest_cache build *.egg-info algorithms/*.egg-info
