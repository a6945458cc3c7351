"""The design preview (ebbtide preview --html) in headless Chromium: every figure drawn, nothing fetched."""

from __future__ import annotations

import tomllib
from pathlib import Path

import pytest
from click.testing import CliRunner
from conftest import ARTIFACTS

from ebbtide.server.cli import main

ROOT = Path(__file__).parent.parent
BETWEEN = ROOT / "examples" / "between-groups.toml"


@pytest.mark.browser
def test_design_preview_draws_every_figure_and_one_phone_per_treatment_offline(tmp_path, browser):
    page_file = tmp_path / "preview.html"
    result = CliRunner().invoke(main, ["preview", str(BETWEEN), "--sessions", "20", "--power-sims", "10",
                                       "--html", str(page_file)])
    assert result.exit_code == 0, result.output
    # The treatments and threshold as the study file states them (read with tomllib, not the project).
    design = tomllib.loads(BETWEEN.read_text())
    treatments = design["blocks"][0]["treatments"]
    requests = []
    context = browser.new_context(viewport={"width": 1280, "height": 800})
    try:
        page = context.new_page()
        page.on("request", lambda request: requests.append(request.url))
        page.goto(page_file.resolve().as_uri(), wait_until="load")
        titles = page.locator("section.figure h2").all_inner_texts()
        drawn = page.evaluate("Array.from(document.images).map(i => i.complete && i.naturalWidth > 0)")
        phones = page.locator("figure.phone")
        shown = [phones.nth(i).get_attribute("data-treatment") for i in range(phones.count())]
        gauges = [phones.nth(i).locator("svg").bounding_box() for i in range(phones.count())]
        exact_words = page.locator("figure.phone[data-treatment=exact] svg").text_content()
        ARTIFACTS.mkdir(exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / "design-preview-1280x800.png"))
    finally:
        context.close()
    assert titles == ["Regrowth, danger band and recovery level",
                      "Stock paths of simulated groups under each model", "Power by simulation"]
    assert drawn == [True, True, True]
    assert shown == treatments
    assert all(box and box["width"] > 150 and box["height"] > 80 for box in gauges)
    assert f"{design['threshold']['value']:g}" in exact_words  # the exact treatment tells the danger level
    assert requests == [page_file.resolve().as_uri()]  # the page itself, nothing else
