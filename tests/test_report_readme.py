"""The README's example run, repeated for real: 'bandgeo analyze' on the bundled KRB-07 sample must
print what the README shows, and its report is what the screenshots in docs/img show.

Set BANDGEO_UPDATE_DOCS=1 to rewrite docs/img/report-*.png from this run (headless Debian Chromium for
the page, pdftoppm for the first PDF page); otherwise the screenshots go to a temporary folder and are
only checked for content. This file runs one whole analysis (about a minute on two cores).
"""
from __future__ import annotations

import os
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

ROOT = Path(__file__).resolve().parents[1]
COMMAND = ("bandgeo analyze sample_meshes/KRB-07_annual.ply --sheet sample_meshes/KRB-07.sheet.toml "
           "--out demo-output/KRB-07")
CHROMIUM = "/usr/bin/chromium"


def _readme_block() -> list[str]:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    start = text.index(f"$ {COMMAND}")
    block = text[start:text.index("```", start)]
    return [line.rstrip() for line in block.splitlines()[1:] if line.strip()]


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    root = tmp_path_factory.mktemp("readme run")
    out = root / "demo-output" / "KRB-07"
    args = COMMAND.split()[2:]
    args = [str(ROOT / a) if a.startswith("sample_meshes/") else a for a in args]
    args[args.index("--out") + 1] = str(out)
    env = dict(os.environ, OMP_NUM_THREADS=os.environ.get("OMP_NUM_THREADS", "2"))
    proc = subprocess.run([sys.executable, "-m", "bandgeo.cli", "analyze", *args], capture_output=True, text=True,
                          cwd=root, env=env)
    assert proc.returncode == 0, proc.stderr
    lines = [line.rstrip().replace(str(out), "demo-output/KRB-07") for line in proc.stdout.splitlines() if line.strip()]
    return out, lines


_NUMBER = re.compile(r"[-+]?\d[\d,]*\.?\d*(?:[eE][-+]?\d+)?")


def _same_line(fresh: str, shown: str) -> bool:
    """The words must match exactly; the numbers within 1% (another machine's floating point may differ
    in the last digits, and a rounded figure may then round the other way), and small counts (of flagged
    boundaries, say) within 1 more: one marginal boundary may fall the other side of a threshold."""
    if _NUMBER.split(fresh) != _NUMBER.split(shown):
        return False
    for a, b in zip(_NUMBER.findall(fresh), _NUMBER.findall(shown)):
        x, y = float(a.replace(",", "")), float(b.replace(",", ""))
        whole = "." not in a and "." not in b
        if abs(x - y) > 0.01 * max(abs(x), abs(y)) + (1.01 if whole else 0.011):
            return False
    return True


def test_readme_example_output_matches_a_real_run(run):
    _, lines = run
    expected = _readme_block()
    fresh = "\n".join([f"$ {COMMAND}"] + lines)
    same = len(lines) == len(expected) and all(_same_line(a, b) for a, b in zip(lines, expected))
    assert same, ("README.md's example output is stale; a fresh run prints:\n" + fresh)


def _shots_folder(tmp_path) -> Path:
    if os.environ.get("BANDGEO_UPDATE_DOCS") == "1":
        return ROOT / "docs" / "img"
    return tmp_path


@pytest.mark.browser
def test_report_screenshots(run, tmp_path):
    from PIL import Image
    from playwright.sync_api import sync_playwright

    out, _ = run
    shots = _shots_folder(tmp_path)
    shots.mkdir(parents=True, exist_ok=True)
    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, headless=True,
                                     args=["--no-sandbox", "--disable-gpu", "--no-first-run"])
        try:
            page = browser.new_page(viewport={"width": 1100, "height": 1300})
            page.goto((out / "report.html").as_uri(), wait_until="load")
            page.screenshot(path=str(shots / "report-summary.png"))
            for fid, name in (("specimen", "report-specimen.png"), ("tilt", "report-tilt.png"),
                              ("spectra", "report-spectra.png")):
                el = page.query_selector(f"#fig-{fid}")
                assert el is not None, fid
                el.screenshot(path=str(shots / name))
        finally:
            browser.close()
    subprocess.run(["pdftoppm", "-r", "60", "-png", "-f", "1", "-l", "1", "-singlefile", str(out / "report.pdf"),
                    str(shots / "report-pdf-page1")], check=True)
    for name in ("report-summary.png", "report-specimen.png", "report-tilt.png", "report-spectra.png",
                 "report-pdf-page1.png"):
        pixels = np.asarray(Image.open(shots / name).convert("L"), float)
        assert pixels.std() > 10.0, name                       # a blank image has no variance
    html = (out / "report.html").read_text(encoding="utf-8")
    assert re.search(r'class="big"[^>]*>\d', html)             # a number in the headline
    assert "Heliotropic tilt" in html and "sway-plane azimuth" in html
