"""Stopping a JupyterHub that a test started, and everything it started.

The hub starts its proxy and each clinician's server in sessions of their own (so they
survive a hub restart) and its services (the idle culler) in its own process group.  A
SIGTERM to the hub alone makes it stop its servers, services and proxy, which can take
about 15 s (the culler is asked with SIGINT first).  If it does not finish in time, the
hub's group is killed, and the proxy, whose pid the hub wrote to its pid file, too.
"""

from __future__ import annotations

import os
import signal
import subprocess
from pathlib import Path


def wait_for_hub(base: str, proc: subprocess.Popen, log: Path, timeout_s: float = 90.0) -> None:
    """Return once the proxy routes to the hub and the hub answers (its port alone is not enough:
    the proxy listens, and answers 404, before the hub has added its route)."""
    import time

    import requests

    deadline = time.monotonic() + timeout_s
    while True:
        if proc.poll() is not None:
            raise RuntimeError(f"the hub exited: {log.read_text()[-2000:]}")
        try:
            if requests.get(f"{base}/hub/api", timeout=2).status_code == 200:
                return
        except requests.RequestException:
            pass
        if time.monotonic() > deadline:
            raise RuntimeError(f"the hub did not answer within {timeout_s:g} s")
        time.sleep(0.2)


def stop_hub(proc: subprocess.Popen, hub_dir: Path, timeout_s: float = 60.0) -> None:
    if proc.poll() is None:
        proc.send_signal(signal.SIGTERM)
        try:
            proc.wait(timeout=timeout_s)
        except subprocess.TimeoutExpired:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.wait(timeout=30)
    pid_file = Path(hub_dir) / "jupyterhub-proxy.pid"
    if pid_file.exists():
        try:
            pid = int(pid_file.read_text().strip())
            cmdline = Path(f"/proc/{pid}/cmdline").read_bytes()
        except (ValueError, OSError):
            return
        if b"configurable-http-proxy" in cmdline:  # still ours: the hub did not get to stop it
            os.kill(pid, signal.SIGTERM)
