"""The review page in a real browser (Debian's Chromium, driven by Playwright, no browser download):
delete boundaries, add one, save, check review.json and the band count, reload, see the edits stay."""
import json
import os
import re
from pathlib import Path

import pytest

from bandgeo.review import read_review, serve

from test_review_support import make_folder

pytestmark = pytest.mark.browser
CHROMIUM = "/usr/bin/chromium"
ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update",
        "--disable-sync", "--no-first-run"]
SHOTS = os.environ.get("BANDGEO_REVIEW_SHOTS")  # a folder to keep screenshots in, for a human to look at


def _real_folder(tmp_path):
    """A small forward-model specimen (invented KRB-07) analysed by the real pipeline, or None if the
    pipeline is not installed. Ring-structured sampling keeps the mesh near 60 000 faces."""
    try:
        import numpy as np

        from bandgeo import pipeline, synth
        from bandgeo.segment import Segmentation  # noqa: F401  (the segmenter must be installed)
    except ImportError:
        return None
    params = synth.SynthParams(sampling="anisotropic", ring_vertices=40, rings_per_lamina=3.0, radius_mm=5.0,
                               days_per_year=60.0, years=3.0, mean_thickness_mm=0.2, seed=7)
    scan = tmp_path / "KRB-07.ply"
    synth.write_specimen(synth.simulate(params), scan)
    truth = json.loads((tmp_path / "KRB-07.truth.json").read_text(encoding="utf-8"))
    out = tmp_path / "KRB-07 result"
    pipeline.analyze(scan, out, up=np.asarray(truth["frames"]["paleo_up_file"], float),
                     units=truth.get("units", "mm"), report=False, n_sim=99)
    return out


def _rerun_without_report(folder):
    """The real re-run of measurement, series and periodicity; the report rendering (tested in the
    report's own tests) is left out to keep this file inside its time budget."""
    from bandgeo import pipeline

    return pipeline.rerun(folder, report=False)


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("browser")
    # BANDGEO_REVIEW_REAL=0 runs the page on the small fixture folder instead (quicker, for page work).
    if os.environ.get("BANDGEO_REVIEW_REAL", "1") == "1":
        real = _real_folder(tmp)
        print(f"review browser test on {'the analysed forward-model specimen' if real else 'the fixture folder'}")
        if real is not None:
            return real, None, _rerun_without_report
    path, seg, _ = make_folder(tmp / "KRB-12 fixture", n_bounds=14)
    return path, seg, lambda f: None


@pytest.fixture(scope="module")
def browser():
    if not Path(CHROMIUM).exists():
        pytest.skip(reason="Debian chromium is not installed (bash setup.sh installs it)")
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        yield b
        b.close()


def _shot(page, name):
    if SHOTS:
        Path(SHOTS).mkdir(parents=True, exist_ok=True)
        page.screenshot(path=str(Path(SHOTS) / name))


def test_delete_add_save_reload(folder, browser):
    from playwright.sync_api import expect

    path, seg, rerun = folder
    server = serve(path, open_browser=False, segmentation=seg, rerun=rerun)
    errors = []
    try:
        page = browser.new_page(viewport={"width": 1366, "height": 768})
        page.on("pageerror", lambda exc: errors.append(str(exc)))
        page.goto(server.url)
        page.wait_for_selector("body[data-ready='1']", timeout=30000)
        page.wait_for_selector("body[data-mesh='1']", timeout=60000)
        n0 = int(page.inner_text("#band-count"))
        state0 = server.app.state()
        assert n0 == state0["n_bands"] > 3
        _shot(page, "review-1-loaded.png")

        # Delete two boundaries with the keyboard: ArrowUp selects the lowest, X rejects it.
        page.focus("#surface")
        page.keyboard.press("ArrowUp")
        first = server.app.state()["boundaries"][0]["id"]
        page.keyboard.press("x")
        expect(page.locator("#band-count")).to_have_text(str(n0 - 1))
        page.keyboard.press("ArrowUp")
        page.keyboard.press("x")
        expect(page.locator("#band-count")).to_have_text(str(n0 - 2))

        # Add one by double-clicking the surface halfway up the thickest band in view.
        v0, v1 = map(float, page.get_attribute("#surface", "data-view").split(","))
        bands = [b for b in server.app.state()["bands"] if b["base_mm"] >= v0 and b["top_mm"] <= v1]
        widest = max(bands, key=lambda b: b["thickness_axis_mm"])
        target = 0.5 * (widest["base_mm"] + widest["top_mm"])
        box = page.locator("#surface").bounding_box()
        # the page's height scale: 8 px margin at the top, 22 px at the bottom (review.js, M)
        y = 8 + (v1 - target) / (v1 - v0) * (box["height"] - 8 - 22)
        page.mouse.dblclick(box["x"] + box["width"] / 2, box["y"] + y)
        expect(page.locator("#band-count")).to_have_text(str(n0 - 1))
        page.keyboard.press("Control+z")                      # undo the add, then redo it
        expect(page.locator("#band-count")).to_have_text(str(n0 - 2))
        page.keyboard.press("Control+y")
        expect(page.locator("#band-count")).to_have_text(str(n0 - 1))
        _shot(page, "review-2-edited.png")
        # The 3-D view drew the specimen: a good share of its pixels differ from the background.
        drawn = page.evaluate("""() => {
            const c = document.getElementById('view3d'), d = c.getContext('2d').getImageData(0, 0, c.width, c.height).data;
            let n = 0; for (let i = 0; i < d.length; i += 4) if (d[i] !== 0xfb || d[i + 1] !== 0xfb || d[i + 2] !== 0xfa) n++;
            return n / (c.width * c.height); }""")
        assert drawn > 0.03, drawn

        page.keyboard.press("Control+s")
        expect(page.locator("#status")).to_have_text(re.compile(r"^saved \d"), timeout=30000)
        server.app.wait(300)
        review = read_review(path)
        ops = [e["op"] for e in review["edits"]]
        assert ops == ["reject", "reject", "add"]
        assert review["edits"][0]["id"] == first
        added = review["edits"][2]
        assert widest["base_mm"] < added["height_mm"] < widest["top_mm"]
        assert review["history"][-1]["edits_after"] == 3
        if rerun is _rerun_without_report:  # the real pipeline re-ran: its counts follow the edits
            expect(page.locator("#status")).to_contain_text("analysis updated", timeout=120000)
            assert server.app.status["state"] == "done", server.app.status
            result = json.loads((path / "result.json").read_text(encoding="utf-8"))
            n_auto = len(state0["boundaries"])
            assert result["bands"]["boundaries"] == n_auto - 1          # two removed, one added
            assert result["bands"]["count"] == n0 - 1
            assert result["review"]["n_edits"] == 3
            assert page.inner_text("#band-count") == str(n0 - 1)

        page.reload()
        page.wait_for_selector("body[data-ready='1']", timeout=30000)
        assert int(page.inner_text("#band-count")) == n0 - 1
        page.click("[data-tab='edits-tab']")
        assert page.locator("#edits li").count() == 3
        _shot(page, "review-3-reloaded.png")
        assert not errors, errors
    finally:
        server.stop()


