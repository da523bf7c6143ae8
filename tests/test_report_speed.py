"""The report's speed measures keep its content: the PDF typeset in a forked helper is the same document
as one typeset in-process, a helper that fails or hangs falls back on in-process typesetting, log axes
carry plain-text labels, the specimen figure reads the cached unroll, and the seconds split is reported.
(No timing assertions: speed lives in benchmarks/bench_report.py.)"""
from __future__ import annotations

import os
import re
import subprocess
import time

import numpy as np
import pytest

from bandgeo.report import typeset
from bandgeo.report.build import build_report
from bandgeo.report.figures import log_label
from test_report_fixtures import make_state

SMALL = dict(n_rows=120, n_cols=48)       # ~11 k faces

needs_fork = pytest.mark.skipif(not (hasattr(os, "fork") and __import__("sys").platform.startswith("linux")),
                                reason="the PDF helper needs Linux fork")


def _text(path):
    out = subprocess.run(["pdftotext", "-layout", str(path), "-"], capture_output=True, text=True, check=True).stdout
    # the stage-time row and the build time differ between two runs; everything else must not
    return [ln for ln in out.splitlines() if not re.search(r"report|Written by| s\b", ln)]


def _pages(path):
    info = subprocess.run(["pdfinfo", str(path)], capture_output=True, text=True, check=True).stdout
    return int(re.search(r"Pages:\s+(\d+)", info).group(1))


@pytest.fixture(autouse=True)
def _helpers_on(monkeypatch):
    """Helpers forced on (by default they are skipped on a busy machine, which a test machine may be)."""
    monkeypatch.setenv("BANDGEO_REPORT_FORK", "1")


@pytest.fixture(scope="module")
def state(tmp_path_factory):
    return make_state(tmp_path_factory.mktemp("speed"), **SMALL)


def test_log_labels_are_plain_text_with_unicode_superscripts():
    # Code points from the Unicode standard, block "Superscripts and Subscripts" (U+2070-U+209F) and
    # Latin-1 (U+00B2, U+00B3, U+00B9); no mathtext dollar signs.
    assert log_label(1e-5) == "10\u207b\u2075"
    assert log_label(1e4) == "10\u2074"
    assert log_label(1e-12) == "10\u207b\u00b9\u00b2"
    assert log_label(0.01) == "0.01" and log_label(100.0) == "100" and log_label(1.0) == "1"
    assert log_label(0.25) == "0.25"
    assert log_label(2e-5) == "2\u00d710\u207b\u2075"
    assert log_label(0.0) == "" and log_label(-1.0) == "" and log_label(float("nan")) == ""
    assert not any("$" in log_label(10.0 ** k) for k in range(-15, 16))


def test_spectrum_figures_draw_no_mathtext(state):
    from matplotlib.backends.backend_svg import FigureCanvasSVG

    from bandgeo.report.build import figure_specs, tilt_summary
    import io

    specs, _ = figure_specs(state, tilt_summary(state))
    for f in specs:
        if f["id"] in ("spectra", "sliding"):
            fig = f["build"]()
            buf = io.StringIO()
            FigureCanvasSVG(fig).print_svg(buf)
            labels = [t.get_text() for ax in fig.axes for t in ax.get_xticklabels() + ax.get_yticklabels()]
            assert labels and not [t for t in labels if "$" in t]


@needs_fork
def test_helper_pdf_is_the_in_process_pdf(state, tmp_path, monkeypatch):
    import psutil

    before = {c.pid for c in psutil.Process().children()}  # children other tests left (workers, servers)
    a, b = tmp_path / "helper", tmp_path / "inline"
    a.mkdir(), b.mkdir()
    paths_a, sec_a = build_report(state, a, formats=("html", "pdf"))
    monkeypatch.setenv("BANDGEO_REPORT_FORK", "0")
    paths_b, sec_b = build_report(state, b, formats=("html", "pdf"))
    assert sec_a["pdf_parallel"] == 1.0 and sec_b["pdf_parallel"] == 0.0
    assert sec_a["figures_parallel"] == 1.0 and "figures_parallel" not in sec_b
    # the plots drawn in the helper are the very SVGs drawn in-process (fixed hash salt)
    figs = [re.findall(r'src="(data:image/[^"]+)"', p["report.html"].read_text()) for p in (paths_a, paths_b)]
    assert len(figs[0]) >= 3 and figs[0] == figs[1]
    assert _pages(paths_a["report.pdf"]) == _pages(paths_b["report.pdf"])
    assert _text(paths_a["report.pdf"]) == _text(paths_b["report.pdf"])
    for key in ("figures", "html", "pdf", "pdf_wait", "total"):
        assert sec_a[key] >= 0.0
    # the helpers are gone: no child of ours, running or zombie, is left behind (common practice: reap
    # every forked child); children that earlier tests started are not this test's business
    left = {c.pid for c in psutil.Process().children()} - before
    assert not left, left


