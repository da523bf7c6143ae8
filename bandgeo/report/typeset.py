"""Typeset the PDF in a second process while this one draws the figures.

WeasyPrint is pure Python for the most part: importing it and loading its fonts takes about a second,
and typesetting the report another second or so. None of that needs the figures until the page is
complete, so the report forks a helper at its start: the helper imports WeasyPrint and typesets a small
page with the report's fonts (warm-up) while the parent draws the figures on the other core; the parent
then sends the finished page and writes the CSV and PLY files while the helper typesets. The helper
returns the PDF's bytes; the parent writes the file (atomically, like every output).

Helpers are used where ``fork`` exists (Linux) and, by default, only while the machine is not already
busy (:func:`fork_allowed`; ``BANDGEO_REPORT_FORK=1`` or ``0`` forces the choice). Anything unusual (a
helper that dies, answers with an error or takes longer than :data:`TIMEOUT_S`) falls back on
typesetting in this process, which gives the same bytes or the same error as before.
"""
from __future__ import annotations

import os
import select
import struct
import sys
import time

#: Seconds the parent waits for the helper's PDF before typesetting it itself.
TIMEOUT_S = 300.0

#: A small page using the report's fonts and a text-bearing SVG, typeset once to warm WeasyPrint's
#: font loading and CSS machinery before the real page arrives.
WARM_HTML = """<!DOCTYPE html><html><head><meta charset="utf-8"><style>
@page { size: A4; margin: 18mm 16mm 20mm 16mm;
        @bottom-center { content: "page " counter(page) " of " counter(pages); font: 8pt "DejaVu Sans"; } }
body { font: 9.5pt/1.4 "DejaVu Sans", sans-serif; } h2 { font-size: 13pt; } .mono { font-family: "DejaVu Sans Mono"; }
table { border-collapse: collapse; width: 100%; } td { border-bottom: 1px solid #ccc; }
</style></head><body><h2>warm-up</h2><p><b>bold</b> <i>italic</i> <span class="mono">mono 0123</span> ± ° ×10⁻³</p>
<table><tr><td>key</td><td>value 1.0 mm</td></tr></table>
<img style="width:50%" src="data:image/svg+xml;charset=utf-8,%3Csvg xmlns='http://www.w3.org/2000/svg'
 width='100' height='40' viewBox='0 0 100 40'%3E%3Cpath d='M0 0 L100 40' stroke='black'/%3E%3Ctext x='5' y='20'
 style='font: 8px %27DejaVu Sans%27'%3E10⁻² mm%3C/text%3E%3C/svg%3E"></body></html>"""


def fork_allowed() -> bool:
    """True where helper processes are used: Linux ``fork``, and ``BANDGEO_REPORT_FORK`` set to ``1``
    (always), ``0`` (never) or unset / ``auto``: only while the machine is not busy with other work.

    Helpers win wall time only when a core would otherwise sit idle; they cost some CPU of their own
    (a second matplotlib, WeasyPrint's warm-up), so on a machine already loaded by other jobs the report
    runs in one process. Measured on this project's 2-core machine at 2.1 M faces, loads 4-8: in-process
    7.4-13.3 s, with helpers 7.8-15.2 s (medians of three paired runs, benchmarks/bench_report.py).
    """
    if not (hasattr(os, "fork") and sys.platform.startswith("linux")):
        return False
    mode = os.environ.get("BANDGEO_REPORT_FORK", "auto").strip().lower()
    if mode in ("0", "no", "false", "off"):
        return False
    if mode in ("1", "yes", "true", "on"):
        return True
    return machine_has_room()


def machine_has_room() -> bool:
    """True when the 1-minute load average is below the usable cores plus a half (this job's own
    threads account for up to about the core count)."""
    try:
        cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
        return cores >= 2 and os.getloadavg()[0] < cores + 0.5
    except OSError:
        return False


def _quiet_child() -> None:
    """In a forked child: fresh stdout/stderr objects on /dev/null. A thread of the parent (a progress
    display, a web server) may have held their locks at the fork; the child must never wait on them,
    and has nothing to print (failures go back through the pipe)."""
    try:
        sink = open(os.devnull, "w", encoding="utf-8")
        sys.stdout = sys.stderr = sink
    except OSError:
        pass


def _write_all(fd: int, data: bytes) -> None:
    view = memoryview(data)
    while view:
        n = os.write(fd, view)
        view = view[n:]