def test_fresh_server_shows_saved_edits(folder, browser):
    from playwright.sync_api import expect

    path, seg, rerun = folder
    if read_review(path) is None:
        pytest.skip(reason="runs after test_delete_add_save_reload")
    server = serve(path, open_browser=False, segmentation=seg, rerun=rerun)
    try:
        page = browser.new_page(viewport={"width": 1366, "height": 768})
        page.goto(server.url)
        page.wait_for_selector("body[data-ready='1']", timeout=30000)
        assert page.inner_text("#band-count") == str(server.app.state()["n_bands"])
        assert page.inner_text("#status").startswith("saved ")
        # The token left the address bar after the first load; the cookie carries it.
        assert "token=" not in page.url
        page.reload()
        page.wait_for_selector("body[data-ready='1']", timeout=30000)

        # Drag a boundary line down by 12 px: one move edit, to a lower height.
        n_edits = len(server.app.session.edits)
        v0, v1 = map(float, page.get_attribute("#surface", "data-view").split(","))
        box = page.locator("#surface").bounding_box()
        scale = (box["height"] - 8 - 22) / (v1 - v0)                       # px per mm (review.js margins)
        inside = [b for b in server.app.state()["boundaries"]
                  if b["status"] == "auto" and v0 + 0.2 * (v1 - v0) < b["height_mm"] < v1 - 0.2 * (v1 - v0)]
        target = inside[len(inside) // 2]
        x = box["x"] + 50 + 0.5 * (box["width"] - 50 - 8)                 # azimuth 180 degrees
        y = box["y"] + 8 + (v1 - target["height_mm"] - target["trace_mm"][36]) * scale
        page.mouse.move(x, y)
        page.mouse.down()
        page.mouse.move(x, y + 6)
        page.mouse.move(x, y + 12)
        page.mouse.up()
        expect(page.locator("#edits li")).to_have_count(n_edits + 1)
        move = server.app.session.edits[-1]
        assert move["op"] == "move" and move["id"] == target["id"]
        assert move["height_mm"] == pytest.approx(target["height_mm"] - 12 / scale, abs=2 / scale)
        # Shift+Up three times nudges it back up; key presses on the boundary just moved fold into that
        # move, so it stays one edit to undo.
        for _ in range(3):
            page.keyboard.press("Shift+ArrowUp")
        for _ in range(50):                                   # the page sends them one after another
            nudged = server.app.session.edits[-1]
            if nudged["height_mm"] > move["height_mm"] + 2 / scale:
                break
            page.wait_for_timeout(100)
        expect(page.locator("#edits li")).to_have_count(n_edits + 1)
        assert nudged["op"] == "move" and nudged["id"] == target["id"]
        assert nudged["height_mm"] > move["height_mm"]
        page.keyboard.press("Control+z")
        expect(page.locator("#edits li")).to_have_count(n_edits)
        _shot(page, "review-4-moved.png")
    finally:
        server.stop()
