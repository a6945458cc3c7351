"""The report in headless Chromium: every figure renders, nothing loads from outside, no table is cut off."""

from __future__ import annotations

import tempfile
from pathlib import Path

import pytest
from _analysis_exports import pilot_export

from ebbtide.analysis.report import write_report

# Screenshots to look at after a run (outside the checkout).
SCREENSHOTS = Path(tempfile.gettempdir()) / "ebbtide-report-screenshots"
# A4 is 210 mm wide; the report's @page margin is 12 mm a side, leaving 186 mm of
# printable width = 703 CSS pixels at the CSS reference of 96 px per inch (CSS Values 4).
A4_PRINTABLE = {"width": 703, "height": 1000}

# Every table's right edge inside the page, and no table wider than the box it sits in.
CUT_OFF_TABLES = """() => {
  const page = document.documentElement.clientWidth;
  return Array.from(document.querySelectorAll('table')).filter(t => {
    const box = t.getBoundingClientRect();
    const holder = t.parentElement;
    return box.right > page + 0.5 || box.left < -0.5 || holder.scrollWidth > holder.clientWidth + 0.5;
  }).map(t => (t.caption ? t.caption.textContent : '') + ' '
             + t.querySelector('tr').textContent.slice(0, 60)).concat(
    Array.from(document.querySelectorAll('pre')).filter(p => p.scrollWidth > p.clientWidth + 0.5)
      .map(p => 'design text ' + p.textContent.slice(0, 40)));
}"""


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


@pytest.mark.browser
@pytest.mark.parametrize("study", ["between-groups.toml", "within-subject.toml"])
def test_no_table_is_cut_off_at_1280_px_or_on_an_a4_page(tmp_path, browser, study):
    folder = pilot_export(study, 24, 2, "conditional")
    address = write_report(folder, tmp_path / "report.html").html.resolve().as_uri()
    SCREENSHOTS.mkdir(parents=True, exist_ok=True)
    for name, viewport, media in (("1280", {"width": 1280, "height": 900}, "screen"),
                                  ("a4-print", A4_PRINTABLE, "print")):
        context = browser.new_context(viewport=viewport)
        try:
            page = context.new_page()
            page.emulate_media(media=media)
            page.goto(address, wait_until="load")
            cut = page.evaluate(CUT_OFF_TABLES)
            tables = page.locator("table").count()
            page.screenshot(path=str(SCREENSHOTS / f"{Path(study).stem}-{name}.png"), full_page=True)
            if media == "print":
                assert page.pdf(format="A4").startswith(b"%PDF")
        finally:
            context.close()
        assert tables >= 6
        assert cut == [], f"{study} at {name}: tables wider than the page: {cut}"