def _read_exact(fd: int, n: int, deadline: float | None = None) -> bytes | None:
    chunks, got = [], 0
    while got < n:
        if deadline is not None:
            left = deadline - time.monotonic()
            if left <= 0 or not select.select([fd], [], [], left)[0]:
                return None
        chunk = os.read(fd, min(n - got, 1 << 20))
        if not chunk:
            return None
        chunks.append(chunk)
        got += len(chunk)
    return b"".join(chunks)


def _frame(*parts: bytes) -> bytes:
    return b"".join(struct.pack("<Q", len(p)) + p for p in parts)


def _read_reply(fd: int, n_parts: int, timeout: float | None, what: str):
    """A helper's answer: (parts, None) when it says ``K``; (None, reason) when it failed, hung or died."""
    wait = TIMEOUT_S if timeout is None else float(timeout)
    try:
        parts = _read_frame(fd, n_parts, deadline=time.monotonic() + wait)
    except OSError as exc:
        return None, f"reading from the {what} failed ({exc})"
    if parts is None:
        return None, f"the {what} process gave no answer"
    if parts[0] != b"K":
        return None, parts[1].decode("utf-8", "replace")
    return parts, None


def _read_frame(fd: int, n_parts: int, deadline: float | None = None) -> list[bytes] | None:
    out = []
    for _ in range(n_parts):
        head = _read_exact(fd, 8, deadline)
        if head is None:
            return None
        body = _read_exact(fd, struct.unpack("<Q", head)[0], deadline)
        if body is None:
            return None
        out.append(body)
    return out


def _child(r_page: int, w_pdf: int) -> None:
    from .pdf import pdf_bytes

    t0, c0 = time.perf_counter(), time.process_time()
    try:
        pdf_bytes(WARM_HTML)
    except Exception:  # noqa: BLE001 - the warm-up is optional; the real page will show any problem
        pass
    warm, warm_cpu = time.perf_counter() - t0, time.process_time() - c0
    parts = _read_frame(r_page, 2)
    if parts is None:                       # the parent gave up (or died): nothing to do
        return
    title, page = parts[0].decode("utf-8"), parts[1].decode("utf-8")
    t0, c0 = time.perf_counter(), time.process_time()
    try:
        data = pdf_bytes(page, title=title or None)
    except Exception as exc:  # noqa: BLE001 - reported to the parent, which typesets itself
        _write_all(w_pdf, _frame(b"E", f"{type(exc).__name__}: {exc}".encode("utf-8", "replace"), b""))
        return
    seconds = (f"{time.perf_counter() - t0:.6f} {warm:.6f} {time.process_time() - c0:.6f} "
               f"{warm_cpu:.6f}").encode("ascii")
    _write_all(w_pdf, _frame(b"K", seconds, data))


class Typesetter:
    """A forked helper that typesets one page into PDF bytes (see the module docstring).

    ``Typesetter.start()`` returns None where forking is not allowed. Then ``submit(page, title)`` once,
    ``result()`` for ``(pdf_bytes, seconds)`` or None if the helper failed
    (the caller typesets itself), and always ``close()`` (also a context manager).
    """

    def __init__(self, pid: int, w_page: int, r_pdf: int):
        self.pid, self._w_page, self._r_pdf = pid, w_page, r_pdf
        self.error: str | None = None
        self._sent = False
        self._sender = None

    @classmethod
    def start(cls) -> "Typesetter | None":
        if not fork_allowed():
            return None
        try:
            r_page, w_page = os.pipe()
            r_pdf, w_pdf = os.pipe()
        except OSError:
            return None
        try:
            pid = os.fork()
        except OSError:
            for fd in (r_page, w_page, r_pdf, w_pdf):
                os.close(fd)
            return None
        if pid == 0:                                    # the helper: never returns to the caller
            code = 1
            try:
                _quiet_child()
                os.close(w_page)
                os.close(r_pdf)
                _child(r_page, w_pdf)
                code = 0
            except BaseException:  # noqa: BLE001 - the parent notices the missing answer and typesets itself
                code = 1
            finally:
                os._exit(code)
        os.close(r_page)
        os.close(w_pdf)
        return cls(pid, w_page, r_pdf)

    def submit(self, page: str, title: str | None = None) -> bool:
        """Send the finished page (from a short-lived thread, so that the caller goes on with its own
        work while the helper may still be warming up); False if it cannot be sent."""
        if self._sent or self._w_page < 0:
            return False
        self._sent = True
        data = _frame((title or "").encode("utf-8"), page.encode("utf-8"))
        fd, self._w_page = self._w_page, -1

        def send():
            try:
                _write_all(fd, data)
            except OSError as exc:
                self.error = f"the PDF helper process could not take the page ({exc})"
            finally:
                os.close(fd)

        import threading

        self._sender = threading.Thread(target=send, name="bandgeo-pdf-page", daemon=True)
        self._sender.start()
        return True

    def result(self, timeout: float | None = None):
        """``(pdf_bytes, seconds)``, or None when the helper failed; ``seconds`` holds the helper's wall
        and CPU seconds: ``pdf`` and ``pdf_cpu`` typesetting the page, ``pdf_warm`` and ``pdf_warm_cpu``
        loading WeasyPrint and warming it up."""
        if not self._sent or self._r_pdf < 0:
            return None
        parts, error = _read_reply(self._r_pdf, 3, timeout, "PDF helper")
        if self._sender is not None:
            self._sender.join(timeout=5.0)
        if parts is None:
            self.error = self.error or error
            return None
        values = [float(x) for x in parts[1].split()]
        return parts[2], dict(zip(("pdf", "pdf_warm", "pdf_cpu", "pdf_warm_cpu"), values))

    def close(self) -> None:
        for attr in ("_w_page", "_r_pdf"):
            fd = getattr(self, attr)
            if fd >= 0:
                try:
                    os.close(fd)
                except OSError:
                    pass
                setattr(self, attr, -1)
        _reap(self.pid)
        self.pid = 0

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()
        return False