@needs_fork
def test_failing_helper_falls_back_in_process(state, tmp_path, monkeypatch):
    def boom(*_a, **_k):
        raise RuntimeError("helper broken on purpose")

    monkeypatch.setattr(typeset, "_child", boom)
    paths, seconds = build_report(state, tmp_path, formats=("pdf",))
    assert seconds["pdf_parallel"] == 0.0
    assert paths["report.pdf"].read_bytes()[:5] == b"%PDF-" and _pages(paths["report.pdf"]) >= 3
    assert not [p.name for p in tmp_path.iterdir() if p.name.startswith(".")]


@needs_fork
def test_helper_error_is_reported_and_falls_back(state, tmp_path, monkeypatch):
    import bandgeo.report.pdf as pdf_mod

    real = pdf_mod.pdf_bytes
    calls = {"n": 0}
    parent = os.getpid()

    def flaky(html, title=None):
        if os.getpid() != parent and "warm-up" not in html:
            raise ValueError("typesetting failed in the helper on purpose")
        calls["n"] += os.getpid() == parent
        return real(html, title=title)

    monkeypatch.setattr(pdf_mod, "pdf_bytes", flaky)
    ts = typeset.Typesetter.start()
    try:
        assert ts.submit("<html><body><p>one page</p></body></html>", "t")
        assert ts.result(timeout=120) is None
        assert "on purpose" in ts.error
    finally:
        ts.close()
    _, seconds = build_report(state, tmp_path, formats=("pdf",))
    assert seconds["pdf_parallel"] == 0.0 and calls["n"] == 1


@needs_fork
def test_hung_helper_is_killed_after_the_timeout(tmp_path, monkeypatch):
    monkeypatch.setattr(typeset, "_child", lambda *_a: time.sleep(600))
    ts = typeset.Typesetter.start()
    pid = ts.pid
    try:
        assert ts.submit("<html><body>x</body></html>")
        t0 = time.monotonic()
        assert ts.result(timeout=1.0) is None
        assert time.monotonic() - t0 < 30
    finally:
        ts.close()
    with pytest.raises(ChildProcessError):
        os.waitpid(pid, os.WNOHANG)


def test_fork_can_be_switched_off(monkeypatch):
    monkeypatch.setenv("BANDGEO_REPORT_FORK", "0")
    assert typeset.Typesetter.start() is None and typeset.Forked.start(lambda: b"") is None


def test_auto_mode_follows_the_load(monkeypatch):
    monkeypatch.setenv("BANDGEO_REPORT_FORK", "auto")
    monkeypatch.setattr(os, "sched_getaffinity", lambda _pid: {0, 1}, raising=False)
    monkeypatch.setattr(os, "getloadavg", lambda: (6.0, 6.0, 6.0))
    assert not typeset.fork_allowed()                 # busy 2-core machine: one process
    monkeypatch.setattr(os, "getloadavg", lambda: (1.2, 1.0, 0.8))
    assert typeset.fork_allowed() == (hasattr(os, "fork") and __import__("sys").platform.startswith("linux"))


