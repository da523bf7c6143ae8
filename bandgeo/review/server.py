"""The local review web server: loopback only, a token on every request, fixed files only.

``serve`` starts a standard-library ``ThreadingHTTPServer`` in a background thread and returns it;
``run`` serves until Ctrl-C. After each save the analysis downstream of the segmentation is re-run from
a worker thread, by default in a worker process of its own (``bandgeo.review.app.ProcessRerun``, so
that the request threads stay quick) unless another callable is given, and the page polls
``/api/status`` (stage, progress); a failed re-run keeps the last good result and shows the error line.
"""
from __future__ import annotations

import hmac
import json
import os
import secrets
import signal
import socket
import sys
import threading
import time
import urllib.parse
from http import HTTPStatus
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from importlib import resources
from pathlib import Path

from ..errors import BandgeoError, ParameterError, ReviewError
from .app import ReviewApp

LOOPBACK = ("127.0.0.1", "::1", "localhost")
MAX_BODY = 16 * 1024
COOKIE = "bandgeo_review"
#: The header that must carry the token on every state-changing call (a cookie alone is not enough:
#: browsers send cookies to every port of 127.0.0.1, so another local page could ride on it).
TOKEN_HEADER = "X-Review-Token"
#: Seconds a connection may take from its accept to the end of its request headers.
HEADER_TIMEOUT = 5.0
#: Seconds any single read may wait (the body, once the headers are in).
READ_TIMEOUT = 10.0
JS = "text/javascript; charset=utf-8"
STATIC = {"/": ("index.html", "text/html; charset=utf-8"),
          "/static/review.js": ("review.js", JS),
          "/static/view3d.js": ("view3d.js", JS),
          "/static/vendor/three.module.min.js": ("vendor/three.module.min.js", JS),
          "/static/review.css": ("review.css", "text/css; charset=utf-8")}
POSTS = ("/api/edit", "/api/undo", "/api/redo", "/api/save", "/api/set-aside")
CSP = ("default-src 'none'; script-src 'self'; style-src 'self'; img-src 'self' data: blob:; "
       "connect-src 'self'; base-uri 'none'; form-action 'none'; frame-ancestors 'none'")


