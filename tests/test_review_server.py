"""The review server: loopback only, token on every request, no path outside the folder, bounded and
validated bodies, saves with a re-run worker, and a clean stop on SIGINT."""
import http.client
import json
import os
import signal
import socket
import subprocess
import sys
import textwrap
import threading
import time
from pathlib import Path

import pytest

from bandgeo.errors import ParameterError, ReviewError
from bandgeo.review import read_review, serve
from bandgeo.review.server import MAX_BODY

from test_review_support import make_folder

HERE = Path(__file__).parent


class Recorder:
    """A stand-in for bandgeo.pipeline.rerun: counts calls, optionally fails."""

    def __init__(self, fail=False):
        self.calls, self.fail = 0, fail
        self.event = threading.Event()

    def __call__(self, folder):
        self.calls += 1
        self.event.set()
        if self.fail:
            raise RuntimeError("measurement failed on band 3")
        review = read_review(folder)

        class State:
            result = {"days_per_year": {"estimate": 390.0, "ci95": [380.0, 400.0], "significant": True,
                                        "method": "stand-in"},
                      "bands": {"count": 100 + len(review["edits"]), "mean_thickness_mm": 1.5}}
            band_table = None
        return State()


@pytest.fixture
def served(tmp_path):
    folder, seg, _ = make_folder(tmp_path / "KRB 07 scan")
    rec = Recorder()
    server = serve(folder, open_browser=False, segmentation=seg, rerun=rec)
    yield server, folder, rec, seg
    server.stop()


def request(server, method, path, body=None, token=True, headers=None, raw_body=None):
    host, port = server.server_address[:2]
    conn = http.client.HTTPConnection(host, port, timeout=10)
    hdrs = dict(headers or {})
    if token:
        hdrs.setdefault("X-Review-Token", server.app.token)
    data = raw_body if raw_body is not None else (None if body is None else json.dumps(body).encode())
    if data is not None:
        hdrs.setdefault("Content-Type", "application/json")
    conn.request(method, path, body=data, headers=hdrs)
    res = conn.getresponse()
    payload = res.read()
    conn.close()
    try:
        return res.status, json.loads(payload), res
    except ValueError:
        return res.status, payload, res


def test_binds_loopback_only(tmp_path):
    folder, seg, _ = make_folder(tmp_path / "f")
    for host in ("0.0.0.0", "192.168.1.5", "::", ""):
        with pytest.raises(ParameterError, match="loopback"):
            serve(folder, host=host, open_browser=False, segmentation=seg)
    server = serve(folder, open_browser=False, segmentation=seg)
    try:
        assert server.server_address[0] == "127.0.0.1"
        assert server.url.startswith(f"http://127.0.0.1:{server.server_address[1]}/?token=")
    finally:
        server.stop()


@pytest.mark.parametrize("method, path", [
    ("GET", "/"), ("GET", "/static/review.js"), ("GET", "/api/state"), ("GET", "/api/mesh"),
    ("POST", "/api/edit"), ("POST", "/api/save"), ("GET", "/no/such/page"),
])
def test_every_request_needs_the_token(served, method, path):
    server, folder, rec, _ = served
    body = {"edit": {"op": "reject", "id": 1}} if method == "POST" else None
    for headers in ({}, {"X-Review-Token": "wrong"}, {"Cookie": "bandgeo_review=wrong"}):
        status, payload, _ = request(server, method, path, body=body, token=False, headers=headers)
        assert status == 403 and "token" in payload["error"]
    token = server.app.token
    wrong = token[:-1] + ("y" if token[-1] == "x" else "x")  # always differs from the real token
    status, _, _ = request(server, method, path + "?token=" + wrong, body=body, token=False)
    assert status == 403
    assert not (folder / "review.json").exists() and server.app.session.edits == []


def test_token_by_query_then_cookie(served):
    server, *_ = served
    status, page, res = request(server, "GET", "/?token=" + server.app.token, token=False)
    assert status == 200 and b"review.js" in page
    cookie = res.getheader("Set-Cookie").split(";")[0]
    assert "HttpOnly" in res.getheader("Set-Cookie") and "SameSite=Strict" in res.getheader("Set-Cookie")
    status, state, _ = request(server, "GET", "/api/state", token=False, headers={"Cookie": cookie})
    assert status == 200 and state["n_bands"] == 11


