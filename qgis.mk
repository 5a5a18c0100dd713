# QGIS adapter targets (filled by the adapter work): test-qgis, plugin.
.PHONY: test-qgis plugin
test-qgis:
	@echo "strikeline: QGIS adapter tests not written yet"
