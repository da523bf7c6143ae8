"""The review server against each attack of the probe (issue 15): forged cross-site calls (F2), idle and
slow connections (F3), malformed requests (F1), a review from another scan or with other units (F4, F6),
and temporary files left by a killed save (F9). Each attack is tried and the harm checked absent."""
import http.client
import json
import socket
import threading
import time

import numpy as np
import pytest

from bandgeo.review import read_review, serve
from bandgeo.review.basis import check_fit, segmentation_id

from test_review_support import make_folder


@pytest.fixture
def served(tmp_path):
    folder, seg, _ = make_folder(tmp_path / "KRB-07 result")
    server = serve(folder, open_browser=False, segmentation=seg, rerun=lambda f: None)
    yield server, folder, seg
    server.stop()


def send(server, method, path, body=None, headers=None):
    """One request with exactly the headers given (no token added)."""
    host, port = server.server_address[:2]
    conn = http.client.HTTPConnection(host, port, timeout=15)
    hdrs = {"Host": f"{host}:{port}", **(headers or {})}
    conn.request(method, path, body=body, headers=hdrs)
    res = conn.getresponse()
    raw = res.read()
    conn.close()
    try:
        return res.status, json.loads(raw)
    except ValueError:
        return res.status, raw


def raw_exchange(server, data: bytes) -> bytes:
    host, port = server.server_address[:2]
    with socket.create_connection((host, port), timeout=15) as sock:
        sock.sendall(data)
        chunks = []
        while True:
            try:
                part = sock.recv(65536)
            except OSError:
                break
            if not part:
                break
            chunks.append(part)
    return b"".join(chunks)


def _one_line_json_error(raw: bytes, status_prefix: bytes):
    head, _, body = raw.partition(b"\r\n\r\n")
    assert head.startswith(status_prefix), head[:80]
    payload = json.loads(body)
    assert payload["error"] and "\n" not in payload["error"] and "Traceback" not in payload["error"]
    return payload


# ---------------------------------------------------------------------------------------------- F2
def test_forged_cross_site_edit_and_save_are_refused(served):
    """The probe's forgery: cookie only, text/plain, Origin of another local port -> 200 and saved.
    Every variant is now refused and nothing is changed or written."""
    server, folder, _ = served
    port = server.server_address[1]
    cookie = f"bandgeo_review={server.app.token}"
    good_origin = f"http://127.0.0.1:{port}"
    edit = json.dumps({"edit": {"op": "reject", "id": 1}})
    attempts = [
        # the probe's exact request
        ({"Cookie": cookie, "Content-Type": "text/plain", "Origin": "http://127.0.0.1:8000"}, 403),
        # cookie alone, even with the right type and origin: the token must be in the header
        ({"Cookie": cookie, "Content-Type": "application/json", "Origin": good_origin}, 403),
        ({"Cookie": cookie, "Content-Type": "application/json"}, 403),
        # token in the address only
        ({"Content-Type": "application/json", "Origin": good_origin}, 403),
        # header token but a form-like body type (what a cross-site form or simple fetch can send)
        ({"X-Review-Token": server.app.token, "Content-Type": "text/plain"}, 415),
        ({"X-Review-Token": server.app.token, "Content-Type": "application/x-www-form-urlencoded"}, 415),
        ({"X-Review-Token": server.app.token}, 415),
        # header token but another origin, or the browser saying the call is cross-site
        ({"X-Review-Token": server.app.token, "Content-Type": "application/json",
          "Origin": "http://127.0.0.1:8000"}, 403),
        ({"X-Review-Token": server.app.token, "Content-Type": "application/json", "Origin": "null"}, 403),
        ({"X-Review-Token": server.app.token, "Content-Type": "application/json",
          "Sec-Fetch-Site": "cross-site"}, 403),
        ({"X-Review-Token": server.app.token[:-2], "Content-Type": "application/json"}, 403),
    ]
    for path in ("/api/edit", "/api/save", "/api/set-aside"):
        for headers, expected in attempts:
            url = path + ("?token=" + server.app.token if "X-Review-Token" not in headers else "")
            status, payload = send(server, "POST", url, body=edit, headers=headers)
            assert status == expected, (path, headers, payload)
            assert "\n" not in payload["error"]
    assert server.app.session.edits == []
    assert not (folder / "review.json").exists()
    # A DNS-rebinding page sends its own Host even from 127.0.0.1.
    status, _ = send(server, "GET", "/api/state", headers={"X-Review-Token": server.app.token,
                                                          "Host": "attacker.example"})
    assert status == 403
    # The page itself (header token, JSON, own origin) still works.
    status, payload = send(server, "POST", "/api/edit", body=edit, headers={
        "X-Review-Token": server.app.token, "Content-Type": "application/json; charset=utf-8",
        "Origin": good_origin, "Sec-Fetch-Site": "same-origin"})
    assert status == 200 and payload["edit"]["op"] == "reject"


