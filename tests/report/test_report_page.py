"""report.html of a run: caution first, the answer in plain words, every figure as a PNG of its
stated size, nothing fetched from outside, the same bytes every time; --no-report and a missing
matplotlib leave it out."""
import base64
import html
import json
import os
import re
import struct
import subprocess
import sys
import zlib
from io import BytesIO

import pytest

from strikeline import CAUTION
from strikeline import vocabulary as V
from strikeline.report import MISSING_PLOT, render_report
from strikeline.report.page import MODEL_WORDS
from strikeline.report.figures import pixel_size

from helpers import DEMO

IMG = re.compile(r'<img id="fig-(\w+)" class="figure" width="(\d+)" height="(\d+)" alt="[^"]*" '
                 r'src="data:image/png;base64,([A-Za-z0-9+/=]+)">')
#: The figures of the demo (it has local attitudes, a model choice and a top contact).
DEMO_FIGURES = ["map", "stereonet", "residuals", "models", "thickness"]
#: PNG's signature (Source: PNG specification, ISO/IEC 15948:2003, sec. 5.2).
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


@pytest.fixture(scope="module")
def page(demo_command_run):
    return (demo_command_run.out / V.REPORT_FILE).read_text(encoding="utf-8")


@pytest.fixture(scope="module")
def summary(demo_command_run):
    return json.loads((demo_command_run.out / V.SUMMARY_FILE).read_text())


def _text(page):
    return html.unescape(re.sub(r"<[^>]+>", " ", page.split("<body>", 1)[1]))


def test_the_caution_comes_first(page):
    body = page.split("<body>", 1)[1]
    first = re.match(r'\s*<p class="caution" id="caution">(.*?)</p>', body, re.S)
    assert first is not None and html.unescape(first.group(1)) == CAUTION
    assert body.index("caution") < body.index("<h1>") < body.index("<img")


def test_the_answer_in_plain_words(page, summary):
    text = " ".join(_text(page).split())
    pl = summary["plane"]
    # the 95% limits are the summary's value minus and plus its half-width (one decimal)
    lo, hi = pl["dip_deg"] - pl["dip_ci95_deg"], pl["dip_deg"] + pl["dip_ci95_deg"]
    assert f"The contact dips {pl['dip_deg']:.1f}° (95% limits {lo:.1f}-{hi:.1f}°) toward" in text
    assert f"{pl['dip_direction_deg']:.1f}°" in text and f"strike {pl['strike_rhr_deg']:.1f}°" in text
    m = summary["model"]
    assert f"The surface is modelled as {MODEL_WORDS[m['chosen']]}" in text
    assert m["choice"]["reason"] in text
    t = summary["thickness"]
    assert f"true thickness averages {t['mean_m']:.1f} m" in text
    cm = summary["contact_misfit"]
    assert f"{cm['n_flagged']} of {cm['n_segments']} contact segments" in text
    for name in summary["groups"]["planes"]:
        assert f"Group '{name}' dips" in text


def test_every_figure_is_a_png_of_its_stated_size(page):
    import matplotlib.image

    found = IMG.findall(page)
    assert [f[0] for f in found] == DEMO_FIGURES
    for name, width, height, data in found:
        png = base64.b64decode(data)
        assert png[:8] == PNG_SIGNATURE
        # Source: PNG specification (ISO/IEC 15948:2003) sec. 11.2.2: IHDR is the first chunk, width and
        # height as 4-byte big-endian integers, its CRC-32 over type and data (zlib.crc32)
        length, kind = struct.unpack(">I4s", png[8:16])
        assert kind == b"IHDR" and length == 13
        w, h = struct.unpack(">II", png[16:24])
        assert struct.unpack(">I", png[29:33])[0] == zlib.crc32(png[12:29])
        assert (w, h) == (int(width), int(height)) == pixel_size(name), name
        pixels = matplotlib.image.imread(BytesIO(png), format="png")  # decodes the whole image
        assert pixels.shape[:2] == (h, w)
        assert (pixels[..., :3] < 0.9).mean() > 0.02, f"{name}: almost blank"


def test_self_contained(page):
    assert "<script" not in page.lower()
    # nothing loaded from elsewhere: every src and href is inline data or an anchor
    for ref in re.findall(r'(?:src|href)="([^"]*)"', page):
        assert ref.startswith(("data:", "#")), ref
    assert "url(" not in page and "@import" not in page


def test_no_date_path_or_run_specific_text(page, demo_command_run):
    assert str(demo_command_run.out) not in page
    assert not re.search(r"20\d\d-\d\d-\d\d", page)


def test_same_bytes_from_another_process(demo_command_run, tmp_path):
    # a fresh interpreter (its own matplotlib state, font cache, hash seed) draws the same bytes
    code = ("import sys; from strikeline.report import render_report; "
            "sys.stdout.buffer.write(render_report(sys.argv[1]).encode('utf-8'))")
    proc = subprocess.run([sys.executable, "-c", code, str(demo_command_run.out)], capture_output=True,
                          env={**os.environ, "PYTHONHASHSEED": "123", "MPLCONFIGDIR": str(tmp_path)})
    assert proc.returncode == 0, proc.stderr.decode()
    assert proc.stdout == (demo_command_run.out / V.REPORT_FILE).read_bytes()