def test_wrong_host_header_is_refused(served):
    # A page on another site that resolves its name to 127.0.0.1 (DNS rebinding) sends its own Host.
    server, *_ = served
    status, payload, _ = request(server, "GET", "/api/state", headers={"Host": "evil.example:80"})
    assert status == 403 and "Host" in payload["error"]


@pytest.mark.parametrize("path", [
    "/../../../../etc/passwd", "/static/../../../../etc/passwd", "/%2e%2e/%2e%2e/%2e%2e/etc/passwd",
    "/static/%2e%2e/server.py", "/static/..%2fserver.py", "//etc/passwd", "/etc/passwd",
    "/static//etc/passwd", "/api/../review.json", "/review.json", "/specimen.npz", "/static/",
    "/static/%2Fetc%2Fpasswd", "/C:/Windows/win.ini",
])
def test_no_path_outside_the_fixed_set_is_served(served, path):
    server, folder, *_ = served
    status, payload, _ = request(server, "GET", path + "?token=" + server.app.token, token=False)
    assert status == 404
    assert b"root:" not in json.dumps(payload).encode()


def test_links_out_of_the_folder_are_refused(tmp_path):
    folder, seg, _ = make_folder(tmp_path / "linked")
    secret = tmp_path / "secret.json"
    secret.write_text('{"edits": []}', encoding="utf-8")
    os.symlink(secret, folder / "review.json")
    with pytest.raises(ReviewError, match="outside the specimen folder"):
        serve(folder, open_browser=False, segmentation=seg)
    (folder / "review.json").unlink()
    (folder / "specimen.npz").rename(tmp_path / "specimen.npz")
    os.symlink(tmp_path / "specimen.npz", folder / "specimen.npz")
    with pytest.raises(ReviewError, match="outside the specimen folder"):
        serve(folder, open_browser=False, segmentation=seg)
    assert secret.read_text(encoding="utf-8") == '{"edits": []}'


def test_save_refuses_a_link_planted_after_start(served, tmp_path):
    server, folder, rec, _ = served
    target = tmp_path / "elsewhere.json"
    target.write_text("keep me", encoding="utf-8")
    os.symlink(target, folder / "review.json")
    request(server, "POST", "/api/edit", {"edit": {"op": "reject", "id": 2}})
    status, payload, _ = request(server, "POST", "/api/save", {})
    assert status == 400 and "outside the specimen folder" in payload["error"]
    assert target.read_text(encoding="utf-8") == "keep me"


def test_body_size_limit(served):
    server, folder, *_ = served
    big = json.dumps({"edit": {"op": "note", "text": "x" * (MAX_BODY + 10)}}).encode()
    status, payload, _ = request(server, "POST", "/api/edit", raw_body=big)
    assert status == 413 and "limit" in payload["error"]
    # A client announcing a huge body is refused before it sends it.
    host, port = server.server_address[:2]
    with socket.create_connection((host, port), timeout=10) as sock:
        sock.sendall((f"POST /api/edit HTTP/1.1\r\nHost: {host}:{port}\r\nX-Review-Token: "
                      f"{server.app.token}\r\nContent-Type: application/json\r\n"
                      f"Content-Length: 999999999\r\n\r\n").encode())
        reply = sock.recv(200)
    assert reply.startswith(b"HTTP/1.0 413") or reply.startswith(b"HTTP/1.1 413")
    assert server.app.session.edits == []


@pytest.mark.parametrize("raw", [
    b'{"edit": {"op": "reject", "id": 999}}', b'{"edit": {"op": "reject", "id": "1; rm -rf /"}}',
    b'{"edit": {"op": "move", "id": 1, "height_mm": 1e400}}', b'{"edit": [1, 2]}', b'not json',
    b'[1, 2, 3]', b'{"edit": {"op": "add", "height_mm": -50}}', b'\xff\xfe', b'[' * 8000,
    b'{"edit": {"op": "note", "text": {"nested": [1]}}}',
])
def test_malformed_edit_gets_400_and_changes_nothing(served, raw):
    server, folder, *_ = served
    request(server, "POST", "/api/edit", {"edit": {"op": "reject", "id": 4}})
    before = request(server, "GET", "/api/state")[1]
    status, payload, _ = request(server, "POST", "/api/edit", raw_body=raw)
    assert status == 400 and payload["error"] and "\n" not in payload["error"]
    after = request(server, "GET", "/api/state")[1]
    assert after["edits"] == before["edits"] and after["boundaries"] == before["boundaries"]
    assert not (folder / "review.json").exists()