# ---------------------------------------------------------------------------------------------- F3
def test_idle_and_slow_connections_cannot_lock_the_page(served):
    """Forty connections sending partial headers (more than the server's slots) no longer make real
    requests fail: the longest-waiting idle connection gives way, and each is closed once its header
    time is up."""
    server, *_ = served
    host, port = server.server_address[:2]
    idle = []
    for _ in range(40):
        sock = socket.create_connection((host, port), timeout=30)
        sock.sendall(b"GET /api/state HTTP/1.1\r\nHost: 127.0.0.1")  # never finished
        idle.append(sock)
    try:
        for _ in range(5):
            status, state = send(server, "GET", "/api/state", headers={"X-Review-Token": server.app.token})
            assert status == 200 and state["n_bands"] == 11
        # A slow sender trickling a byte at a time is cut off after the header time limit, not kept.
        slow = socket.create_connection((host, port), timeout=30)
        slow.sendall(b"G")
        t0 = time.monotonic()
        closed = False
        while time.monotonic() - t0 < 25:
            try:
                slow.sendall(b"E")
            except OSError:
                closed = True
                break
            try:
                slow.settimeout(1.0)
                if slow.recv(100) == b"":
                    closed = True
                    break
            except socket.timeout:
                pass
            except OSError:
                closed = True
                break
        slow.close()
        assert closed, "a connection trickling its request line was never closed"
    finally:
        for sock in idle:
            sock.close()


# ---------------------------------------------------------------------------------------------- F1
@pytest.mark.parametrize("body", [
    b'{"edit": {"op": [1]}}', b'{"edit": {"op": {"a": 1}}}', b'{"op": {"a": 1}}',
    b'{"edit": {"op": "reject", "id": ' + b"9" * 5000 + b'}}',
    b'{"edit": {"op": "move", "id": 1, "height_mm": ' + b"9" * 400 + b'}}',
    b'{"edit": {"op": "reject", "id": 1e999}}', b'{"edit": {"op": "reject", "id": -1}}',
    b'{"edit": {"op": "note", "text": "x", "\\u0000": 1}}', b'{"edit": {"op": "hiatus", "s0_mm": 5, "s1_mm": 2}}',
    b'{"edit": {"op": "accept_stretch", "s0_mm": 100, "s1_mm": 200}}', b'{"edit": null}', b'null', b'"x"',
    b'{"edit": {"op": "reject", "id": 1, "seq": "a"}}', b'{"edit": {"op": "add", "height_mm": NaN}}',
])
def test_malformed_edits_get_one_line_json_4xx(served, body, capfd):
    server, folder, _ = served
    status, payload = send(server, "POST", "/api/edit", body=body, headers={
        "X-Review-Token": server.app.token, "Content-Type": "application/json"})
    assert 400 <= status < 500, payload
    assert isinstance(payload, dict) and payload["error"] and "\n" not in payload["error"]
    assert len(payload["error"]) < 400
    assert server.app.session.edits == []
    err = capfd.readouterr().err
    assert "Traceback" not in err and "Error" not in err, err


@pytest.mark.parametrize("raw, prefix", [
    (b"GARBAGE\r\n\r\n", b"HTTP/1.0 400"),
    (b"GET /api/state HTTP/9.9\r\n\r\n", b"HTTP/1.0 505"),
    (b"GET /" + b"a" * 70000 + b" HTTP/1.1\r\n\r\n", b"HTTP/1.0 414"),
    (b"GET / HTTP/1.1\r\n" + b"X-Long: " + b"b" * 70000 + b"\r\n\r\n", b"HTTP/1.0 431"),
    (b"POST /api/edit HTTP/1.1\r\nHost: HOST\r\nX-Review-Token: TOKEN\r\nContent-Type: application/json\r\n"
     b"Content-Length: -5\r\n\r\n", b"HTTP/1.0 400"),
    (b"POST /api/edit HTTP/1.1\r\nHost: HOST\r\nX-Review-Token: TOKEN\r\nContent-Type: application/json\r\n"
     b"Transfer-Encoding: chunked\r\n\r\n5\r\nhello\r\n0\r\n\r\n", b"HTTP/1.0 411"),
    (b"DELETE /api/state HTTP/1.1\r\nHost: HOST\r\nX-Review-Token: TOKEN\r\n\r\n", b"HTTP/1.0 403"),
])
def test_malformed_requests_get_one_line_json_errors(served, raw, prefix, capfd):
    server, *_ = served
    host, port = server.server_address[:2]
    raw = raw.replace(b"HOST", f"{host}:{port}".encode()).replace(b"TOKEN", server.app.token.encode())
    reply = raw_exchange(server, raw)
    if prefix == b"HTTP/1.0 403" and reply.startswith(b"HTTP/1.0 405"):
        prefix = b"HTTP/1.0 405"
    _one_line_json_error(reply, prefix)
    err = capfd.readouterr().err
    assert "Traceback" not in err, err


