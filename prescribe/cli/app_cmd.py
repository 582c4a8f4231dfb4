"""``prescribe app [--port 8866] [--db URL]``: serve the clinic app with Voila on 127.0.0.1.

The page uses our offline template (no request leaves the machine) and idle kernels
are culled (a kernel with an open page is never culled).  The store is the one named
by ``--db``, then ``PRESCRIBE_DB``; the app's kernels inherit it.
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
#: Kernels idle this long (no open page) are stopped [s]; checked every CULL_INTERVAL_S.
CULL_IDLE_TIMEOUT_S = 900
CULL_INTERVAL_S = 60


def register(sub) -> None:
    p = sub.add_parser("app", help="serve the clinic app (Voila) on 127.0.0.1")
    p.add_argument("--port", type=int, default=DEFAULT_PORT, help=f"port on 127.0.0.1 (default {DEFAULT_PORT})")
    p.add_argument("--db", default=None, help="the store (path or database URL); default PRESCRIBE_DB")
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


def voila_command(port: int, notebook: Path) -> list[str]:
    return [sys.executable, "-m", "voila", str(notebook),
            "--no-browser", f"--port={port}", "--Voila.ip=127.0.0.1",
            f"--template={TEMPLATE_NAME}", "--theme=light",
            f"--MappingKernelManager.cull_idle_timeout={CULL_IDLE_TIMEOUT_S}",
            f"--MappingKernelManager.cull_interval={CULL_INTERVAL_S}",
            "--MappingKernelManager.cull_connected=False",
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
    cmd = voila_command(args.port, notebook)
    print(f"prescribe app: serving http://127.0.0.1:{args.port}/ (store {env['PRESCRIBE_DB']}); "
          "press Ctrl+C to stop", file=sys.stderr, flush=True)
    os.execve(cmd[0], cmd, env)  # replaces this process: stopping it stops the server
    return 0  # pragma: no cover
