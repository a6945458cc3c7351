"""The report of a 200-group pilot in headless Chromium: every figure renders, nothing loads from outside."""

from __future__ import annotations

import pytest
from _analysis_exports import pilot_export

from ebbtide.analysis.report import write_report


@pytest.mark.browser
def test_report_of_200_group_pilot_renders_every_figure_offline(tmp_path, browser):
    # ``browser`` is the session's one Playwright Chromium (tests/conftest.py): a second
    # sync Playwright in the same process would clash with its event loop.
    folder = pilot_export("between-groups.toml", 200, 1, "conditional")
    report = write_report(folder, tmp_path / "report.html")
    address = report.html.resolve().as_uri()
    requests = []
    context = browser.new_context(viewport={"width": 1280, "height": 900})
    try:
        page = context.new_page()
        page.on("request", lambda request: requests.append(request.url))
        page.goto(address, wait_until="load")
        figures = page.locator("img, svg")
        count = figures.count()
        sizes = [figures.nth(i).bounding_box() for i in range(count)]
        complete = page.evaluate(
            "Array.from(document.images).every(i => i.complete && i.naturalWidth > 0)"
        )
    finally:
        context.close()
    assert count == 4  # harvest box plots, round means, stock paths, survival curves
    assert all(box is not None and box["width"] > 0 and box["height"] > 0 for box in sizes)
    assert complete
    # data: URIs of embedded figures are not network requests; anything else would be.
    assert [u for u in requests if not u.startswith("data:")] == [address]