class Handler(BaseHTTPRequestHandler):
    """One request: check host and token, then a fixed route. Never builds a path from the URL."""

    server_version = "bandgeo-review"
    sys_version = ""
    timeout = READ_TIMEOUT  # seconds any one read may take; the server also caps the header phase
    app: ReviewApp = None  # set per server

    def log_message(self, fmt, *args):  # quiet: the CLI prints the URL and errors only
        pass

    def parse_request(self):
        self._replied = False
        ok = super().parse_request()
        self.server.headers_done(self.connection)
        return ok

    def send_error(self, code, message=None, explain=None):
        """Protocol-level errors (bad request line, headers too long, ...) as one-line JSON too."""
        try:
            short, _ = self.responses.get(code, ("error", ""))
        except Exception:  # pragma: no cover - responses is a plain dict
            short = "error"
        text = " ".join(str(message or short).split())[:300]
        self.close_connection = True
        if getattr(self, "request_version", "HTTP/0.9") in (None, "HTTP/0.9"):
            self.request_version = "HTTP/1.0"  # so that the status line and headers are sent
        try:
            self._json(code, {"error": f"{text}; send one well-formed HTTP/1.1 request"})
        except Exception:  # the client is gone
            pass

    # -- helpers -----------------------------------------------------------------------------------
    def _send(self, status, body: bytes, ctype="application/json; charset=utf-8", extra=None):
        if getattr(self, "_replied", False):
            return
        self._replied = True
        if not hasattr(self, "_headers_buffer"):
            self._headers_buffer = []
        if getattr(self, "request_version", None) is None:
            self.request_version = "HTTP/1.0"
        self.send_response(status)
        self.send_header("Content-Type", ctype)
        self.send_header("Content-Length", str(len(body)))
        self.send_header("Cache-Control", "no-store")
        self.send_header("X-Content-Type-Options", "nosniff")
        self.send_header("Referrer-Policy", "no-referrer")
        self.send_header("Content-Security-Policy", CSP)
        for key, value in (extra or {}).items():
            self.send_header(key, value)
        self.end_headers()
        if self.command != "HEAD":
            self.wfile.write(body)

    def _json(self, status, obj, extra=None):
        self._send(status, json.dumps(obj, allow_nan=False).encode("utf-8"), extra=extra)

    def _error(self, status, message):
        self._json(status, {"error": message})

    def _authorised(self, query, header_only=False) -> bool:
        """The token matches. State-changing calls must send it in the header; a page load may give it
        in the address (first load) or the cookie the page then keeps."""
        token = self.app.token.encode()
        offered = [self.headers.get(TOKEN_HEADER, "")]
        if not header_only:
            offered += query.get("token", [])
            cookie = self.headers.get("Cookie", "")
            for part in cookie.split(";"):
                name, _, value = part.strip().partition("=")
                if name == COOKIE:
                    offered.append(value)
        return any(hmac.compare_digest(str(o).encode("utf-8", "replace"), token) for o in offered if o)

    def _origin_ok(self) -> bool:
        """A browser's Origin (when sent) must be this server's own address; a fetch from another
        site or port is refused even on GET. Requests without Origin (curl, the page's own GETs) pass."""
        origin = self.headers.get("Origin")
        if origin is not None and origin.strip().lower() not in self._own_origins():
            return False
        site = (self.headers.get("Sec-Fetch-Site") or "").strip().lower()
        mode = (self.headers.get("Sec-Fetch-Mode") or "").strip().lower()
        if self.command == "GET" and mode == "navigate":
            return True  # opening the printed address from another page or app is fine (token still needed)
        return site not in ("cross-site", "same-site")

    def _own_origins(self) -> set:
        port = self.server.server_address[1]
        return {f"http://127.0.0.1:{port}", f"http://localhost:{port}", f"http://[::1]:{port}"}

    def _host_ok(self) -> bool:
        host = (self.headers.get("Host") or "").strip().lower()
        port = self.server.server_address[1]
        return host in {f"127.0.0.1:{port}", f"localhost:{port}", f"[::1]:{port}"}

    def _gate(self, changing=False):
        """Parse the URL and check host, origin and token (and, for a state-changing call, that the
        token came in the header and the body is declared JSON); return (path, query) or None after an
        error reply."""
        try:
            parsed = urllib.parse.urlsplit(self.path)
            query = urllib.parse.parse_qs(parsed.query, max_num_fields=20)
        except ValueError:
            self._error(HTTPStatus.BAD_REQUEST, "the address cannot be parsed; open the address the command printed")
            return None
        if not self._host_ok():
            self._error(HTTPStatus.FORBIDDEN, "wrong Host header; open the address the command printed")
            return None
        if not self._origin_ok():
            self._error(HTTPStatus.FORBIDDEN, "request from another site or port refused; use the review page "
                                              "itself")
            return None
        if not self._authorised(query, header_only=changing):
            where = f"in the {TOKEN_HEADER} header" if changing else ""
            self._error(HTTPStatus.FORBIDDEN, f"missing or wrong token {where}; open the address the command "
                                              f"printed".replace("  ", " "))
            return None
        if changing:
            ctype = (self.headers.get("Content-Type") or "").split(";")[0].strip().lower()
            if ctype != "application/json":
                self._error(HTTPStatus.UNSUPPORTED_MEDIA_TYPE,
                            f"expected Content-Type application/json but got {ctype or 'none'}; "
                            f"send the body as JSON")
                return None
        return parsed.path, query

    def _body(self):
        if "Transfer-Encoding" in self.headers:
            self._error(HTTPStatus.LENGTH_REQUIRED, "send the body with a Content-Length, not chunked")
            return None
        length = self.headers.get("Content-Length")
        if length is None:
            length = "0"
        try:
            n = int(length)
            if n < 0:
                raise ValueError
        except ValueError:
            self._error(HTTPStatus.BAD_REQUEST, f"bad Content-Length {length!r}")
            return None
        if n > MAX_BODY:
            self.close_connection = True
            self._error(HTTPStatus.REQUEST_ENTITY_TOO_LARGE,
                        f"request body of {n} bytes is over the {MAX_BODY}-byte limit; send one edit at a time")
            return None
        data = self.rfile.read(n) if n else b""
        if not data:
            return {}
        try:
            body = json.loads(data.decode("utf-8"))
        except (UnicodeDecodeError, ValueError) as exc:  # ValueError: also numbers over the digit limit
            msg = " ".join(str(exc).split())[:120]
            self._error(HTTPStatus.BAD_REQUEST, f"the request body is not valid JSON ({msg}); send a JSON object")
            return None
        except RecursionError:
            self._error(HTTPStatus.BAD_REQUEST, "the request body nests too deeply; send one flat edit object")
            return None
        if not isinstance(body, dict):
            self._error(HTTPStatus.BAD_REQUEST, "expected a JSON object as the request body")
            return None
        return body

    # -- methods -----------------------------------------------------------------------------------
    def do_GET(self):
        try:
            self._get()
        except Exception as exc:  # never a traceback: one line to the client and to the terminal
            self._internal(exc)

    def _internal(self, exc):
        if isinstance(exc, (ConnectionError, TimeoutError, BrokenPipeError)):
            self.close_connection = True  # the client went away; nothing to tell anyone
            return
        line = f"internal error: {type(exc).__name__}: {' '.join(str(exc).split())[:200]}"
        print(f"bandgeo review: {line}", file=sys.stderr)
        self.close_connection = True
        try:
            self._error(HTTPStatus.INTERNAL_SERVER_ERROR, line + "; please report it")
        except Exception:
            pass

    def _get(self):
        gate = self._gate()
        if gate is None:
            return
        path, query = gate
        try:
            if path in STATIC:
                name, ctype = STATIC[path]
                body = resources.files("bandgeo.review").joinpath("static", *name.split("/")).read_bytes()
                extra = {}
                if path == "/":
                    extra["Set-Cookie"] = f"{COOKIE}={self.app.token}; Path=/; HttpOnly; SameSite=Strict"
                self._send(HTTPStatus.OK, body, ctype, extra)
            elif path == "/favicon.ico":
                self._send(HTTPStatus.NO_CONTENT, b"", "image/x-icon")
            elif path == "/api/state":
                self._json(HTTPStatus.OK, self.app.state())
            elif path == "/api/status":
                self._json(HTTPStatus.OK, self.app.rerun_status())
            elif path == "/api/mesh":
                self._json(HTTPStatus.OK, self.app.data.mesh_payload())
            elif path == "/api/surface":
                self._json(HTTPStatus.OK, self.app.data.surface_payload())
            else:
                self._error(HTTPStatus.NOT_FOUND, "no such page")
        except BandgeoError as exc:
            self._error(HTTPStatus.INTERNAL_SERVER_ERROR, str(exc))

    do_HEAD = do_GET

    def do_POST(self):
        try:
            self._post()
        except Exception as exc:
            self._internal(exc)

    def _post(self):
        gate = self._gate(changing=True)
        if gate is None:
            return
        path, _ = gate
        if path not in POSTS:
            self._error(HTTPStatus.NOT_FOUND, "no such action")
            return
        body = self._body()
        if body is None:
            return
        app = self.app
        try:
            if path == "/api/edit":
                edit = body.get("edit")
                done = app.session.push(edit)
                self._json(HTTPStatus.OK, {"edit": done, "state": app.state()})
            elif path == "/api/set-aside":
                name = app.set_aside()
                self._json(HTTPStatus.OK, {"renamed_to": name, "state": app.state()})
            elif path in ("/api/undo", "/api/redo"):
                changed = app.session.undo() if path == "/api/undo" else app.session.redo()
                self._json(HTTPStatus.OK, {"changed": changed, "state": app.state()})
            elif app.set_apart is not None:
                app.save()  # raises the one-line refusal
            else:
                written = app.save()
                self._json(HTTPStatus.OK, {"saved_utc": written["updated_utc"],
                                           "n_edits": len(written["edits"]), "state": app.state()})
        except ReviewError as exc:
            status = HTTPStatus.CONFLICT if app.set_apart is not None and path == "/api/save" else \
                HTTPStatus.BAD_REQUEST
            self._error(status, " ".join(str(exc).split()))
        except BandgeoError as exc:
            self._error(HTTPStatus.INTERNAL_SERVER_ERROR, " ".join(str(exc).split()))

    def _refuse(self):
        self._error(HTTPStatus.METHOD_NOT_ALLOWED, "only GET and POST are used here")

    do_PUT = do_DELETE = do_PATCH = do_OPTIONS = _refuse


