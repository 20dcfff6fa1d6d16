"""The demo's report.html in a real browser (headless Chromium): every figure decodes and is shown,
nothing is wider than the window (at a desktop and at a narrow width), and a screenshot is written
and not blank. Skipped when `chromium` is not on PATH."""
from __future__ import annotations

import json
import re
import shutil
import subprocess
from html import unescape
from pathlib import Path

import numpy as np
import pytest
from sweep_helpers import ROOT, ampmodel

pytestmark = pytest.mark.browser
CHROMIUM = shutil.which("chromium")
needs_chromium = pytest.mark.skipif(CHROMIUM is None, reason="no `chromium` on PATH (Debian package chromium): "
                                                             "the report is not rendered in a browser")

# Added to a test-side copy of the report only: the report itself holds no script.
PROBE = """<script>
window.addEventListener("load", function () {
  var imgs = Array.prototype.slice.call(document.images);
  var root = document.documentElement;
  var out = {
    images: imgs.length,
    shown: imgs.filter(function (i) { return i.complete && i.naturalWidth > 0 && i.getBoundingClientRect().width > 0; }).length,
    too_wide: imgs.filter(function (i) { return i.getBoundingClientRect().right > window.innerWidth + 0.5; }).length,
    scroll_width: root.scrollWidth, inner_width: window.innerWidth
  };
  var p = document.createElement("pre"); p.id = "probe"; p.textContent = JSON.stringify(out);
  document.body.appendChild(p);
});
</script>"""


def chromium(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--hide-scrollbars",
                           "--no-first-run", "--disable-extensions", *args], capture_output=True, text=True,
                          timeout=180)


@pytest.fixture(scope="module")
def demo_report(tmp_path_factory) -> Path:
    tmp = tmp_path_factory.mktemp("browser")
    out = tmp / "single_pass_rod"
    proc = ampmodel("run", str(ROOT / "configs" / "single_pass_rod.toml"), "--out", str(out), "--quiet", cwd=tmp)
    assert proc.returncode == 0, proc.stderr
    return out / "report.html"


@needs_chromium
@pytest.mark.parametrize("width", [1280, 600])
def test_every_figure_is_shown_and_nothing_overflows(demo_report, tmp_path, width):
    page = demo_report.read_text(encoding="utf-8")
    assert not re.search(r"https?://", page)                       # nothing to fetch: all data: URIs
    probed = tmp_path / "probed.html"
    probed.write_text(page.replace("</body>", PROBE + "</body>"), encoding="utf-8")
    proc = chromium("--dump-dom", "--virtual-time-budget=10000", f"--window-size={width},2000",
                    probed.as_uri())
    found = re.search(r'<pre id="probe">(.*?)</pre>', proc.stdout, flags=re.S)
    assert found, (proc.returncode, proc.stderr[-2000:])
    seen = json.loads(unescape(found.group(1)))
    figures = len(list((demo_report.parent / "plots").glob("*.png")))
    assert seen["images"] == figures >= 5
    assert seen["shown"] == figures, seen                          # each decoded, with a size on the page
    assert seen["too_wide"] == 0, seen
    assert seen["scroll_width"] <= seen["inner_width"], seen       # no sideways scrolling of the page


@needs_chromium
def test_the_screenshot_is_written_and_not_blank(demo_report, tmp_path):
    from matplotlib.image import imread
    shot = tmp_path / "report.png"
    proc = chromium(f"--screenshot={shot}", "--window-size=1280,4000", "--virtual-time-budget=10000",
                    demo_report.as_uri())
    assert shot.is_file(), (proc.returncode, proc.stderr[-2000:])
    pixels = imread(shot)
    assert pixels.shape[:2] == (4000, 1280)
    grey = pixels[..., :3].mean(axis=2)
    assert grey.std() > 0.05                                       # text, boxes and figures, not one colour
    top = pixels[:600, :, :3]
    red = (top[..., 0] > 0.6) & (top[..., 1] < 0.2) & (top[..., 2] < 0.2)
    assert red.sum() > 1000                                        # the safety box's red border near the top
    assert np.mean(grey[600:] < 0.9) > 0.02                        # something drawn below it (figures, tables)
