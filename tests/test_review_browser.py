"""The review page in a real browser (Debian's Chromium, driven by Playwright, no browser download), on a
forward-model specimen with more than a thousand boundaries analysed by the real pipeline: jump to the
next low-confidence boundary, confirm it, confirm a stretch in one action, move one boundary, sort by
confidence, save, and see the refreshed result. A second test checks that a review file from another
scan is shown as such and can be set aside.

BANDGEO_REVIEW_SHOTS=docs/img keeps the screenshots (docs/img/review-*.png are made this way)."""
import csv
import json
import os
import re
from pathlib import Path

import numpy as np
import pytest

from bandgeo.review import read_review, serve

from test_review_support import make_folder, make_long_folder

pytestmark = pytest.mark.browser
CHROMIUM = "/usr/bin/chromium"
ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
        "--disable-component-update", "--disable-sync", "--no-first-run"]
SHOTS = os.environ.get("BANDGEO_REVIEW_SHOTS")
# The strip's margins in CSS pixels (review.js, M): the tests turn heights into pointer positions.
LEFT, RIGHT, TOP = 70, 14, 8


@pytest.fixture(scope="module")
def long_record(tmp_path_factory):
    """An invented Karrabin Formation column (KRB-41) of 1100 bands with an annual thickness cycle,
    oriented by the real scan stage and analysed by the real measurement and periodicity stages; its
    segmentation is built directly (test_review_support.make_long_folder) so that the page is tested
    at scale in seconds."""
    return make_long_folder(tmp_path_factory.mktemp("long") / "KRB-41 result", n_bands=1100)


def _rerun():
    """The server's own re-run after a save (the pipeline's in-memory re-runner: measurement, series,
    periodicity), without the report, which the report's own tests cover, to keep this file inside its
    time budget."""
    from bandgeo.review.app import PipelineRerun

    return PipelineRerun(report=False)


@pytest.fixture(scope="module")
def browser():
    if not Path(CHROMIUM).exists():
        pytest.skip(reason="Debian chromium is not installed (bash setup.sh installs it)")
    from playwright.sync_api import expect, sync_playwright

    # A loaded 2-core CI machine may take more than Playwright's default 5 s to re-draw after a
    # request; waiting longer changes no outcome, only how long a real failure takes to show.
    expect.set_options(timeout=30_000)
    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        yield b
        b.close()


def _shot(page, name):
    if SHOTS:
        Path(SHOTS).mkdir(parents=True, exist_ok=True)
        page.screenshot(path=str(Path(SHOTS) / name))


def _view(page):
    return tuple(map(float, page.get_attribute("#strip", "data-view").split(",")))


def _selected(page, server):
    """The id of the selected boundary (the table's highlighted row), or None."""
    row = page.locator("#blist tr.sel")
    return int(row.get_attribute("data-id")) if row.count() else None


def _x_of(page, h):
    v0, v1 = _view(page)
    box = page.locator("#strip").bounding_box()
    return box["x"] + LEFT + (h - v0) / (v1 - v0) * (box["width"] - LEFT - RIGHT), box


