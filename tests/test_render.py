"""Rendering the report in a real browser (headless Chromium), when one is installed.

Install it with ``apt-get install chromium`` (Debian); without it this test is skipped and
``python tests/test_render.py REPORT_DIR OUT.png`` documents the same check by hand.
"""

import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

import pytest

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")


def screenshot(index_html, png):
    """Open ``index_html`` in headless Chromium and save a screenshot to ``png``."""
    with tempfile.TemporaryDirectory() as profile:
        subprocess.run(
            [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
             "--no-first-run", "--disable-background-networking",
             "--disable-component-update", "--disable-sync", f"--user-data-dir={profile}",
             "--window-size=1200,1600", f"--screenshot={png}",
             Path(index_html).resolve().as_uri()],
            check=True, capture_output=True, timeout=120)
    return Path(png)


@pytest.mark.skipif(CHROMIUM is None, reason="headless Chromium is not installed")
def test_demo_report_renders_in_chromium(demo_report, tmp_path):
    png = screenshot(demo_report / "index.html", tmp_path / "shot.png")
    data = png.read_bytes()
    # a PNG file (signature from the PNG specification, ISO/IEC 15948) of real content
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and len(data) > 20000


if __name__ == "__main__":  # pragma: no cover - the documented manual check
    print(screenshot(Path(sys.argv[1]) / "index.html", sys.argv[2]))
