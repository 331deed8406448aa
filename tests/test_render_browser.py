"""Rendered pages in a real browser: headless Chromium loads them without console errors and draws the figure.

Skipped only where Chromium is missing and CI is not set; under CI a missing browser fails.
"""

from __future__ import annotations

import io
import os
import shutil
import tempfile
from pathlib import Path

import pytest

from .conftest import EXAMPLES

pytestmark = [pytest.mark.browser, pytest.mark.slow]

CHROMIUM = os.environ.get("PRESPEC_CHROMIUM") or shutil.which("chromium") or "/usr/bin/chromium"
CHROMEDRIVER = os.environ.get("PRESPEC_CHROMEDRIVER") or shutil.which("chromedriver") or "/usr/bin/chromedriver"
FLAGS = ("--headless=new", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage",
         "--disable-background-networking", "--disable-component-update", "--disable-sync", "--no-first-run",
         "--window-size=1280,1600")


@pytest.fixture(scope="module")
def browser():
    missing = [p for p in (CHROMIUM, CHROMEDRIVER) if not Path(p).is_file()]
    if missing:
        reason = f"headless Chromium is not installed ({', '.join(missing)} missing)"
        if os.environ.get("CI"):
            pytest.fail(f"{reason}; CI must install it: apt-get install -y chromium chromium-driver")
        pytest.skip(reason)
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    options = webdriver.ChromeOptions()
    options.binary_location = CHROMIUM
    for flag in FLAGS:
        options.add_argument(flag)
    profile = tempfile.mkdtemp(prefix="prespec-chromium-")
    options.add_argument(f"--user-data-dir={profile}")
    options.set_capability("goog:loggingPrefs", {"browser": "ALL"})
    driver = webdriver.Chrome(service=Service(CHROMEDRIVER), options=options)
    try:
        yield driver
    finally:
        driver.quit()
        shutil.rmtree(profile, ignore_errors=True)


@pytest.fixture(scope="module")
def pages(tmp_path_factory):
    from registry.cli import main

    out = tmp_path_factory.mktemp("pages")
    assert main(["render", "--all", str(EXAMPLES), "--out", str(out)]) == 0
    return out


def _severe(driver) -> list[dict]:
    return [entry for entry in driver.get_log("browser") if entry["level"] == "SEVERE"]


def test_index_loads_without_console_errors(browser, pages):
    browser.get((pages / "index.html").as_uri())
    assert browser.title == "Design registry summaries"
    links = browser.find_elements("css selector", "tbody a")
    assert len(links) == len(list(EXAMPLES.glob("*.yaml")))
    assert _severe(browser) == []
    links[0].click()  # the link leads to a summary page that also loads cleanly
    assert browser.current_url.endswith(f"{sorted(EXAMPLES.glob('*.yaml'))[0].stem}.html")  # index in file order
    assert _severe(browser) == []


def test_summary_page_draws_the_figure(browser, pages):
    import numpy as np
    from PIL import Image

    browser.get((pages / "fibre-butyrate.html").as_uri())
    assert _severe(browser) == []
    svg = browser.find_element("css selector", "figure svg")
    assert svg.get_attribute("role") == "img"
    assert browser.execute_script("return arguments[0].querySelector('title').textContent", svg) == "Power curve"
    browser.execute_script("arguments[0].scrollIntoView({block: 'start'})", svg)
    rect = browser.execute_script(
        "const r = arguments[0].getBoundingClientRect(); return [r.left, r.top, r.width, r.height, "
        "window.devicePixelRatio];", svg)
    left, top, width, height, scale = rect
    assert width > 300 and height > 150
    shot = Image.open(io.BytesIO(browser.get_screenshot_as_png())).convert("RGB")
    box = tuple(round(v * scale) for v in (left, top, left + width, min(top + height, shot.height / scale)))
    pixels = np.asarray(shot.crop(box), dtype=int).reshape(-1, 3)
    dark = int((pixels.sum(axis=1) < 600).sum())
    blue = int(((pixels[:, 2] > pixels[:, 0] + 40) & (pixels[:, 2] > 90)).sum())  # the curve is drawn in blue
    assert dark > 0.005 * len(pixels), "the figure area is blank"
    assert blue > 100, "no curve pixels in the figure area"