#: A PDF helper started ahead of the report (:func:`prestart`), with the process that started it.
_STARTED: dict = {}


def prestart() -> bool:
    """Start the PDF helper now, ahead of the report, so that WeasyPrint's import and warm-up (about 2 s
    of one core) run while this process is busy with the stages before the report (the pipeline calls
    this as the measurement starts). The report takes it with :func:`take_started`; a helper never taken
    is closed by :func:`discard_started`. True when a helper is waiting."""
    entry = _STARTED.get("helper")
    if entry is not None and entry[0] == os.getpid():
        return True
    helper = Typesetter.start()
    if helper is None:
        return False
    _STARTED["helper"] = (os.getpid(), helper)
    return True


def take_started() -> "Typesetter | None":
    """The helper :func:`prestart` started in this process (and forget it), or None."""
    entry = _STARTED.pop("helper", None)
    if entry is None or entry[0] != os.getpid():   # none, or inherited through a fork: not ours
        return None
    return entry[1]


def discard_started() -> None:
    """Close a helper started by :func:`prestart` and never taken (a run that failed or wrote no PDF)."""
    helper = take_started()
    if helper is not None:
        helper.close()


class Forked:
    """Run ``fn() -> bytes`` in a forked child while this process does something else.

    ``Forked.start(fn)`` returns None where forking is not allowed (see :func:`fork_allowed`);
    ``result(timeout)`` gives the bytes, or None if the child failed, died or timed out (the caller then
    runs ``fn`` itself); always ``close()``. The report draws its vector plots this way while it draws
    the specimen figure: both are mostly single-threaded Python and the machine has two cores.
    """

    def __init__(self, pid: int, r_out: int):
        self.pid, self._r_out = pid, r_out
        self.error: str | None = None

    @classmethod
    def start(cls, fn) -> "Forked | None":
        if not fork_allowed():
            return None
        try:
            r_out, w_out = os.pipe()
        except OSError:
            return None
        try:
            pid = os.fork()
        except OSError:
            os.close(r_out)
            os.close(w_out)
            return None
        if pid == 0:
            code = 1
            try:
                _quiet_child()
                os.close(r_out)
                try:
                    data = fn()
                    _write_all(w_out, _frame(b"K", data))
                except Exception as exc:  # noqa: BLE001 - reported; the parent runs fn itself
                    _write_all(w_out, _frame(b"E", f"{type(exc).__name__}: {exc}".encode("utf-8", "replace")))
                code = 0
            except BaseException:  # noqa: BLE001
                code = 1
            finally:
                os._exit(code)
        os.close(w_out)
        return cls(pid, r_out)

    def result(self, timeout: float | None = None) -> bytes | None:
        if self._r_out < 0:
            return None
        parts, error = _read_reply(self._r_out, 2, timeout, "helper")
        if parts is None:
            self.error = self.error or error
            return None
        return parts[1]

    def close(self) -> None:
        if self._r_out >= 0:
            try:
                os.close(self._r_out)
            except OSError:
                pass
            self._r_out = -1
        _reap(self.pid)
        self.pid = 0


def _reap(pid: int) -> None:
    if not pid:
        return
    try:
        done, _ = os.waitpid(pid, os.WNOHANG)
        if done == 0:
            import signal

            os.kill(pid, signal.SIGKILL)
            os.waitpid(pid, 0)
    except (ChildProcessError, ProcessLookupError, OSError):
        pass
