"""The HTML reports render in a real browser: headless Chromium (Debian's package)
takes a screenshot of the demo study's fit report, which must not be blank.
The screenshot is also written to notebooks-demo/ when PLUMBLINE_SAVE_SCREENSHOT=1,
for review. Fails loudly when Chromium is missing (install/test.sh installs it)."""
import os
import pathlib
import shutil
import subprocess

import pytest
from PIL import Image

from conftest import REPO, run_raw

DEMO = REPO / "notebooks-demo" / "data"


def chromium():
    for name in ("chromium", "chromium-browser", "google-chrome"):
        path = shutil.which(name)
        if path:
            return path
    pytest.fail("headless Chromium not found; install Debian's `chromium` package (install/test.sh does)",
                pytrace=False)


def screenshot(html_path, png_path, profile_dir):
    cmd = [chromium(), "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
           "--disable-background-networking", "--disable-component-update", "--disable-sync",
           f"--user-data-dir={profile_dir}", "--hide-scrollbars", "--window-size=1100,1500",
           f"--screenshot={png_path}", f"file://{html_path}"]
    result = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    assert png_path.exists(), f"no screenshot: {result.stderr[-2000:]}"


def test_demo_fit_report_renders(tmp_path):
    # Run from the demo folder with relative paths, as a user would: the report
    # shows the path as given, so the saved screenshot carries no machine's layout.
    r = run_raw("fit", "data/sales.csv", "--target", "sale_price", "--log-target",
                "--log", "living_area", "--log", "lot_size", "--terms", "age,quality,bathrooms", "--date-term", "months:sale_date:2023-01-01",
                "--category", "district", "--reference", "district=Wickerholm", "--cov", "hc3",
                "--diagnose", "--id", "parcel_id", "--predict", "data/subjects.csv", "--format", "html",
                cwd=DEMO.parent)
    assert r.returncode == 0, r.stderr
    assert "<script" not in r.stdout.lower()
    assert "data/sales.csv" in r.stdout and str(REPO) not in r.stdout
    html = tmp_path / "report.html"
    html.write_text(r.stdout)
    png = tmp_path / "report.png"
    screenshot(html, png, tmp_path / "profile")
    image = Image.open(png).convert("L")
    pixels = list(image.tobytes())  # one byte per pixel in mode L
    dark = sum(1 for p in pixels if p < 128) / len(pixels)
    distinct = len(set(pixels))
    # Text and table rules make a small but clear share of dark pixels; a blank page has none.
    assert 0.005 < dark < 0.5, dark
    assert distinct > 20
    if os.environ.get("PLUMBLINE_SAVE_SCREENSHOT") == "1":
        shutil.copy(png, REPO / "notebooks-demo" / "fit-report.png")
