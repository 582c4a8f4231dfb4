"""HTML to PDF through WeasyPrint, and a handout of several parts joined into one file.

A handout for both audiences is two documents printed back to back: the person's
pages and the clinician's pages, each numbered on its own, because the person takes
one stack home and the clinic files the other.  Being separate documents, the two
parts can be laid out at the same time: when the machine has a second processor and
this process runs a single thread (the command line, a script), the clinician's part
is laid out in a forked child while this process lays out the person's part.

In a threaded host (the app's notebook kernel) a fork could copy a lock another
thread holds (the kernel's output streams, for one), and the other start methods
re-import the host's main module in every child, so there the parts are laid out one
after the other; likewise on one processor, without ``fork``, or with
``PRESCRIBE_PDF_PARALLEL=0``.  Either way the same pages come out; a child that
fails for any reason is not trusted and its part is laid out here instead.
"""

from __future__ import annotations

import gc
import io
import multiprocessing
import os
import threading
import traceback
from contextlib import contextmanager
from typing import Callable, Iterator, Sequence

#: Set to 0 to render the parts of a handout one after the other.
PARALLEL_ENV = "PRESCRIBE_PDF_PARALLEL"
#: How long to wait for a child's part before laying it out here instead [s].
CHILD_TIMEOUT_S = 120.0


def html_to_pdf(html: str, base_url: str | None = None) -> bytes:
    """One HTML document as PDF bytes (WeasyPrint)."""
    from weasyprint import HTML  # imported here: it takes about half a second

    return HTML(string=html, base_url=base_url).write_pdf()


@contextmanager
def collections_paused() -> Iterator[None]:
    """No garbage collection while a handout is laid out; everything is collected as usual after.

    Laying out a handout allocates hundreds of thousands of small objects, and each
    automatic collection also walks every object the process already had (the
    catalogue, pandas, the app): about a tenth of the PDF's time.  Objects that exist
    before are frozen out of collections and collection is off until the PDF is done;
    the cycles the layout leaves behind (a few tens of thousands of objects) are
    collected by the next automatic collection.  A host that had collection off keeps it
    off, and one that froze objects itself keeps them frozen.
    """
    was_enabled = gc.isenabled()
    freeze = gc.get_freeze_count() == 0  # a host that froze objects itself keeps them frozen
    if freeze:
        gc.freeze()
    gc.disable()
    try:
        yield
    finally:
        if freeze:
            gc.unfreeze()
        if was_enabled:
            gc.enable()


def side_by_side() -> bool:
    """Whether a part may be laid out in a forked child beside this process.

    See the module's docstring for when that is.
    """
    if os.environ.get(PARALLEL_ENV, "1").strip().lower() in ("0", "no", "false", "off"):
        return False
    if (os.cpu_count() or 1) < 2:
        return False  # nothing to gain
    # Forking a process that runs other threads can copy a lock another thread holds.
    return "fork" in multiprocessing.get_all_start_methods() and threading.active_count() == 1


def _child(html: str, base_url: str | None, conn) -> None:
    gc.disable()  # a short-lived process: its memory goes back when it exits
    try:
        conn.send(("ok", html_to_pdf(html, base_url)))
    except BaseException:  # noqa: BLE001 - reported to the parent, which renders the part itself
        conn.send(("error", traceback.format_exc()))
    finally:
        conn.close()


def _start_child(html: str, base_url: str | None) -> Callable[[], bytes | None]:
    """Render ``html`` in a forked child; the returned call waits and gives the bytes (None on failure)."""
    ctx = multiprocessing.get_context("fork")
    receive, send = ctx.Pipe(duplex=False)
    process = ctx.Process(target=_child, args=(html, base_url, send), daemon=True)
    process.start()  # inside collections_paused(): the child's collector skips what it inherited
    send.close()

    def result() -> bytes | None:
        kind, payload = "error", None
        try:
            # Receive before join (a full pipe would block the child); a child that gives no
            # answer in time is stopped and its part laid out here.
            if receive.poll(CHILD_TIMEOUT_S):
                kind, payload = receive.recv()
        except (EOFError, OSError):
            pass
        finally:
            receive.close()
            if process.is_alive() and kind != "ok":
                process.kill()
            process.join()
        return payload if kind == "ok" and process.exitcode == 0 else None

    return result


def render_parts(htmls: Sequence[str], base_url: str | None = None, parallel: bool | None = None) -> list[bytes]:
    """Each HTML document as PDF bytes, all but the first in children when allowed.

    ``parallel`` None decides with :func:`side_by_side`; False lays them out in turn
    here; True forks even where :func:`side_by_side` would not (tests).
    """
    htmls = list(htmls)
    fork = side_by_side() if parallel is None else parallel
    with collections_paused():
        if not fork or len(htmls) < 2:
            return [html_to_pdf(h, base_url) for h in htmls]
        waits = []
        for html in htmls[1:]:
            try:
                waits.append(_start_child(html, base_url))
            except Exception:  # noqa: BLE001 - no child: this part is laid out here below
                waits.append(lambda: None)
        try:
            first = html_to_pdf(htmls[0], base_url)
        finally:
            answers = [wait() for wait in waits]  # every child is reaped, even if the first part failed
        return [first] + [data if data is not None else html_to_pdf(html, base_url)
                          for html, data in zip(htmls[1:], answers)]


def join_pdfs(parts: Sequence[bytes]) -> bytes:
    """PDF files joined page after page into one; the first part's metadata and every outline kept."""
    if len(parts) == 1:
        return parts[0]
    from pypdf import PdfReader, PdfWriter

    writer = PdfWriter()
    readers = [PdfReader(io.BytesIO(part)) for part in parts]
    for reader in readers:
        writer.append(reader)
    if readers[0].metadata:
        writer.add_metadata({k: v for k, v in readers[0].metadata.items() if isinstance(v, str)})
    out = io.BytesIO()
    writer.write(out)
    return out.getvalue()