# ---------------------------------------------------------------------------------------------- F4 / F6
def _review(basis=None, edits=None, sha="f" * 64):
    return {"schema": "bandgeo.review/1", "specimen_id": "KRB-99", "scan_sha256": sha,
            "edits": edits if edits is not None else [{"op": "reject", "id": 5},
                                                      {"op": "add", "height_mm": 7.3}],
            "history": [], **({"basis": basis} if basis else {})}


def test_a_review_of_another_scan_is_not_shown_and_can_be_set_aside(tmp_path):
    """F4: another specimen's review.json in the folder. It used to be shown and then saved over with
    this scan's hash. Now the page shows no edit, names the scan the file belongs to, refuses to save
    until it is set aside, and setting aside renames it (never deletes it)."""
    folder, seg, _ = make_folder(tmp_path / "KRB-07")
    other = _review()
    (folder / "review.json").write_text(json.dumps(other), encoding="utf-8")
    server = serve(folder, open_browser=False, segmentation=seg, rerun=lambda f: None)
    hdrs = {"X-Review-Token": server.app.token, "Content-Type": "application/json"}
    try:
        status, state = send(server, "GET", "/api/state", headers={"X-Review-Token": server.app.token})
        assert status == 200
        apart = state["set_apart"]
        assert "KRB-99" in apart["belongs_to"] and "ffffffffffff" in apart["belongs_to"]
        assert any("scan" in r for r in apart["reasons"]) and apart["n_edits"] == 2
        assert state["n_edits"] == 0 and {b["status"] for b in state["boundaries"]} == {"auto"}
        assert 5 in {b["id"] for b in state["boundaries"]}
        send(server, "POST", "/api/edit", body=b'{"edit": {"op": "reject", "id": 3}}', headers=hdrs)
        status, payload = send(server, "POST", "/api/save", body=b"{}", headers=hdrs)
        assert status == 409 and "set it aside" in payload["error"]
        assert json.loads((folder / "review.json").read_text(encoding="utf-8")) == other   # untouched
        status, payload = send(server, "POST", "/api/set-aside", body=b"{}", headers=hdrs)
        assert status == 200 and payload["state"]["set_apart"] is None
        aside = folder / payload["renamed_to"]
        assert aside.name.startswith("review.set-aside-") and json.loads(aside.read_text()) == other
        status, payload = send(server, "POST", "/api/save", body=b"{}", headers=hdrs)
        assert status == 200 and payload["n_edits"] == 1
        saved = read_review(folder)
        assert saved["scan_sha256"] == "0" * 64 and saved["basis"]["scan_sha256"] == "0" * 64
        assert saved["basis"]["segmentation_id"] == segmentation_id(seg)
        assert saved["basis"]["units"] == "mm" and saved["basis"]["mm_per_unit"] == 1.0
    finally:
        server.stop()


def test_a_review_made_with_other_units_is_not_applied(tmp_path):
    """F6: the same scan re-analysed with --units cm. Heights in a millimetre frame ten times larger
    would land elsewhere, so the review is set apart, with the units named, not re-applied."""
    folder, seg, _ = make_folder(tmp_path / "KRB-07")
    basis = {"scan_sha256": "0" * 64, "units": "cm", "mm_per_unit": 10.0,
             "scan_to_specimen": (np.eye(4) * [10, 10, 10, 1]).tolist(), "segmentation_id": segmentation_id(seg),
             "n_boundaries": len(seg.boundaries)}
    (folder / "review.json").write_text(json.dumps(_review(basis, sha="0" * 64)), encoding="utf-8")
    server = serve(folder, open_browser=False, segmentation=seg, rerun=lambda f: None)
    try:
        state = server.app.state()
        assert state["set_apart"] and any("units cm" in r for r in state["set_apart"]["reasons"])
        assert state["n_edits"] == 0
    finally:
        server.stop()
    # and a segmentation with other boundaries (same scan and units) is refused too
    moved = dict(basis, units="mm", mm_per_unit=1.0, scan_to_specimen=np.eye(4).tolist(),
                 segmentation_id="seg-0123456789abcdef", n_boundaries=584)
    reasons = check_fit(_review(moved, sha="0" * 64), server.app.data.basis)
    assert len(reasons) == 1 and "seg-0123456789abcdef" in reasons[0] and "584" in reasons[0]
    assert check_fit(_review(server.app.data.basis, sha="0" * 64), server.app.data.basis) == []