def test_edit_save_rerun_and_reload(served):
    server, folder, rec, seg = served
    status, r, _ = request(server, "POST", "/api/edit", {"edit": {"op": "reject", "id": 5}})
    assert status == 200 and r["state"]["n_bands"] == 10
    status, r, _ = request(server, "POST", "/api/edit", {"edit": {"op": "add", "height_mm": 3.1}})
    assert r["edit"]["id"] == 12 and r["state"]["n_bands"] == 11
    status, r, _ = request(server, "POST", "/api/undo", {})
    assert r["changed"] and r["state"]["n_bands"] == 10 and r["state"]["can_redo"]
    request(server, "POST", "/api/redo", {})
    status, r, _ = request(server, "POST", "/api/save", {})
    assert status == 200 and r["n_edits"] == 2
    server.app.wait(30)
    status, st, _ = request(server, "GET", "/api/status")
    assert st["state"] == "done" and rec.calls == 1
    state = request(server, "GET", "/api/state")[1]
    assert state["result"]["bands"]["count"] == 102 and not state["dirty"]
    review = read_review(folder)
    assert [e["op"] for e in review["edits"]] == ["reject", "add"]
    assert review["history"][0]["edits_after"] == 2 and review["scan_sha256"] == "0" * 64
    # A fresh server on the same folder starts from the saved edits.
    again = serve(folder, open_browser=False, segmentation=seg, rerun=rec)
    try:
        status, st2, _ = request(again, "GET", "/api/state")
        status_of = {b["id"]: b["status"] for b in st2["boundaries"]}
        assert st2["n_bands"] == 11 and status_of[5] == "rejected" and status_of[12] == "added"
    finally:
        again.stop()


def test_failed_rerun_keeps_last_good_result(tmp_path):
    folder, seg, _ = make_folder(tmp_path / "fail")
    rec = Recorder(fail=True)
    server = serve(folder, open_browser=False, segmentation=seg, rerun=rec)
    try:
        request(server, "POST", "/api/edit", {"edit": {"op": "reject", "id": 1}})
        request(server, "POST", "/api/save", {})
        server.app.wait(30)
        state = request(server, "GET", "/api/state")[1]
        assert state["rerun"]["state"] == "failed"
        assert state["rerun"]["error"] == "RuntimeError: measurement failed on band 3"
        assert state["result"]["days_per_year"]["estimate"] == 401.5   # the fixture's result.json
        assert read_review(folder)["edits"][0]["id"] == 1             # the save itself stands
    finally:
        server.stop()


def test_sigint_stops_cleanly_and_frees_the_port(tmp_path):
    folder = tmp_path / "KRB-31"
    script = textwrap.dedent(f"""
        import sys
        sys.path.insert(0, {str(HERE)!r})
        from test_review_support import make_folder
        from bandgeo.review import run
        folder, seg, _ = make_folder({str(folder)!r})
        run(folder, open_browser=False, segmentation=seg, rerun=lambda f: None,
            echo=lambda line: print(line, flush=True))
    """)
    env = dict(os.environ, OMP_NUM_THREADS="1")
    proc = subprocess.Popen([sys.executable, "-c", script], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True, env=env)
    try:
        line = proc.stdout.readline()
        assert "http://127.0.0.1:" in line and "?token=" in line
        port = int(line.split("http://127.0.0.1:")[1].split("/")[0])
    except BaseException:
        proc.kill()
        raise
    _stop_with_ctrl_c(proc, port)


def test_cli_refuses_a_folder_that_was_not_analysed(tmp_path):
    for target in (tmp_path / "missing", tmp_path):
        proc = subprocess.run([sys.executable, "-m", "bandgeo.cli", "review", str(target), "--no-browser"],
                              capture_output=True, text=True, timeout=60)
        assert proc.returncode == 2, proc.stderr
        assert proc.stderr.count("\n") == 1 and proc.stderr.startswith("bandgeo: error:")