def test_print_stylesheet_applies(browser, pages):
    browser.get((pages / "fibre-butyrate.html").as_uri())
    browser.execute_cdp_cmd("Emulation.setEmulatedMedia", {"media": "print"})
    try:
        width = browser.execute_script("return getComputedStyle(document.querySelector('main')).maxWidth")
        assert width == "none"
    finally:
        browser.execute_cdp_cmd("Emulation.setEmulatedMedia", {"media": ""})


SHOTS = Path(os.environ.get("PRESPEC_SCREENSHOTS") or tempfile.mkdtemp(prefix="prespec-shots-"))


def _local_only(driver) -> list[str]:
    """Every resource the page loaded that is not a local file or inline data (must be none)."""
    urls = driver.execute_script("return performance.getEntriesByType('resource').map(e => e.name)")
    return [u for u in urls if not u.startswith(("file:", "data:"))]


def test_page_screenshot_and_printed_pdf(browser, pages):
    import base64
    import re
    import subprocess

    browser.get((pages / "fibre-butyrate.html").as_uri())
    assert _severe(browser) == [] and _local_only(browser) == []
    browser.save_screenshot(str(SHOTS / "fibre-butyrate.png"))
    assert (SHOTS / "fibre-butyrate.png").stat().st_size > 10_000
    flags = browser.find_elements("css selector", "p.status .flag")
    assert {f.text.split(" ", 1)[0] for f in flags} >= {"✔", "⚠"}  # ok/clean and not registered
    pdf = base64.b64decode(browser.execute_cdp_cmd("Page.printToPDF", {"preferCSSPageSize": True})["data"])
    (SHOTS / "fibre-butyrate.pdf").write_bytes(pdf)
    pages_printed = len(re.findall(rb"/Type\s*/Page[^s]", pdf))
    assert 2 <= pages_printed <= 5  # a small spec prints in about four A4 pages
    pdftotext = shutil.which("pdftotext")
    if pdftotext is None:
        if os.environ.get("CI"):
            pytest.fail("pdftotext (poppler-utils) is needed in CI to read the printed header back")
        pytest.skip("pdftotext is not installed; the running header cannot be read back")
    text = subprocess.run([pdftotext, "-layout", str(SHOTS / "fibre-butyrate.pdf"), "-"], capture_output=True,
                          text=True, check=True).stdout
    sheets = [sheet for sheet in text.split("\f") if sheet.strip()]
    assert len(sheets) == pages_printed
    for number, sheet in enumerate(sheets, start=1):
        assert "fibre-butyrate" in sheet.splitlines()[0], f"page {number} has no running header"
        assert f"page {number} of {pages_printed}" in sheet


def test_narrow_screen_reads_without_sideways_scrolling(browser, pages):
    browser.set_window_size(400, 900)
    try:
        browser.get((pages / "fibre-butyrate.html").as_uri())
        wide = browser.execute_script("return document.documentElement.scrollWidth")
        inner = browser.execute_script("return window.innerWidth")
        browser.save_screenshot(str(SHOTS / "fibre-butyrate-400px.png"))
        assert wide <= inner + 1
    finally:
        browser.set_window_size(1280, 1600)


def test_site_index_filters_by_status_and_verdict(browser, pages):
    from selenium.webdriver.support.ui import Select

    browser.get((pages / "index.html").as_uri())
    assert _severe(browser) == [] and _local_only(browser) == []
    rows = browser.find_elements("css selector", "tbody tr")
    visible = lambda: [r for r in rows if r.is_displayed()]  # noqa: E731
    assert len(visible()) == len(rows)
    Select(browser.find_element("name", "verdict")).select_by_value("bad")
    bad = visible()
    assert bad and len(bad) < len(rows) and all("✖" in r.text for r in bad)
    browser.save_screenshot(str(SHOTS / "index-filtered.png"))
    Select(browser.find_element("name", "verdict")).select_by_value("")
    Select(browser.find_element("name", "status")).select_by_value("planned")
    assert visible() and all(" planned " in f" {r.text} " for r in visible())
    assert "shown" in browser.find_element("css selector", ".filters output").text
    assert _severe(browser) == []
