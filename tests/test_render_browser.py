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
    assert main(["render", "--all", "--out", str(out), "--registry", str(EXAMPLES)]) == 0
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