def test_specimen_figure_reads_the_cached_unroll(state, monkeypatch):
    """With the whole mesh already unrolled for this axis (the series stage does it), the figure unrolls
    nothing itself, and draws the same picture as when it computes its own subsample."""
    import io

    from bandgeo import unroll as unroll_mod
    from bandgeo.report import specimen_view

    spec, seg = state.specimen, state.segmentation

    def png():
        fig = specimen_view.specimen_figure(spec.vertices_mm, spec.faces, seg.vertex_band, seg.axis,
                                            list(seg.boundaries), seed=3)
        buf = io.BytesIO()
        fig.savefig(buf, format="png", dpi=60)
        return buf.getvalue()

    unroll_mod.clear_cache()
    own = png()                                       # no cache: the figure unrolls its own vertices
    unroll_mod.unroll(spec.vertices_mm, seg.axis)     # what the series stage leaves behind
    calls = []
    real = specimen_view.unroll_vertices
    monkeypatch.setattr(specimen_view, "unroll_vertices", lambda *a: calls.append(1) or real(*a))
    cached = png()
    assert calls == []
    # same vertices, same per-vertex unroll: the same pixels (analytic identity, no tolerance needed)
    from PIL import Image

    a = np.asarray(Image.open(io.BytesIO(own)).convert("RGB"), float)
    b = np.asarray(Image.open(io.BytesIO(cached)).convert("RGB"), float)
    assert a.shape == b.shape and np.abs(a - b).mean() < 0.5


def test_progress_counts_to_its_total(state, tmp_path):
    seen = []
    build_report(state, tmp_path, progress=lambda what, done, total: seen.append((done, total)))
    dones = [d for d, _ in seen]
    assert seen and dones == sorted(dones) and seen[-1][0] == seen[-1][1] and len({t for _, t in seen}) == 1


@needs_fork
def test_hung_plot_helper_falls_back(state, tmp_path, monkeypatch):
    from bandgeo.report import build

    real_start = typeset.Forked.start
    monkeypatch.setattr(typeset.Forked, "start", classmethod(lambda cls, fn: real_start(lambda: time.sleep(600))))
    monkeypatch.setattr(build, "PLOT_TIMEOUT_S", 1.0)
    paths, seconds = build_report(state, tmp_path, formats=("html",))
    assert seconds["figures_parallel"] == 0.0
    html = paths["report.html"].read_text()
    assert html.count("data:image/svg+xml") >= 3 and "Figure 2." in html


def test_one_label_style_per_log_axis():
    """A log axis spanning beyond 0.001..1000 labels every decade as a power of ten (as matplotlib's
    own log labels do), one within it in decimals: never both on one axis."""
    from matplotlib.figure import Figure

    from bandgeo.report.figures import plain_log_axis

    fig = Figure()
    wide, narrow = fig.subplots(1, 2)
    for ax, lims in ((wide, (1e-8, 1e-1)), (narrow, (1e-2, 1e2))):
        ax.set_yscale("log")
        ax.set_ylim(*lims)
        plain_log_axis(ax.yaxis)
    fig.canvas.draw()
    w = [t.get_text() for t in wide.get_yticklabels() if t.get_text()]
    n = [t.get_text() for t in narrow.get_yticklabels() if t.get_text()]
    assert w and all(t.startswith("10") and not t.startswith("10.") for t in w) and "10\u207b\u2074" in w
    assert n and "0.01" in n and "100" in n and not [t for t in n if "\u207b" in t]


@needs_fork
def test_prestarted_helper_is_taken_by_the_report_and_reaped(state, tmp_path):
    """The pipeline starts the PDF helper before the measurement (typeset.prestart); the report takes that
    helper and typesets in it, and a helper never taken is closed and reaped."""
    assert typeset.prestart()
    pid = typeset._STARTED["helper"][1].pid
    assert typeset.prestart() and typeset._STARTED["helper"][1].pid == pid   # one helper, not two
    paths, seconds = build_report(state, tmp_path, formats=("html", "pdf"))
    assert seconds["pdf_parallel"] == 1.0 and "helper" not in typeset._STARTED
    assert paths["report.pdf"].read_bytes()[:5] == b"%PDF-"
    with pytest.raises(ChildProcessError):
        os.waitpid(pid, os.WNOHANG)
    assert typeset.prestart()
    pid = typeset._STARTED["helper"][1].pid
    typeset.discard_started()
    assert typeset.take_started() is None
    with pytest.raises(ChildProcessError):
        os.waitpid(pid, os.WNOHANG)