def test_cli_serves_a_saved_segmentation_and_stops_on_ctrl_c(tmp_path):
    from test_review_support import make_real_folder

    folder, seg, _ = make_real_folder(tmp_path / "KRB 31 results")
    env = dict(os.environ, OMP_NUM_THREADS="1")
    proc = subprocess.Popen([sys.executable, "-m", "bandgeo.cli", "review", str(folder), "--no-browser"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)
    try:
        line = proc.stdout.readline()
        url = line[line.index("http://"):].strip()
        port = int(url.split(":")[2].split("/")[0])
        token = url.split("token=")[1]
        conn = http.client.HTTPConnection("127.0.0.1", port, timeout=10)
        conn.request("GET", "/api/state", headers={"X-Review-Token": token})
        state = json.loads(conn.getresponse().read())
        conn.close()
        assert state["n_bands"] == len(seg.boundaries) - 1 and state["specimen_id"] == "KRB-31"
    except BaseException:
        proc.kill()
        raise
    _stop_with_ctrl_c(proc, port)


def test_a_review_whose_edits_do_not_fit_is_set_apart_not_applied(tmp_path):
    folder, seg, _ = make_folder(tmp_path / "stale")
    (folder / "review.json").write_text(json.dumps({"scan_sha256": "0" * 64, "edits": [{"op": "reject", "id": 77}]}),
                                        encoding="utf-8")
    server = serve(folder, open_browser=False, segmentation=seg)
    try:
        state = request(server, "GET", "/api/state")[1]
        assert state["set_apart"] and any("no boundary 77" in r for r in state["set_apart"]["reasons"])
        assert state["n_edits"] == 0 and all(b["status"] == "auto" for b in state["boundaries"])
    finally:
        server.stop()


def test_saves_and_edits_hammered_over_http_leave_a_consistent_file(served):
    server, folder, rec, _ = served
    errors = []

    def worker(k):
        try:
            for i in range(5):
                status, _, _ = request(server, "POST", "/api/edit",
                                       {"edit": {"op": "note", "text": f"worker {k} note {i}"}})
                assert status == 200
                status, _, _ = request(server, "POST", "/api/save", {})
                assert status == 200
        except Exception as exc:  # pragma: no cover - reported below
            errors.append(exc)

    threads = [threading.Thread(target=worker, args=(k,)) for k in range(6)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    server.app.wait(60)
    assert not errors
    review = read_review(folder)
    assert len(review["edits"]) == 30 and len(review["history"]) == 30
    assert all(a["edits_after"] == b["edits_before"] for a, b in zip(review["history"], review["history"][1:]))
    # one re-run at a time: saves during a run ask for one more, they do not start a second worker
    assert 1 <= rec.calls <= 30


def _stop_with_ctrl_c(proc, port):
    """Send Ctrl-C to a running server process; check it exits 0 with one line and leaves no listener."""
    try:
        proc.send_signal(signal.SIGINT)
        out, err = proc.communicate(timeout=60)
    finally:
        if proc.poll() is None:
            proc.kill()
    assert proc.returncode == 0, err
    assert "stopped" in out and "Traceback" not in err
    with socket.socket() as sock:                            # no listener is left on the port
        # SO_REUSEADDR lets the bind pass over connections in TIME_WAIT, never over a live listener.
        sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        sock.bind(("127.0.0.1", port))
        sock.listen()


def test_rerun_reports_its_progress_and_the_page_stays_usable(tmp_path):
    """While the re-run works, /api/status gives its stage and step, and edits are still answered."""
    folder, seg, _ = make_folder(tmp_path / "KRB-07")
    reached, release = threading.Event(), threading.Event()

    def slow_rerun(folder, progress=None):
        progress("measure", 5, 10)
        reached.set()
        release.wait(30)
        progress("periodicity done", 8, 10)

    server = serve(folder, open_browser=False, segmentation=seg, rerun=slow_rerun)
    try:
        request(server, "POST", "/api/edit", {"edit": {"op": "reject", "id": 2}})
        request(server, "POST", "/api/save", {})
        assert reached.wait(30)
        status, st, _ = request(server, "GET", "/api/status")
        assert st["state"] == "running" and (st["stage"], st["done"], st["total"]) == ("measure", 5, 10)
        status, r, _ = request(server, "POST", "/api/edit", {"edit": {"op": "reject", "id": 3}})
        assert status == 200 and r["state"]["n_bands"] == 9 and r["state"]["rerun"]["state"] == "running"
        release.set()
        server.app.wait(30)
        st = request(server, "GET", "/api/status")[1]
        assert st["state"] == "done" and st["runs"] == 1 and st["seconds"] is not None
    finally:
        release.set()
        server.stop()


def test_new_figures_are_shown_before_the_report_is_written(tmp_path):
    """A re-run that hands over the analysis before writing the report (``partial``): the page's state
    has the new figures while the re-run is still writing the report."""
    folder, seg, _ = make_folder(tmp_path / "KRB-07")
    in_report, release = threading.Event(), threading.Event()

    class Analysis:
        result = {"days_per_year": {"estimate": 366.0, "ci95": [360.0, 372.0], "significant": True,
                                    "method": "stand-in"}, "bands": {"count": 10, "mean_thickness_mm": 1.5}}
        band_table = None

    def rerun(folder, progress=None, partial=None):
        partial(Analysis())
        in_report.set()
        release.wait(30)
        return Analysis()

    server = serve(folder, open_browser=False, segmentation=seg, rerun=rerun)
    try:
        request(server, "POST", "/api/edit", {"edit": {"op": "reject", "id": 2}})
        request(server, "POST", "/api/save", {})
        assert in_report.wait(30)
        state = request(server, "GET", "/api/state")[1]
        assert state["rerun"]["state"] == "running" and state["rerun"]["result_utc"]
        assert state["result"]["days_per_year"]["estimate"] == 366.0       # not the fixture's 401.5
        release.set()
        server.app.wait(30)
        assert request(server, "GET", "/api/status")[1]["state"] == "done"
    finally:
        release.set()
        server.stop()


def test_a_later_save_is_never_overwritten_by_an_earlier_one(tmp_path, monkeypatch):
    """Two saves at once (two tabs, quick key presses): review.json ends with every edit made before the
    last save began. The first save is held at its write while a second edit and save start; saves
    run one at a time, so the second waits and writes last (before the fix, an older copy of the
    edits could be written last: the hammer test above failed 26 != 30 under load)."""
    from bandgeo.review import app as app_mod

    folder, seg, _ = make_folder(tmp_path / "KRB-07")
    server = serve(folder, open_browser=False, segmentation=seg, rerun=Recorder())
    real = app_mod.save_review
    second = []

    def held(folder_, review):
        if not second:
            t = threading.Thread(target=lambda: (server.app.session.push({"op": "reject", "id": 3}),
                                                 server.app.save()))
            second.append(t)
            t.start()
            t.join(1.0)  # saves one at a time: it waits for this one (without that it would finish first)
        return real(folder_, review)

    monkeypatch.setattr(app_mod, "save_review", held)
    try:
        server.app.session.push({"op": "reject", "id": 2})
        server.app.save()
        second[0].join(30)
        assert not second[0].is_alive()
        assert [e["id"] for e in read_review(folder)["edits"]] == [2, 3]
        assert len(read_review(folder)["history"]) == 2 and not server.app.session.dirty
        server.app.wait(30)
    finally:
        server.stop()


def test_a_server_stopped_during_its_warm_up_leaves_no_worker_process(tmp_path, monkeypatch):
    """stop() while the page's warm-up thread has not yet started the re-run's worker process: the
    thread, when it goes on, starts none (it used to start one after the stop, left running)."""
    import psutil

    from bandgeo.review import server as server_mod

    folder, seg, _ = make_folder(tmp_path / "KRB-07")
    go = threading.Event()
    real_warm = server_mod._warm
    monkeypatch.setattr(server_mod, "_warm", lambda *a: (go.wait(60), real_warm(*a)))
    before = {c.pid for c in psutil.Process().children()}
    server = serve(folder, open_browser=False, segmentation=seg)  # the default re-run: a worker process
    try:
        server.stop(wait_rerun=2)  # the warm-up thread is held before it starts the worker
        go.set()
        server.warm_thread.join(60)
        left = [c.pid for c in psutil.Process().children() if c.pid not in before]
        assert not left and server.app.rerun.pid is None, left
    finally:
        go.set()
        server.app.rerun.close()
