"""``prescribe app [--port 8866] [--db URL]``: serve the clinic app with Voila on 127.0.0.1.

The page uses our offline template (no request leaves the machine).  The server is sized
to the machine (prescribe.ui.server): a few preheated kernels, a limit on kernels alive at
once past which a page says the server is busy and retries, execution timeouts that fit a
loaded machine, and idle kernels culled (a kernel with an open page is never culled).  The
store is the one named by ``--db``, then ``PRESCRIBE_DB``; the app's kernels inherit it.
"""

from __future__ import annotations

import json
import os
import socket
import sys
import tempfile
from pathlib import Path

from ..errors import InputError, PrescribeError
from ..settings import db_url

DEFAULT_PORT = 8866
TEMPLATE_NAME = "prescribe-offline"
#: Environment variable: a cell-execution timeout [s] other than the default (tests use a
#: short one to check what a page shows when its kernel does not answer).
CELL_TIMEOUT_ENV = "PRESCRIBE_APP_CELL_TIMEOUT_S"


def register(sub) -> None:
    p = sub.add_parser("app", help="serve the clinic app (Voila) on 127.0.0.1")
    p.add_argument("--port", type=int, default=DEFAULT_PORT, help=f"port on 127.0.0.1 (default {DEFAULT_PORT})")
    p.add_argument("--db", default=None, help="the store (path or database URL); default PRESCRIBE_DB")
    p.add_argument("--max-pages", type=int, default=None, metavar="N",
                   help="pages (kernels) open at once at most; past it a page says the server is busy and "
                        "retries (default: from the machine's memory)")
    p.add_argument("--pool", type=int, default=None, metavar="N",
                   help="kernels kept preheated so a page opens at once (default: one per processor, at most 4)")
    p.set_defaults(func=run)


def template_root() -> Path:
    """The folder to put on JUPYTER_PATH so Voila finds our offline template."""
    return Path(__file__).resolve().parents[1] / "ui" / "voila_template"


def notebook_path() -> Path:
    """apps/clinic.ipynb of a source checkout, else the same notebook written to a cache folder."""
    checkout = Path(__file__).resolve().parents[2] / "apps" / "clinic.ipynb"
    if checkout.is_file():
        return checkout
    from ..ui import notebook_json
    folder = Path(tempfile.gettempdir()) / f"prescribe-app-{os.getuid() if hasattr(os, 'getuid') else 'user'}"
    folder.mkdir(parents=True, exist_ok=True)
    target = folder / "clinic.ipynb"
    target.write_text(json.dumps(notebook_json(), indent=1), encoding="utf-8")
    return target


def check_port_free(port: int) -> None:
    """Raise a clear error when ``port`` on 127.0.0.1 cannot be used."""
    if not 1 <= port <= 65535:
        raise InputError.single("--port", port, "a port number from 1 to 65535")
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        try:
            s.bind(("127.0.0.1", port))
        except OSError as exc:
            raise PrescribeError(f"port {port} on 127.0.0.1 is already in use ({exc.strerror}); "
                                 f"stop the other server or choose another port with --port") from None


#: Largest file the app's upload accepts [bytes] (the sensor section; larger recordings: `prescribe sensor`).
UPLOAD_LIMIT_BYTES = 256 * 1024 * 1024


def voila_command(port: int, notebook: Path, max_pages: int | None = None, pool: int | None = None,
                  cell_timeout_s: int | None = None) -> list[str]:
    """The Voila command line: our offline template and the limits of :func:`server_limits`
    (the cell timeout: ``cell_timeout_s``, else the environment's ``PRESCRIBE_APP_CELL_TIMEOUT_S``,
    else the default)."""
    from ..ui.server import CELL_TIMEOUT_S, ServerLimits, server_limits, voila_options

    limits = server_limits()
    if max_pages is not None:
        if not 1 <= max_pages <= 1000:
            raise InputError.single("--max-pages", max_pages, "a whole number of pages from 1 to 1000")
        limits = ServerLimits(max_pages, min(limits.pool_size, max(0, max_pages - 1)), limits.memory_mb, limits.cpus)
    if pool is not None:
        if not 0 <= pool <= 16 or pool >= limits.max_kernels:
            raise InputError.single("--pool", pool, f"a whole number from 0 to 16, below --max-pages "
                                    f"({limits.max_kernels})")
        limits = ServerLimits(limits.max_kernels, pool, limits.memory_mb, limits.cpus)
    timeout = str(cell_timeout_s) if cell_timeout_s is not None else os.environ.get(CELL_TIMEOUT_ENV, "").strip()
    if timeout and not (timeout.isdigit() and 1 <= int(timeout) <= 3600):
        raise InputError.single(CELL_TIMEOUT_ENV, timeout, "a whole number of seconds from 1 to 3600")
    options = voila_options(limits, int(timeout) if timeout else CELL_TIMEOUT_S)
    if limits.pool_size == 0:
        options = [o for o in options if not o.startswith(("--preheat_kernel", "--pool_size",
                                                           "--VoilaKernelManager."))]
    return [sys.executable, "-m", "voila", str(notebook),
            "--no-browser", f"--port={port}", "--Voila.ip=127.0.0.1",
            f"--template={TEMPLATE_NAME}", "--theme=light", *options,
            # Worn-sensor recordings are uploaded through the kernel's websocket (tornado's default: 10 MiB).
            f'--Voila.tornado_settings={{"websocket_max_message_size": {UPLOAD_LIMIT_BYTES}}}']


def voila_environment(db: str | None) -> dict[str, str]:
    env = dict(os.environ)
    env["PRESCRIBE_DB"] = db_url(db)
    paths = [str(template_root())] + [p for p in env.get("JUPYTER_PATH", "").split(os.pathsep) if p]
    env["JUPYTER_PATH"] = os.pathsep.join(paths)
    return env


def run(args) -> int:
    check_port_free(args.port)
    notebook = notebook_path()
    env = voila_environment(args.db)
    cmd = voila_command(args.port, notebook, args.max_pages, args.pool)
    limits = {o.split("=")[0].rsplit(".", 1)[-1].lstrip("-"): o.split("=")[1] for o in cmd if o.startswith("--") and "=" in o}
    print(f"prescribe app: serving http://127.0.0.1:{args.port}/ (store {env['PRESCRIBE_DB']}; at most "
          f"{limits.get('max_kernels')} pages at once, {limits.get('pool_size', 0)} preheated); "
          "press Ctrl+C to stop", file=sys.stderr, flush=True)
    os.execve(cmd[0], cmd, env)  # replaces this process: stopping it stops the server
    return 0  # pragma: no cover