def test_the_run_prints_where_the_report_is(demo_command_run):
    lines = demo_command_run.proc.stdout.splitlines()
    assert f"report: {demo_command_run.out / V.REPORT_FILE}" in lines
    assert lines[0] == CAUTION  # caution first, as on the page (strikeline.report.sentences.plain_answer)
    manifest = json.loads((demo_command_run.out / V.MANIFEST_FILE).read_text())
    assert V.REPORT_FILE in json.dumps(manifest)


#: A quick run of the demo's exact contact on its DEM (few resamples, coarse cells).
QUICK = ("--contacts", DEMO / "contacts.gpkg", "--dem", DEMO / "dem.tif", "--resamples", "20", "--cell", "40")


def test_no_report_option(cli, tmp_path):
    done = cli("run", *QUICK, "--out", tmp_path / "out", "--no-report")
    assert done.returncode == 0, done.stderr
    assert not (tmp_path / "out" / V.REPORT_FILE).exists()
    assert (tmp_path / "out" / V.SUMMARY_FILE).exists()
    assert "report:" not in done.stdout


def test_without_matplotlib_the_run_succeeds_and_says_how_to_install_it(cli, tmp_path, monkeypatch):
    for name in [m for m in sys.modules if m == "matplotlib" or m.startswith("matplotlib.")]:
        monkeypatch.delitem(sys.modules, name)
    monkeypatch.setitem(sys.modules, "matplotlib", None)  # import matplotlib now raises ImportError
    done = cli("run", *QUICK, "--out", tmp_path / "out")
    assert done.returncode == 0, done.stderr
    assert sorted(p.name for p in (tmp_path / "out").iterdir()) == sorted(
        [V.RESULTS_FILE, V.SUMMARY_FILE, V.MANIFEST_FILE, V.SURFACE.file, V.DIP.file, V.DIP_DIRECTION.file,
         V.UNCERTAINTY.file, V.DEPTH.file])
    assert done.stderr.count(MISSING_PLOT) == 1
    assert "pip install 'strikeline[plot]'" in MISSING_PLOT
    assert "report:" not in done.stdout


def test_a_folder_without_a_model_or_dem(tmp_path, demo_command_run):
    # only the summary, the GeoPackage and the surface (e.g. contours only, no DEM): the figures that
    # can be drawn are, the others left out
    import shutil

    out = tmp_path / "out"
    out.mkdir()
    for name in (V.SUMMARY_FILE, V.RESULTS_FILE, V.SURFACE.file):
        shutil.copy(demo_command_run.out / name, out / name)
    s = json.loads((out / V.SUMMARY_FILE).read_text())
    del s["model"], s["thickness"]
    (out / V.SUMMARY_FILE).write_text(json.dumps(s))
    page = render_report(out)
    assert [f[0] for f in IMG.findall(page)] == ["map", "stereonet", "residuals"]
    assert "modelled surface's elevation" in html.unescape(page)


def test_without_misfit_segments_the_map_draws_the_input_contacts(tmp_path, demo_command_run):
    # no contact_misfit layer (e.g. no DEM to check against): the contacts inputs the summary names
    # are drawn instead, read-only and whole
    import shutil

    from osgeo import ogr

    from strikeline.io._gdal import gdal_exceptions
    from strikeline.report.data import load_outputs

    out = tmp_path / "out"
    out.mkdir()
    for name in (V.SUMMARY_FILE, V.RESULTS_FILE, V.SURFACE.file, V.DEPTH.file):
        shutil.copy(demo_command_run.out / name, out / name)
    with gdal_exceptions():
        ds = ogr.Open(str(out / V.RESULTS_FILE), 1)
        names = [ds.GetLayer(i).GetName() for i in range(ds.GetLayerCount())]
        ds.DeleteLayer(names.index(V.CONTACT_MISFIT.name))
        ds = None
    d = load_outputs(out)
    assert d.misfit is None and d.contacts is not None
    # Source: the run's own measure of its input contacts (summary contacts_off_dem.total_length_m, from OGR's
    # reading of the same files)
    total = json.loads((out / V.SUMMARY_FILE).read_text())["contacts_off_dem"]["total_length_m"]
    import shapely

    assert float(shapely.length(d.contacts.geoms).sum()) == pytest.approx(total, rel=1e-6)
    assert [f[0] for f in IMG.findall(render_report(out))] == DEMO_FIGURES


def test_dip_direction_limits_wrap_round_north():
    from strikeline.report import plane_words

    # Source: azimuths are modulo 360 (common practice): 1.5 ± 3 spans 358.5 to 4.5
    words = plane_words({"dip_deg": 12.0, "dip_ci95_deg": 0.5, "dip_direction_deg": 1.5,
                         "dip_direction_ci95_deg": 3.0, "dip_direction_true_deg": 1.0, "strike_rhr_deg": 271.5,
                         "rms_m": 0.8, "n_picks": 30, "quality": "good"})
    assert "toward 1.5° (95% limits 358.5-4.5°) from grid north" in words
