"""Rendering the report in a real browser (headless Chromium), when one is installed.

Install it with ``apt-get install chromium`` (Debian; ``.ci/run`` does so where it runs as
root); without it these tests are skipped, and ``python tests/test_render.py REPORT_DIR
OUT.png`` documents the same check by hand.

What a reader sees is checked in two ways that fail on a broken page: the layout Chromium
computes (element positions read by a small script in a probe copy of the page, printed
with ``--dump-dom``) and the pixels of a screenshot of the first screen.
"""

import html
import json
import re
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

import pytest

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
#: The first screen of a laptop browser window (CSS pixels; common practice).
VIEWPORT = (1200, 900)
#: Background of the summary box (the report's CSS, ``#summary``).
SUMMARY_RGB = (0xEA, 0xF2, 0xFB)

needs_chromium = pytest.mark.skipif(CHROMIUM is None,
                                    reason="headless Chromium is not installed")

# Reads the layout once the page and its images have loaded; written into the DOM, which
# --dump-dom prints.
_PROBE = """<script>
window.addEventListener('load', () => {
  const box = e => { const r = e.getBoundingClientRect();
                     return {top: r.top, bottom: r.bottom, left: r.left, right: r.right}; };
  const summary = document.getElementById('summary');
  document.body.setAttribute('data-layout', JSON.stringify({
    viewport: [innerWidth, innerHeight],
    page_height: document.documentElement.scrollHeight,
    summary: summary ? box(summary) : null,
    summary_table: summary ? box(summary.querySelector('table')) : null,
    contents: document.getElementById('contents') ?
              box(document.getElementById('contents')) : null,
    images: [...document.images].map(i => [i.naturalWidth, box(i).right - box(i).left]),
  }));
});
</script>"""


def _chromium(args, profile):
    return subprocess.run(
        [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
         "--no-first-run", "--disable-background-networking", "--disable-component-update",
         "--disable-sync", f"--user-data-dir={profile}",
         f"--window-size={VIEWPORT[0]},{VIEWPORT[1]}", *args],
        check=True, capture_output=True, timeout=120, text=True)


def screenshot(index_html, png):
    """Open ``index_html`` in headless Chromium and save a screenshot of the first screen."""
    with tempfile.TemporaryDirectory() as profile:
        _chromium([f"--screenshot={png}", Path(index_html).resolve().as_uri()], profile)
    return Path(png)


def layout(index_html, work_dir):
    """Positions of the summary, contents and images as Chromium lays out the page."""
    index_html = Path(index_html).resolve()
    text = index_html.read_text(encoding="utf-8")
    base = f"<head><base href='{index_html.parent.as_uri()}/'>"
    probe = Path(work_dir) / "probe.html"
    probe.write_text(text.replace("<head>", base, 1).replace("</body>", _PROBE + "</body>"),
                     encoding="utf-8")
    with tempfile.TemporaryDirectory() as profile:
        dom = _chromium(["--virtual-time-budget=10000", "--dump-dom", probe.as_uri()],
                        profile).stdout
    found = re.search(r'data-layout="([^"]*)"', dom)
    assert found, "the probe script did not run: the page did not load"
    return json.loads(html.unescape(found.group(1)))


@needs_chromium
def test_summary_fills_the_first_screen(demo_report, tmp_path):
    seen = layout(demo_report / "index.html", tmp_path)
    width, height = seen["viewport"]
    summary, grid = seen["summary"], seen["summary_table"]
    assert summary is not None and grid is not None
    # the summary table starts in the upper half of the first screen and every column of
    # it is there; with twelve targets its last rows may fall below the fold, more so
    # where a machine's fonts are larger
    assert 0 <= grid["top"] < height / 2 < grid["bottom"]
    assert 0 <= grid["left"] < grid["right"] <= width
    # the table of contents follows the summary
    assert seen["contents"]["top"] >= summary["bottom"]
    # folded tables: far shorter than the 23,000 px page of 60-row tables
    assert seen["page_height"] < 16000
    # figures are shown at least at their natural column width (readable), never wider
    # than the window
    for natural, shown in seen["images"]:
        assert natural > 0, "an image failed to load"
        assert min(natural, 500) <= shown + 1 and shown <= width


@needs_chromium
def test_screenshot_shows_the_summary_box(demo_report, tmp_path):
    import matplotlib.image

    png = screenshot(demo_report / "index.html", tmp_path / "shot.png")
    pixels = matplotlib.image.imread(png)[..., :3]  # floats in [0, 1]
    assert pixels.shape[:2] == (VIEWPORT[1], VIEWPORT[0])
    target = [c / 255 for c in SUMMARY_RGB]
    share = float(((abs(pixels - target) < 1.5 / 255).all(axis=-1)).mean())
    # the summary box's background covers a good part of the first screen (its text and
    # table sit on it); on a page without the summary, or unstyled, it is absent
    assert share > 0.10, share


if __name__ == "__main__":  # pragma: no cover - the documented manual check
    print(screenshot(Path(sys.argv[1]) / "index.html", sys.argv[2]))
