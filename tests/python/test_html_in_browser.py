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


def print_to_pdf(html_path, pdf_path, profile_dir):
    cmd = [chromium(), "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
           "--disable-background-networking", "--disable-component-update", "--disable-sync",
           f"--user-data-dir={profile_dir}", "--no-pdf-header-footer", f"--print-to-pdf={pdf_path}",
           f"file://{html_path}"]
    result = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    assert pdf_path.exists(), f"no PDF: {result.stderr[-2000:]}"


def screened_demo_sales(path):
    """The valuation study's screen (section 2–3): arm's-length sales with a living area of at most 8,000 sq ft."""
    lines = (DEMO / "sales.csv").read_text().splitlines()
    header = lines[0].split(",")
    kept = [line for line in lines[1:] if line.split(",")[header.index("sale_type")] == "arms-length"
            and float(line.split(",")[header.index("living_area")]) <= 8000]
    path.write_text("\n".join([lines[0]] + kept) + "\n")
    return path


APPEAL_PARCELS = ("WM-135021", "WM-135154")


def test_appeal_pages_print_without_a_table_cut_across_sheets(tmp_path):
    """Chromium prints the appeal pages of two demo subjects (one ordinary, one unusual with too few
    comparables) to PDF. Every table and every comparable's account lies on one sheet: the text of its
    first and last line is found on the same PDF page; each parcel starts a sheet of its own."""
    import pypdf

    sales = screened_demo_sales(tmp_path / "study-sales.csv")
    html = tmp_path / "pages.html"
    r = run_raw("appeal", str(sales), "--target", "sale_price", "--log-target", "--log", "living_area",
                "--log", "lot_size", "--terms", "age,quality,bathrooms", "--category", "district",
                "--reference", "district=Wickerholm", "--date-term", "months:sale_date:2023-01-01",
                "--location-term", "dist:x:y:4.5:3.0:Lantern Green", "--cov", "hc3", "--id", "parcel_id",
                "--parcels", str(DEMO / "subjects.csv"), "--parcel", APPEAL_PARCELS[0], "--parcel", APPEAL_PARCELS[1],
                "--valuation-date", "2026-01-01", "--market-area", "district", "--places", "x,y",
                "--distance-unit", "km", "--html", str(html), "--format", "json")
    assert r.returncode == 0, r.stderr
    document = __import__("json").loads(r.stdout)
    # The print rules are there: whatever the sheet size, every table and account is kept whole.
    markup = html.read_text()
    assert "break-inside: avoid" in markup and "break-before: page" in markup and "@page" in markup
    import re
    tables = re.findall(r"<table[^>]*>", markup)
    assert tables and all('class="pl-keep"' in t for t in tables), "a table without the keep rule"
    assert markup.count('data-part="comparable"') == sum(len(p["comparables"]["chosen"]) for p in document["pages"])
    pdf = tmp_path / "pages.pdf"
    print_to_pdf(html, pdf, tmp_path / "profile")
    sheets = [" ".join(page.extract_text().split()) for page in pypdf.PdfReader(str(pdf)).pages]
    assert len(sheets) >= 2

    def sheet_of(text):
        found = [i for i, sheet in enumerate(sheets) if text in sheet]
        assert found, f"`{text}` is not in the printed pages"
        return found[0]

    starts = [sheet_of(f"Parcel {parcel}:") for parcel in APPEAL_PARCELS]
    assert starts[0] < starts[1], "each parcel starts a sheet of its own"
    assert APPEAL_PARCELS[0] not in sheets[starts[1]], "the second parcel's sheet holds nothing of the first"
    for parcel, page in zip(APPEAL_PARCELS, document["pages"]):
        assert sheet_of("start: the typical home") <= sheet_of(f"value of {parcel}")
        first = [i for i, s in enumerate(sheets) if "start: the typical home" in s and f"value of {parcel}" in s]
        assert first, f"the build-up table of {parcel} is cut across sheets"
        for number, sale in enumerate(page["comparables"]["chosen"], start=1):
            top = sheet_of(f"Sale {number}: {sale['parcel_id']}")
            bottom = sheet_of(f"sale {number} adjusted to {parcel}")
            assert top == bottom, f"{parcel}: comparable {number} is cut across sheets {top} and {bottom}"
    # The unusual subject: too few comparables, said as such.
    assert document["pages"][1]["comparables"]["reconciled"] is None
    assert "Too few comparable sales" in " ".join(sheets)
    if os.environ.get("PLUMBLINE_SAVE_SCREENSHOT") == "1":
        import pymupdf
        with pymupdf.open(str(pdf)) as printed:
            printed[starts[0]].get_pixmap(dpi=80).save(str(REPO / "notebooks-demo" / "appeal-page.png"))