# ---------------------------------------------------------------------------------------------- F9
def test_temporary_files_of_a_killed_save_are_removed(tmp_path):
    folder, seg, _ = make_folder(tmp_path / "KRB-07")
    for name in (".review.abc123.json", ".review.x_y.json"):
        (folder / name).write_text('{"half": ', encoding="utf-8")
    (folder / ".result.keep.json").write_text("not ours", encoding="utf-8")
    server = serve(folder, open_browser=False, segmentation=seg, rerun=lambda f: None)
    try:
        assert sorted(server.app.removed_temp) == [".review.abc123.json", ".review.x_y.json"]
        assert not list(folder.glob(".review.*.json")) and (folder / ".result.keep.json").exists()
        (folder / ".review.zz.json").write_text("{", encoding="utf-8")   # left while the server runs
        server.app.session.push({"op": "reject", "id": 2})
        server.app.save()
        assert not list(folder.glob(".review.*.json"))
        assert read_review(folder)["edits"][0]["id"] == 2
    finally:
        server.stop()


def test_many_parallel_attack_requests_leave_the_server_serving(served):
    """A burst of forged and malformed requests from many threads: all refused, none changes state,
    and the page's own request afterwards is served."""
    server, folder, _ = served
    bad = [(b'{"edit": {"op": [1]}}', {"Content-Type": "text/plain"}),
           (b'{"edit": {"op": "reject", "id": 1}}', {"Cookie": f"bandgeo_review={server.app.token}",
                                                     "Content-Type": "application/json"})]
    statuses = []

    def worker():
        for body, headers in bad * 5:
            statuses.append(send(server, "POST", "/api/edit", body=body, headers=headers)[0])

    threads = [threading.Thread(target=worker) for _ in range(8)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert statuses and all(s in (403, 415) for s in statuses)
    assert server.app.session.edits == [] and not (folder / "review.json").exists()
    assert send(server, "GET", "/api/state", headers={"X-Review-Token": server.app.token})[0] == 200


# ---------------------------------------------------------------------------------------------- kills
def test_a_save_killed_at_any_moment_never_leaves_a_half_written_review(tmp_path):
    """A process saving reviews over and over is killed (SIGKILL) at pseudo-random moments, 12 times:
    each time review.json is either absent or a whole review, and the next save or server start
    removes the temporary files the killed save left."""
    import random
    import subprocess
    import sys
    import textwrap

    from bandgeo.review.store import clean_temp_files

    script = textwrap.dedent(f"""
        from bandgeo.review.store import save_review
        i = 0
        print("go", flush=True)
        while True:
            edits = [{{"op": "note", "text": "save %d item %d " % (i, j) + "x" * 400}} for j in range(i % 40 + 1)]
            save_review({str(tmp_path)!r}, {{"edits": edits}})
            i += 1
    """)
    rng = random.Random(20261202)
    for _ in range(12):
        proc = subprocess.Popen([sys.executable, "-c", script], stdout=subprocess.PIPE, stderr=subprocess.PIPE)
        try:
            assert proc.stdout.readline().strip() == b"go"
            time.sleep(rng.uniform(0.05, 0.6))
        finally:
            proc.kill()
            proc.wait(30)
        review = read_review(tmp_path)            # raises on a half-written file
        assert review is None or (review["edits"] and review["history"][-1]["edits_after"] == len(review["edits"]))
    clean_temp_files(tmp_path)
    assert not list(tmp_path.glob(".review.*.json"))
    # review.json, or nothing if no save ever finished before its kill (a slow disk under load)
    assert {p.name for p in tmp_path.iterdir()} <= {"review.json"}


def test_cross_site_reads_are_refused_but_opening_the_address_is_not(served):
    server, *_ = served
    tok = {"X-Review-Token": server.app.token}
    status, _ = send(server, "GET", "/api/state", headers={**tok, "Sec-Fetch-Site": "cross-site",
                                                          "Sec-Fetch-Mode": "cors"})
    assert status == 403
    status, _ = send(server, "GET", "/api/mesh", headers={**tok, "Origin": "http://localhost:9999"})
    assert status == 403
    status, page = send(server, "GET", "/?token=" + server.app.token,
                        headers={"Sec-Fetch-Site": "cross-site", "Sec-Fetch-Mode": "navigate"})
    assert status == 200 and b"review.js" in page
    status, _ = send(server, "POST", "/api/edit", body=b'{"edit": {"op": "reject", "id": 1}}',
                     headers={**tok, "Content-Type": "application/json", "Sec-Fetch-Site": "cross-site",
                              "Sec-Fetch-Mode": "navigate"})
    assert status == 403 and server.app.session.edits == []