class ReviewServer(ThreadingHTTPServer):
    """The HTTP server plus the app and the page address (``url``, with its token)."""

    daemon_threads = True
    allow_reuse_address = os.name != "nt"  # restart on the same port at once (POSIX semantics)
    request_queue_size = 16

    #: Connections served at once. When all are taken, the one that has waited longest for its headers
    #: is closed to make room, so idle or slow connections cannot lock the page out.
    max_connections = 32
    header_timeout = HEADER_TIMEOUT

    def __init__(self, address, app: ReviewApp):
        handler = type("BoundHandler", (Handler,), {"app": app})
        super().__init__(address, handler)
        self._slots = threading.BoundedSemaphore(self.max_connections)
        self._waiting: dict = {}           # socket -> time accepted, until its headers are in
        self._waiting_lock = threading.Lock()
        self.app = app
        host, port = self.server_address[:2]
        shown = f"[{host}]" if ":" in host else host
        self.url = f"http://{shown}:{port}/?token={app.token}"
        self.thread: threading.Thread | None = None

    def headers_done(self, sock) -> None:
        with self._waiting_lock:
            self._waiting.pop(sock, None)

    def _drop(self, sock) -> None:
        try:
            sock.shutdown(socket.SHUT_RDWR)  # its thread's read returns at once and the slot frees
        except OSError:
            pass

    def _evict_oldest(self) -> bool:
        with self._waiting_lock:
            if not self._waiting:
                return False
            sock = min(self._waiting, key=self._waiting.get)
            self._waiting.pop(sock)
        self._drop(sock)
        return True

    def service_actions(self):
        """Called by serve_forever between polls: close connections still without headers after
        ``header_timeout`` seconds (a slow sender cannot hold a slot by trickling bytes)."""
        now = time.monotonic()
        with self._waiting_lock:
            late = [s for s, t in self._waiting.items() if now - t > self.header_timeout]
            for sock in late:
                self._waiting.pop(sock)
        for sock in late:
            self._drop(sock)

    def process_request(self, request, client_address):
        got = self._slots.acquire(blocking=False)
        while not got and self._evict_oldest():
            got = self._slots.acquire(timeout=1.0)
        if not got:
            got = self._slots.acquire(timeout=1.0)
        if not got:  # every slot is busy with a real request: refuse rather than queue forever
            try:
                body = b'{"error": "the review server is busy; try again shortly"}\n'
                request.sendall(b"HTTP/1.0 503 Service Unavailable\r\nContent-Type: application/json\r\n"
                                b"Content-Length: " + str(len(body)).encode() + b"\r\n\r\n" + body)
            except OSError:
                pass
            self.shutdown_request(request)
            return
        with self._waiting_lock:
            self._waiting[request] = time.monotonic()
        try:
            super().process_request(request, client_address)
        except Exception:
            self.headers_done(request)
            self._slots.release()
            raise

    def process_request_thread(self, request, client_address):
        try:
            super().process_request_thread(request, client_address)
        finally:
            self.headers_done(request)
            self._slots.release()

    def handle_error(self, request, client_address):
        """A connection that fails outside a handler (reset by the client...): one line, no traceback."""
        exc = sys.exc_info()[1]
        if exc is not None and not isinstance(exc, (ConnectionError, TimeoutError, OSError)):
            print(f"bandgeo review: connection error: {type(exc).__name__}: {exc}", file=sys.stderr)

    def stop(self, wait_rerun: float = 30.0) -> None:
        """Stop serving, close the socket, and let a running re-run finish (up to ``wait_rerun`` s)."""
        self.shutdown()
        self.server_close()
        self.app.wait(wait_rerun)
        warm = getattr(self, "warm_thread", None)
        if warm is not None:  # let the page-data preparation finish (native code dislikes exiting mid-way);
            warm.join(wait_rerun)  # before the close below: it may still be starting the re-run's worker
        close = getattr(self.app.rerun, "close", None)
        if callable(close):  # the re-run's worker process
            close(wait_rerun)
        if self.thread is not None:
            self.thread.join(5)