def test_thousand_boundary_workflow(long_record, browser):
    from playwright.sync_api import expect

    server = serve(long_record, open_browser=False, rerun=_rerun())
    errors = []
    try:
        page = browser.new_page(viewport={"width": 1440, "height": 900})
        page.on("pageerror", lambda exc: errors.append(str(exc)))
        page.goto(server.url)
        page.wait_for_selector("body[data-ready='1']", timeout=60000)
        page.wait_for_selector("body[data-mesh='1']", timeout=60000)
        state = server.app.state()
        n_bands = state["n_bands"]
        assert n_bands >= 1000, n_bands
        assert int(page.inner_text("#band-count")) == n_bands
        by_id = {b["id"]: b for b in state["boundaries"]}

        # The whole column stays readable: far fewer lines than boundaries are drawn.
        page.focus("#strip")
        page.keyboard.press("Home")
        inview, drawn = (int(page.get_attribute("#strip", a)) for a in ("data-inview", "data-drawn"))
        assert inview > 1000 and drawn < inview / 10
        _shot(page, "review-whole-column.png")

        # Next low-confidence boundary: it is low, unconfirmed, and in view; the list follows the view.
        page.keyboard.press("PageDown")
        first = _selected(page, server)
        b = by_id[first]
        assert b["confidence"] < float(page.input_value("#threshold")) and b["status"] == "auto"
        v0, v1 = _view(page)
        assert v0 <= b["height_mm"] <= v1 and (v1 - v0) < 0.1 * (state["span_mm"][1] - state["span_mm"][0])
        listed = [by_id[int(i)]["height_mm"] for i in page.locator("#blist tbody tr").evaluate_all(
            "rows => rows.map(r => r.dataset.id)")]
        assert listed and all(v0 <= h <= v1 for h in listed)
        # The 3-D view turned to the region being edited.
        page.wait_for_function(f"() => Math.abs(+document.getElementById('view3d').dataset.focus - {b['height_mm']}) < 1e-6")
        # No label is cut off: nothing in the header, toolbar or list headings overflows its box.
        clipped = page.evaluate("""() => [...document.querySelectorAll(
            'header *, .toolbar *, #blist th, .legend span, footer span, .box h3, .box .facts')]
            .filter(e => e.offsetParent !== null && e.scrollWidth > e.clientWidth + 1 && e.clientWidth > 0)
            .map(e => e.id || e.className || e.textContent.slice(0, 30))""")
        assert clipped == [], clipped
        # The next one starts from the selection, not from the base.
        page.keyboard.press("PageDown")
        second = _selected(page, server)
        assert by_id[second]["height_mm"] > b["height_mm"]
        lows = sorted(x["height_mm"] for x in state["boundaries"]
                      if x["confidence"] is not None and x["confidence"] < 0.6 and x["status"] == "auto")
        assert by_id[second]["height_mm"] == next(h for h in lows if h > b["height_mm"])
        _shot(page, "review-triage.png")

        # Enter confirms the selected boundary and goes on to the next low one.
        page.keyboard.press("Enter")
        expect(page.locator("#edits li")).to_have_count(1)
        assert server.app.session.edits[-1] == {**server.app.session.edits[-1], "op": "accept", "id": second}
        page.wait_for_function(f"() => document.querySelector('#blist tr.sel')?.dataset.id !== '{second}'")

        # Confirm every boundary in the visible stretch in one action.
        v0, v1 = _view(page)
        page.click("#confirm-view")
        expect(page.locator("#edits li")).to_have_count(2)
        stretch = server.app.session.edits[-1]
        assert stretch["op"] == "accept_stretch"
        now = server.app.state()["boundaries"]
        in_view = [x for x in now if v0 <= x["height_mm"] <= v1 and x["auto"]]
        assert in_view and all(x["status"] == "accepted" for x in in_view)
        assert sum(x["status"] == "accepted" for x in now) == len(in_view) + (
            0 if v0 <= by_id[second]["height_mm"] <= v1 else 1)

        # Move one boundary: drag its line 15 px up the column.
        target = sorted(in_view, key=lambda x: x["height_mm"])[len(in_view) // 2]
        x, box = _x_of(page, target["height_mm"])
        y = box["y"] + TOP + 60
        mm_per_px = (v1 - v0) / (box["width"] - LEFT - RIGHT)
        page.mouse.move(x, y)
        page.mouse.down()
        page.mouse.move(x + 8, y)
        page.mouse.move(x + 15, y)
        page.mouse.up()
        expect(page.locator("#edits li")).to_have_count(3)
        move = server.app.session.edits[-1]
        assert move["op"] == "move" and move["id"] == target["id"]
        assert move["height_mm"] == pytest.approx(target["height_mm"] + 15 * mm_per_px, abs=3 * mm_per_px)

        # Sort the list by confidence over the whole column: lowest first.
        page.check("input[name=listmode][value=all]")
        page.click("#blist th[data-key=confidence]")
        shown = page.locator("#blist tbody tr td:nth-child(4)").all_inner_texts()[:20]
        numbers = [float(t) for t in shown if re.fullmatch(r"[0-9.]+", t)]
        assert numbers == sorted(numbers) and numbers[0] == pytest.approx(
            min(x["confidence"] for x in server.app.state()["boundaries"] if x["confidence"] is not None), abs=0.006)

        # The command palette runs the same commands by name.
        page.keyboard.press("Control+k")
        page.fill("#palette-input", "next low")
        before = _selected(page, server)
        page.keyboard.press("Enter")
        page.wait_for_function(f"() => document.querySelector('#blist tr.sel')?.dataset.id !== '{before}'")

        # Save: the analysis is refreshed in the background and the page shows the new result.
        page.keyboard.press("Control+s")
        expect(page.locator("body")).to_have_attribute("data-rerun", "done", timeout=120000)
        status = server.app.rerun_status()
        assert status["state"] == "done", status
        print(f"re-run after save: {status['seconds']} s for {n_bands} bands")
        result = json.loads((long_record / "result.json").read_text(encoding="utf-8"))
        review = read_review(long_record)
        assert result["review"]["n_edits"] == len(review["edits"]) == 3
        assert review["basis"]["segmentation_id"] == server.app.data.basis["segmentation_id"]
        expect(page.locator("#estimate")).to_have_attribute("data-bands", str(result["bands"]["count"]))
        expect(page.locator("#status")).to_contain_text("analysis updated")

        # One numbering everywhere: band k of bands.csv starts at the boundary the page calls band k.
        with open(long_record / "bands.csv", newline="", encoding="utf-8") as fh:
            rows = list(csv.DictReader(line for line in fh if not line.startswith("#")))
        base_col = next(k for k in rows[0] if k.startswith("base"))
        page_rows = {b["band"]: b["height_mm"] for b in server.app.state()["boundaries"] if b["band"] is not None}
        first_index = int(rows[0][next(k for k in rows[0] if k.startswith("band_index"))])
        assert first_index == 0 and min(page_rows) == 0
        for row in rows[:5] + rows[-5:]:
            k = int(row[next(c for c in row if c.startswith("band_index"))])
            assert float(row[base_col]) == pytest.approx(page_rows[k], abs=1e-3)
        page.click("[data-tab='edits-tab']")
        _shot(page, "review-saved.png")
        assert not errors, errors
    finally:
        server.stop()


def test_a_review_of_another_scan_is_named_and_set_aside(tmp_path, browser):
    from playwright.sync_api import expect

    folder, seg, _ = make_folder(tmp_path / "KRB-12 result", n_bounds=14)
    foreign = {"schema": "bandgeo.review/1", "specimen_id": "KRB-31", "scan_sha256": "ab" * 32,
               "edits": [{"op": "reject", "id": 3}], "history": []}
    (folder / "review.json").write_text(json.dumps(foreign), encoding="utf-8")
    server = serve(folder, open_browser=False, segmentation=seg, rerun=lambda f: None)
    try:
        page = browser.new_page(viewport={"width": 1440, "height": 900})
        page.goto(server.url)
        page.wait_for_selector("body[data-ready='1']", timeout=30000)
        expect(page.locator("#apart")).to_be_visible()
        expect(page.locator("#apart-text")).to_contain_text("KRB-31")
        expect(page.locator("#apart-text")).to_contain_text("abababababab")
        assert int(page.inner_text("#band-count")) == 13            # the foreign edit is not applied
        _shot(page, "review-set-aside.png")
        page.click("#apart-button")
        expect(page.locator("#apart")).to_be_hidden()
        assert not (folder / "review.json").exists()
        kept = list(folder.glob("review.set-aside-*.json"))
        assert len(kept) == 1 and json.loads(kept[0].read_text(encoding="utf-8")) == foreign
        # Now an edit can be made and saved; the reload after keeps it (the token stays in the tab).
        page.focus("#strip")
        page.keyboard.press("ArrowRight")
        page.keyboard.press("Delete")
        expect(page.locator("#band-count")).to_have_text("12")
        page.keyboard.press("Control+s")
        expect(page.locator("#status")).to_contain_text("saved", timeout=30000)
        page.reload()
        page.wait_for_selector("body[data-ready='1']", timeout=30000)
        assert page.inner_text("#band-count") == "12" and "token=" not in page.url
        assert read_review(folder)["edits"][0]["op"] == "reject"
    finally:
        server.stop()
