"""The report of a 200-group pilot in headless Chromium: every figure renders, nothing loads from outside."""

from __future__ import annotations

from pathlib import Path

import pytest
from _analysis_exports import pilot_export

from analysis.report import write_report

CHROMIUM = "/usr/bin/chromium"
ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
        "--disable-background-networking", "--disable-component-update", "--disable-sync"]


@pytest.mark.browser
def test_report_of_200_group_pilot_renders_every_figure_offline(tmp_path):
    if not Path(CHROMIUM).is_file():
        pytest.fail(f"Debian's chromium is missing at {CHROMIUM}: install it with 'apt-get install chromium'")
    from playwright.sync_api import sync_playwright

    folder = pilot_export("between-groups.toml", 200, 1, "conditional")
    report = write_report(folder, tmp_path / "report.html")
    address = report.html.resolve().as_uri()
    requests = []
    with sync_playwright() as playwright:
        browser = playwright.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        try:
            page = browser.new_page(viewport={"width": 1280, "height": 900})
            page.on("request", lambda request: requests.append(request.url))
            page.goto(address, wait_until="load")
            figures = page.locator("img, svg")
            count = figures.count()
            sizes = [figures.nth(i).bounding_box() for i in range(count)]
            complete = page.evaluate(
                "Array.from(document.images).every(i => i.complete && i.naturalWidth > 0)"
            )
        finally:
            browser.close()
    assert count == 3  # harvest box plots, stock paths, survival curves
    assert all(box is not None and box["width"] > 0 and box["height"] > 0 for box in sizes)
    assert complete
    # data: URIs of embedded figures are not network requests; anything else would be.
    assert [u for u in requests if not u.startswith("data:")] == [address]