class ReviewServer6(ReviewServer):
    address_family = socket.AF_INET6


def serve(folder, host="127.0.0.1", port=0, open_browser=True, token=None, *, rerun=None,
          segmentation=None) -> ReviewServer:
    """Serve the review page of an analysed folder from a background thread.

    Parameters
    ----------
    folder : path
        The analysed specimen folder (``bandgeo analyze`` output).
    host : str
        Loopback only: "127.0.0.1" (default), "::1" or "localhost".
    port : int
        0 picks a free port.
    open_browser : bool
        Open the page in the default browser.
    token : str, optional
        The access token (default: a fresh random one).
    rerun : callable, optional
        ``rerun(folder) -> AnalysisState`` called after each save (default: a
        ``bandgeo.review.app.ProcessRerun``, the pipeline's re-run in a worker process).
    segmentation : Segmentation, optional
        Use this instead of loading ``segmentation.json``.

    Returns
    -------
    ReviewServer
        Running; ``.url`` is the page address with its token, ``.stop()`` shuts it down.
    """
    if host not in LOOPBACK:
        raise ParameterError(f"the review page binds the loopback address only; expected one of "
                             f"{', '.join(LOOPBACK)} but got {host!r}")
    if not isinstance(port, int) or not 0 <= port <= 65535:
        raise ParameterError(f"expected a port between 0 and 65535 but got {port!r}")
    folder = Path(folder)
    if not folder.is_dir():
        raise ReviewError(f"{folder} is not a folder; give the folder written by 'bandgeo analyze'")
    token = token or secrets.token_urlsafe(24)
    app = ReviewApp(folder, token, rerun=rerun, segmentation=segmentation)
    address = "127.0.0.1" if host == "localhost" else host
    cls = ReviewServer6 if address == "::1" else ReviewServer
    try:
        server = cls((address, port), app)
    except OSError as exc:
        raise ParameterError(f"cannot listen on {address}:{port} ({exc.strerror}); pick another --port "
                             f"or leave it out for a free one") from None
    server.thread = threading.Thread(target=server.serve_forever, kwargs={"poll_interval": 0.2},
                                     name="bandgeo-review-http", daemon=True)
    server.thread.start()
    # Prepare the heavy page data (decimated mesh, unrolled surface) while the browser starts.
    server.warm_thread = threading.Thread(target=_warm, args=(app.data, app.rerun, app.folder),
                                          name="bandgeo-review-warm", daemon=True)
    server.warm_thread.start()
    if open_browser:
        import webbrowser

        threading.Thread(target=webbrowser.open, args=(server.url,), daemon=True).start()
    return server


