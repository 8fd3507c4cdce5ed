"""The demo's HTML report in a real browser: headless Chromium driven by selenium.

Checks what a reader would notice first: the page loads without errors in the
console, the zone map is there and decoded, the summary table is visible.
The screenshot is kept as a test artefact: in the folder named by the
environment variable ``SPECGRAPH_ARTIFACTS`` when set, else in pytest's
temporary folder.

Needs the Debian packages ``chromium`` and ``chromium-driver`` (``.ci/run``
installs them where missing) and the Python package selenium. Without them
the test is skipped, unless the environment variable
``SPECGRAPH_REQUIRE_BROWSER`` is set (``.ci/run`` sets it once Chromium is
installed): then a missing driver or library is a failure, not a reason to skip.
"""

from __future__ import annotations

import os
import shutil
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from specgraph.cli import REPORT_FILE, main
from specgraph.demo import load_demo

CHROMIUM = Path("/usr/bin/chromium")
CHROMEDRIVER = Path("/usr/bin/chromedriver")

#: Window of the headless browser: wide enough for the report's layout.
WINDOW = (1280, 1600)
#: Seconds the driver waits for a page or an element (a generous bound, not a timing check).
PAGE_TIMEOUT = 60


def _missing(reason: str) -> None:
    if os.environ.get("SPECGRAPH_REQUIRE_BROWSER"):
        pytest.fail(
            f"{reason} (SPECGRAPH_REQUIRE_BROWSER is set: the browser test may not be skipped)"
        )
    pytest.skip(reason)


@pytest.fixture(scope="module")
def webdriver_module() -> Any:
    try:
        from selenium import webdriver
    except ImportError:
        _missing("selenium is not installed (pip install 'specgraph[test]')")
    for path in (CHROMIUM, CHROMEDRIVER):
        if not (path.is_file() and os.access(path, os.X_OK)):
            _missing(f"{path} is missing (apt-get install chromium chromium-driver)")
    return webdriver


@pytest.fixture(scope="module")
def artifacts(tmp_path_factory: pytest.TempPathFactory) -> Path:
    chosen = os.environ.get("SPECGRAPH_ARTIFACTS")
    folder = Path(chosen) if chosen else tmp_path_factory.mktemp("artifacts")
    folder.mkdir(parents=True, exist_ok=True)
    return folder


@pytest.fixture(scope="module")
def demo_report(artifacts: Path) -> tuple[Path, int]:
    """The report that ``specgraph demo --report`` writes, run through the command line."""
    out = artifacts / "demo"
    assert main(["demo", "--report", "--out", str(out), "--quiet"]) == 0
    return out / REPORT_FILE, load_demo().n_nodes


@pytest.fixture(scope="module")
def browser(webdriver_module: Any, tmp_path_factory: pytest.TempPathFactory) -> Iterator[Any]:
    from selenium.webdriver.chrome.service import Service

    options = webdriver_module.ChromeOptions()
    options.binary_location = str(CHROMIUM)
    profile = tmp_path_factory.mktemp("chromium-profile")
    for flag in (
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--no-first-run",
        f"--user-data-dir={profile}",
        f"--window-size={WINDOW[0]},{WINDOW[1]}",
    ):
        options.add_argument(flag)
    options.set_capability("goog:loggingPrefs", {"browser": "ALL"})
    service = Service(executable_path=str(CHROMEDRIVER))
    driver = webdriver_module.Chrome(service=service, options=options)
    driver.set_page_load_timeout(PAGE_TIMEOUT)
    try:
        yield driver
    finally:
        driver.quit()
        shutil.rmtree(profile, ignore_errors=True)


def test_demo_report_renders_in_chromium(
    browser: Any, demo_report: tuple[Path, int], artifacts: Path
) -> None:
    from selenium.webdriver.common.by import By
    from selenium.webdriver.support import expected_conditions
    from selenium.webdriver.support.ui import WebDriverWait

    report, n_nodes = demo_report
    browser.get(report.resolve().as_uri())
    wait = WebDriverWait(browser, PAGE_TIMEOUT)
    wait.until(lambda d: d.execute_script("return document.readyState") == "complete")
    summary = wait.until(expected_conditions.visibility_of_element_located((By.ID, "summary")))
    zone_map = browser.find_element(By.ID, "zone-map")
    browser.execute_script("arguments[0].scrollIntoView()", zone_map)
    loaded = browser.execute_script(
        "const img = arguments[0]; return [img.complete, img.naturalWidth, img.naturalHeight];",
        zone_map,
    )
    page_height = browser.execute_script("return document.documentElement.scrollHeight")
    browser.set_window_size(WINDOW[0], min(int(page_height), 12_000))
    browser.execute_script("window.scrollTo(0, 0)")
    (artifacts / "demo-report.png").write_bytes(browser.get_screenshot_as_png())
    severe = [entry for entry in browser.get_log("browser") if entry["level"] == "SEVERE"]

    assert severe == []
    assert loaded[0] is True
    assert loaded[1] > 0
    assert loaded[2] > 0
    assert zone_map.is_displayed()
    assert summary.is_displayed()
    rows = summary.find_elements(By.TAG_NAME, "tr")
    cells = {
        r.find_element(By.TAG_NAME, "th").text: r.find_element(By.TAG_NAME, "td").text for r in rows
    }
    assert cells["nodes"] == str(n_nodes)
    assert (artifacts / "demo-report.png").stat().st_size > 0
