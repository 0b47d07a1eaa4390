"""``report.html`` (assess and screen) rendered in a real browser: headless Chromium.

What a reader gets when opening the file at 1280 × 800: every image loads
(``naturalWidth`` > 0, HTML Living Standard), no console error or uncaught
exception, and the verdict box in view without scrolling. The browser is the
distribution's Chromium driven over the DevTools pipe (tests/report/_browser.py);
the test is skipped only when no Chromium-family browser is installed
(.ci/run installs Debian's ``chromium`` when it can).
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import pytest

# the driver sits beside this file (tests are not a package: --import-mode=importlib)
_spec = importlib.util.spec_from_file_location("divides_test_browser", Path(__file__).with_name("_browser.py"))
_driver = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(_driver)
Browser, find_browser = _driver.Browser, _driver.find_browser

BROWSER = find_browser()
pytestmark = pytest.mark.skipif(BROWSER is None, reason="no Chromium-family browser installed")

WIDTH, HEIGHT = 1280, 800


@pytest.fixture(scope="module")
def browser():
    page = Browser(BROWSER, width=WIDTH, height=HEIGHT)
    try:
        yield page
    finally:
        page.close()


@pytest.fixture(scope="module")
def screening_report(demo_result, tmp_path_factory):
    import divides
    from divides.assess.screen import screen

    out = divides.write(screen(demo_result.dem, seed=0), tmp_path_factory.mktemp("screen") / "out")
    return out / "report.html"


def _check_page(browser: Browser, report) -> None:
    browser.open(report.as_uri())
    images = browser.evaluate("Array.from(document.images).map(i => [i.complete, i.naturalWidth, i.alt])")
    assert images, "the report shows figures"
    broken = [alt for complete, width, alt in images if not (complete and width > 0)]
    assert broken == []
    assert browser.console_errors() == []
    box = browser.evaluate("""(() => {
        const r = document.getElementById('verdict').getBoundingClientRect();
        const s = getComputedStyle(document.getElementById('verdict'));
        return {top: r.top, bottom: r.bottom, left: r.left, right: r.right, scroll: window.scrollY,
                width: window.innerWidth, height: window.innerHeight, visible: s.visibility, display: s.display};
    })()""")
    assert (box["width"], box["height"]) == (WIDTH, HEIGHT) and box["scroll"] == 0
    assert box["visible"] == "visible" and box["display"] != "none"
    # the whole box inside the first screen
    assert 0 <= box["top"] < box["bottom"] <= HEIGHT and 0 <= box["left"] < box["right"] <= WIDTH, box


def test_assessment_report_in_chromium(browser, written):
    _, out, _ = written
    _check_page(browser, out / "report.html")


def test_screening_report_in_chromium(browser, screening_report):
    _check_page(browser, screening_report)
