"""report.html in a real browser: headless Debian Chromium, network off, DOM content and a screenshot."""
from __future__ import annotations

import numpy as np
import pytest

from bandgeo.report import write_report
from test_report_fixtures import make_state

pytestmark = pytest.mark.browser

CHROMIUM = "/usr/bin/chromium"
ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update",
        "--disable-sync", "--no-first-run", "--disable-extensions"]


def _open(html_path, screenshot_path):
    """Open the report offline; return (DOM facts, non-file requests attempted, screenshot pixels)."""
    from PIL import Image
    from playwright.sync_api import sync_playwright

    attempted = []
    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, headless=True, args=ARGS)
        try:
            context = browser.new_context(viewport={"width": 1100, "height": 900}, offline=True)

            def guard(route):
                url = route.request.url
                if url.startswith("file:") or url.startswith("data:"):
                    route.continue_()
                else:                                   # the network is off: record and refuse
                    attempted.append(url)
                    route.abort()

            context.route("**/*", guard)
            page = context.new_page()
            page.goto(html_path.as_uri(), wait_until="load")
            facts = page.evaluate("""() => ({
                id: document.querySelector('#specimen-id').textContent.trim(),
                headline: document.querySelector('#days-per-year').innerText,
                warnings: Array.from(document.querySelectorAll('#warnings li')).map(li => li.innerText),
                images: Array.from(document.images).map(i => [i.complete, i.naturalWidth, i.naturalHeight]),
                keyResults: document.querySelector('#key-results').innerText,
                cautions: document.querySelector('#cautions').innerText,
                provenance: document.querySelector('#provenance').innerText,
            })""")
            page.screenshot(path=str(screenshot_path), full_page=True)
        finally:
            browser.close()
    pixels = np.asarray(Image.open(screenshot_path).convert("L"), float)
    return facts, attempted, pixels


@pytest.fixture(scope="module")
def significant(tmp_path_factory):
    folder = tmp_path_factory.mktemp("browser sig")
    state = make_state(folder, n_rows=160, n_cols=60)
    paths = write_report(state, formats=("html",))
    return state, _open(paths["report.html"], folder / "shot.png")


def test_key_content_in_the_dom(significant):
    state, (facts, _, _) = significant
    assert facts["id"] == "KRB-07"
    dpy = state.result["days_per_year"]
    # the estimate, its 95 % interval and its unit, as the fixture states them (400, 391-411)
    assert f"{dpy['estimate']:g}" in facts["headline"]
    assert f"{dpy['ci95'][0]:g}–{dpy['ci95'][1]:g}" in facts["headline"]
    assert "solar days per year" in facts["headline"] and "95 % interval" in facts["headline"]
    assert "Length of day" in facts["headline"] and " h" in facts["headline"]
    expected = state.result["warnings"] + state.specimen.warnings + state.segmentation.warnings
    for w in expected:
        assert any(w in shown for shown in facts["warnings"]), w
    assert any("fracture" in shown for shown in facts["warnings"])      # the flagged stretch
    assert "Pannella" in facts["cautions"] and "Williams" in facts["cautions"]
    assert state.result["provenance"]["input_sha256"] in facts["provenance"]


def test_every_figure_decodes_offline(significant):
    _, (facts, attempted, _) = significant
    assert attempted == []                          # nothing outside the file was requested
    assert len(facts["images"]) >= 6
    assert all(done and w > 100 and h > 50 for done, w, h in facts["images"])


def test_screenshot_is_not_blank(significant):
    _, (_, _, pixels) = significant
    assert pixels.shape[0] > 2000                   # a long page: figures and tables laid out
    assert pixels.std() > 10.0                      # a blank page has zero variance
    # figures draw dark ink as well as background: both ends of the grey scale are present
    assert (pixels < 60).mean() > 0.001 and (pixels > 240).mean() > 0.3


def test_not_significant_report_in_the_browser(tmp_path):
    state = make_state(tmp_path, significant=False, n_rows=120, n_cols=40)
    paths = write_report(state, formats=("html",))
    facts, attempted, pixels = _open(paths["report.html"], tmp_path / "shot.png")
    assert attempted == [] and pixels.std() > 10.0
    assert "No significant annual cycle" in facts["headline"]
    assert "solar days per year" not in facts["headline"]
    assert "days per year (combined)" not in facts["keyResults"]
    assert any("no significant annual cycle" in w.lower() for w in facts["warnings"])
