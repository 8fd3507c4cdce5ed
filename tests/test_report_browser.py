"""The demo's HTML report in a real browser: headless Chromium driven by selenium.

Checks what a reader would notice first: the page loads without errors in the
console, the zone map is there and decoded, the summary table is visible.
Then the zone maps as SVG files, as ``--figures`` writes them, opened on
their own: on a 16-zone map every zone number is displayed and touching zones
(by networkx's quotient graph of the network) show different colours in the
rendered pixels; on a 200,000-node map every zone number is displayed.
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

import numpy as np
import pytest

from specgraph import find_zones, gallery
from specgraph.cli import REPORT_FILE, main
from specgraph.demo import load_demo
from specgraph.report import figure_bytes, zone_colours, zone_map_figure

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


# ------------------------------------------------------------------ maps as SVG files
#: Half-width (pixels) of the window around a zone number in which its zone's colour is read:
#: wider than the number's white box (about 30 x 25 pixels at 1,200 pixels across).
SAMPLE_RADIUS = 30


def _open_svg(browser: Any, path: Path) -> Any:
    from selenium.webdriver.support.ui import WebDriverWait

    browser.get(path.resolve().as_uri())
    WebDriverWait(browser, PAGE_TIMEOUT).until(
        lambda d: d.execute_script("return document.readyState") == "complete"
    )
    # Draw the map 1,200 px wide whatever its own size (the SVG's width is in points).
    browser.execute_script(
        "const s = document.documentElement; s.setAttribute('width', '1200px');"
        "s.setAttribute('height', '1200px');"
    )
    return browser


def _label_centres(browser: Any, zones: int) -> dict[int, tuple[float, float]]:
    """Zone number -> centre (CSS pixels) of its displayed label, for every zone."""
    from selenium.webdriver.common.by import By

    centres = {}
    for zone in range(zones):
        element = browser.find_element(By.ID, f"zone-label-{zone}")
        assert element.is_displayed()
        box = browser.execute_script(
            "const r = arguments[0].getBoundingClientRect();"
            "return [r.left, r.top, r.width, r.height];",
            element,
        )
        assert box[2] > 0
        assert box[3] > 0
        assert box[0] >= 0  # inside the drawn map
        assert box[0] + box[2] <= 1200
        centres[zone] = (box[0] + box[2] / 2, box[1] + box[3] / 2)
    return centres


def _touching(zoning: Any) -> set[tuple[int, int]]:
    import networkx as nx

    net = zoning.network
    graph = nx.Graph()
    graph.add_nodes_from(range(net.n_nodes))
    coo = net.adjacency.tocoo()
    graph.add_edges_from(zip(coo.row.tolist(), coo.col.tolist(), strict=True))
    parts = [set(np.flatnonzero(zoning.labels == z).tolist()) for z in range(zoning.n_zones)]
    return {tuple(sorted(e)) for e in nx.quotient_graph(graph, parts, relabel=True).edges()}


def _zone_colour_near(pixels: Any, centre: tuple[float, float], palette: list[Any]) -> int:
    """Index of the palette colour most present around ``centre`` in a screenshot."""
    x, y = (round(c) for c in centre)
    window = pixels[
        max(0, y - SAMPLE_RADIUS) : y + SAMPLE_RADIUS, max(0, x - SAMPLE_RADIUS) : x + SAMPLE_RADIUS
    ].reshape(-1, 3)
    distance = np.linalg.norm(window[:, None, :] - np.array(palette)[None, :, :], axis=2)
    close = distance.min(axis=1) < 12  # exact colour up to rounding, not an anti-aliased blend
    return int(np.bincount(distance[close].argmin(axis=1), minlength=len(palette)).argmax())


def test_16_zone_map_numbers_every_zone_and_touching_zones_differ(
    browser: Any, artifacts: Path
) -> None:
    from PIL import Image

    zoning = find_zones(gallery.road_like(3_000, rng=1), 16, rng=0)
    path = artifacts / "zone-map-16.svg"
    path.write_bytes(figure_bytes(zone_map_figure(zoning), format="svg"))
    _open_svg(browser, path)
    centres = _label_centres(browser, 16)
    shot = artifacts / "zone-map-16.png"
    shot.write_bytes(browser.get_screenshot_as_png())
    pixels = np.asarray(Image.open(shot).convert("RGB"), dtype=float)
    ratio = browser.execute_script("return window.devicePixelRatio") or 1
    assigned = zone_colours(zoning.network, zoning.labels).colours
    palette = sorted(set(assigned))
    rgb = [[int(c[i : i + 2], 16) for i in (1, 3, 5)] for c in palette]
    seen = {
        z: palette[_zone_colour_near(pixels, (cx * ratio, cy * ratio), rgb)]
        for z, (cx, cy) in centres.items()
    }
    # The browser shows each zone in its assigned colour, so touching zones differ on screen.
    assert seen == dict(enumerate(assigned))
    touching = _touching(zoning)
    assert touching
    assert all(seen[a] != seen[b] for a, b in touching)


def test_200000_node_map_numbers_every_zone(browser: Any, artifacts: Path) -> None:
    net = gallery.road_like(200_000, rng=4)
    xy = net.coordinates
    # A cheap zoning (blocks of a 6 x 4 grid over the unit square), as find_zones would
    # take minutes here; the map's drawing does not depend on how zones were found.
    labels = np.minimum((xy[:, 0] * 6).astype(int), 5) + 6 * np.minimum(
        (xy[:, 1] * 4).astype(int), 3
    )
    from specgraph.diagnostics import boundary_links, overall_scores, zone_table
    from specgraph.zones import Zoning

    table = zone_table(net, labels)
    zoning = Zoning(
        network=net, labels=labels, zones=table, boundary=boundary_links(net, labels),
        solves=(), scores=overall_scores(table), parameters={},
    )  # fmt: skip
    path = artifacts / "zone-map-200000.svg"
    path.write_bytes(figure_bytes(zone_map_figure(zoning), format="svg"))
    _open_svg(browser, path)
    centres = _label_centres(browser, 24)
    (artifacts / "zone-map-200000.png").write_bytes(browser.get_screenshot_as_png())
    assert len(centres) == 24
    severe = [entry for entry in browser.get_log("browser") if entry["level"] == "SEVERE"]
    assert severe == []
