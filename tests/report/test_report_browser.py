"""report.html as a browser shows it: Debian's headless Chromium renders the page and every figure
appears in its frame, at its own size, with its own pixels (with CI=true the test must run)."""
import base64
import os
import re
import shutil
import subprocess
from io import BytesIO

import numpy as np
import pytest

from strikeline import vocabulary as V
from strikeline.report.figures import pixel_size
from strikeline.report.page import FRAME_RGB

DEMO_FIGURES = ["map", "stereonet", "residuals", "models", "thickness"]
WINDOW = (1400, 6000)
FRAME = 4  # px: the border of img.figure in the page's style


def _chromium():
    for name in ("chromium", "chromium-browser"):
        path = shutil.which(name)
        if path:
            return path
    if os.environ.get("CI") == "true":
        pytest.fail("headless Chromium is missing: install Debian's chromium (make test does, as root)")
    pytest.skip("headless Chromium is not installed (apt-get install chromium)")


@pytest.fixture(scope="module")
def screenshot(demo_command_run, tmp_path_factory):
    """The demo's report.html rendered by headless Chromium, as an (H, W, 3) uint8 array."""
    import matplotlib.image

    browser = _chromium()
    tmp = tmp_path_factory.mktemp("chromium")
    shot = tmp / "report.png"
    page = demo_command_run.out / V.REPORT_FILE
    cmd = [browser, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
           "--disable-background-networking", "--disable-component-update", "--disable-sync", "--hide-scrollbars",
           "--force-device-scale-factor=1", f"--user-data-dir={tmp / 'profile'}", f"--screenshot={shot}",
           f"--window-size={WINDOW[0]},{WINDOW[1]}", page.resolve().as_uri()]
    proc = subprocess.run(cmd, capture_output=True, text=True, timeout=300, env={**os.environ, "HOME": str(tmp)})
    assert proc.returncode == 0 and shot.exists(), proc.stderr[-2000:]
    rgba = matplotlib.image.imread(shot)  # Source: matplotlib's PNG reader, independent of the page's writer
    return np.round(rgba[..., :3] * 255).astype(np.uint8), page.read_text(encoding="utf-8")


def _bands(mask_rows: np.ndarray) -> list[tuple[int, int]]:
    """Runs of True in a 1-D mask as (first, last) index pairs."""
    edges = np.flatnonzero(np.diff(np.r_[0, mask_rows.astype(np.int8), 0]))
    return [(int(a), int(b) - 1) for a, b in zip(edges[::2], edges[1::2])]


def _frames(img: np.ndarray) -> list[tuple[int, int, int, int]]:
    """Inner boxes (top, bottom, left, right) of the figure frames: horizontal runs of the frame colour."""
    is_frame = np.all(np.abs(img.astype(int) - np.array(FRAME_RGB)) <= 2, axis=-1)
    wide = is_frame.sum(axis=1) > 1000  # a top or bottom edge spans the figure's width
    bands = _bands(wide)
    assert len(bands) % 2 == 0, f"unpaired frame edges at rows {bands}"
    boxes = []
    for (t0, t1), (b0, b1) in zip(bands[::2], bands[1::2]):
        cols = np.flatnonzero(is_frame[t0])
        boxes.append((t1 + 1, b0 - 1, int(cols.min()) + FRAME, int(cols.max()) - FRAME))
    return boxes


def test_chromium_renders_every_figure(screenshot):
    import matplotlib.image

    img, page = screenshot
    boxes = _frames(img)
    assert len(boxes) == len(DEMO_FIGURES), f"found {len(boxes)} framed figures in the screenshot: {boxes}"
    pngs = re.findall(r'<img id="fig-(\w+)"[^>]*src="data:image/png;base64,([^"]+)"', page)
    for (name, data), (top, bottom, left, right) in zip(pngs, boxes):
        shown = img[top:bottom + 1, left:right + 1].astype(float) / 255.0
        # the browser shows the figure at its own pixel size
        assert (shown.shape[1], shown.shape[0]) == pixel_size(name), name
        # and not blank: a good share of the figure is ink
        assert (shown < 0.9).any(axis=-1).mean() > 0.02, f"{name}: blank in the browser"
        # with the PNG's own pixels (colour management may shift a level or two)
        own = matplotlib.image.imread(BytesIO(base64.b64decode(data)), format="png")[..., :3]
        assert np.abs(shown - own).mean() < 0.02, name


def test_the_caution_box_is_at_the_top(screenshot):
    img, _ = screenshot
    dark = (img.max(axis=-1) < 60).sum(axis=1) > 1000  # the caution box's dark border spans the page
    rows = np.flatnonzero(dark)
    assert len(rows) and rows[0] < 120