def _warm(data, rerun=None, folder=None) -> None:
    try:
        data.surface_payload()
        data.mesh_payload()
        if hasattr(rerun, "warm"):
            rerun.warm(folder)  # the re-run's inputs, so that the first save starts at once
    except Exception:  # the request or save that needs it reports the error
        pass


#: The longest the terminal's warm-up bar waits for the re-run worker (the page is served meanwhile).
WARM_UP_WAIT_S = 300.0
#: Each wait for the worker is this long at most, so that SIGTERM is heard between two.
_WARM_UP_SLICE_S = 0.5


def _warm_up_bar(app, stop: threading.Event) -> bool:
    """Draw the re-run's warm-up on the terminal (``bandgeo.progress.bar``: on a tty only, with the time
    left) until the worker is ready, ``stop`` is set or :data:`WARM_UP_WAIT_S` has passed; True when it
    is ready. Only for a re-run that can be waited for (``wait_ready``). The page is served by other
    threads meanwhile; Ctrl-C reaches the caller. A failure here only leaves the bar out."""
    rerun = getattr(app, "rerun", None)
    wait = getattr(rerun, "wait_ready", None)
    if wait is None:
        return False
    from .. import progress as _progress

    try:
        if hasattr(rerun, "warm"):
            rerun.warm(app.folder)  # started already by the page's warm-up thread, or now (idempotent)
        deadline = time.monotonic() + WARM_UP_WAIT_S
        with _progress.bar("warm-up") as cb:
            while not stop.is_set() and time.monotonic() < deadline:
                began = time.monotonic()
                if wait(timeout=_WARM_UP_SLICE_S, progress=cb):
                    return True
                if time.monotonic() - began < _WARM_UP_SLICE_S / 2:
                    return False  # it answered at once without being ready: the worker has ended
    except Exception:  # the save that needs the worker reports its error
        return False
    return False


def run(folder, host="127.0.0.1", port=0, open_browser=True, token=None, echo=print, **kwargs) -> int:
    """Serve until Ctrl-C (or SIGTERM), then stop cleanly; returns 0."""
    server = serve(folder, host=host, port=port, open_browser=open_browser, token=token, **kwargs)
    stop = threading.Event()

    def _term(signum, frame):
        stop.set()

    previous = None
    try:
        if threading.current_thread() is threading.main_thread():
            previous = signal.signal(signal.SIGTERM, _term)
        echo(f"Review page for {server.app.data.specimen_id}: {server.url}")
        app = server.app
        if app.removed_temp:
            echo(f"Removed {len(app.removed_temp)} temporary file(s) left by an interrupted save.")
        if app.set_apart is not None:
            echo(f"warning: review.json here belongs to {app.set_apart['belongs_to']} and does not fit this "
                 f"folder ({'; '.join(app.set_apart['reasons'])}); it is not shown or applied. The page "
                 f"offers to set it aside.")
        echo("Press Ctrl-C to stop.")
        _warm_up_bar(app, stop)
        while not stop.wait(0.5):
            pass
    except KeyboardInterrupt:
        pass
    finally:
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)
        server.stop()
    unsaved = " (unsaved edits were discarded)" if server.app.session.dirty else ""
    path = server.app.folder / "review.json"
    if server.app.set_apart is not None:
        where = f"{path} (another analysis's review) was left as it was"
    else:
        where = f"saved edits are in {path}" if path.exists() else "no review was saved"
    echo(f"Review server stopped{unsaved}; {where}.")
    return 0
