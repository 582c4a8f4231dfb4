"""NativeAuthenticator as configured for a clinic, on a real hub: accounts wait for an
admin's approval, weak passwords are refused, an approved clinician can log in.

The hub runs deploy/jupyterhub_config.py unchanged except for the simple spawner (no
server is started: logins are checked up to the redirect).  127.0.0.1, free ports,
stopped at the end.  All logins are invented.
"""

from __future__ import annotations

import os
import re
import socket
import subprocess
import sys
from pathlib import Path

import pytest

from hub_support import stop_hub, wait_for_hub

ROOT = Path(__file__).resolve().parents[1]
PROXY_BIN = ROOT / "deploy" / "proxy" / "node_modules" / ".bin"
PASSWORD = "Lighthouse-Fern-42x"  # invented, long enough, not a common password


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture(scope="module")
def hub(tmp_path_factory):
    if not (PROXY_BIN / "configurable-http-proxy").exists():
        if os.environ.get("CI"):
            pytest.fail("the hub's proxy is not installed (make hub-deps)")
        pytest.skip("the hub's proxy is not installed (make hub-deps)")
    folder = tmp_path_factory.mktemp("native-hub")
    port = _free_port()
    env = {**os.environ,
           "PATH": os.pathsep.join([str(PROXY_BIN), str(Path(sys.executable).parent), os.environ.get("PATH", "")]),
           "PRESCRIBE_HUB_DIR": str(folder), "PRESCRIBE_HUB_PORT": str(port),
           "PRESCRIBE_HUB_PROXY_API_PORT": str(_free_port()), "PRESCRIBE_HUB_API_PORT": str(_free_port()),
           "PRESCRIBE_HUB_SPAWNER": "simple", "PRESCRIBE_HUB_ADMINS": "clinic-admin",
           "PRESCRIBE_DB": str(folder / "clinic.db")}
    log = folder / "hub.log"
    with open(log, "w") as out:
        proc = subprocess.Popen([str(Path(sys.executable).with_name("jupyterhub")), "-f",
                                 str(ROOT / "deploy" / "jupyterhub_config.py")], cwd=folder, env=env,
                                stdout=out, stderr=subprocess.STDOUT, start_new_session=True)
    base = f"http://127.0.0.1:{port}"
    try:
        wait_for_hub(base, proc, log)
        yield {"url": base, "log": log}
    finally:
        stop_hub(proc, folder)


def _session():
    import requests
    return requests.Session()


def _xsrf(session, url: str) -> str:
    page = session.get(url, timeout=30)
    return re.search(r'name="_xsrf" value="([^"]+)"', page.text).group(1)


def _signup(hub, user: str, password: str = PASSWORD) -> str:
    s = _session()
    token = _xsrf(s, f"{hub['url']}/hub/signup")
    page = s.post(f"{hub['url']}/hub/signup", timeout=30, data={
        "username": user, "signup_password": password, "signup_password_confirmation": password, "_xsrf": token})
    assert page.status_code == 200, page.text[-500:]
    return page.text


def _login(hub, user: str, password: str = PASSWORD):
    s = _session()
    token = _xsrf(s, f"{hub['url']}/hub/login")
    page = s.post(f"{hub['url']}/hub/login?next=", timeout=30, allow_redirects=False,
                  data={"username": user, "password": password, "_xsrf": token})
    return s, page


def test_accounts_wait_for_an_admins_approval(hub):
    _signup(hub, "clinic-admin")             # a listed admin is approved at sign-up
    admin, page = _login(hub, "clinic-admin")
    assert page.status_code == 302, page.text[-800:]

    _signup(hub, "otto.fenn")
    _, page = _login(hub, "otto.fenn")
    assert page.status_code == 200 and "has not been authorized by an administrator yet" in page.text

    # the admin approves the account; then the clinician can log in
    approved = admin.get(f"{hub['url']}/hub/authorize/otto.fenn", timeout=30)
    assert approved.status_code == 200, approved.text[-500:]
    _, page = _login(hub, "otto.fenn")
    assert page.status_code == 302 and "/hub/" in page.headers["location"]

    _, page = _login(hub, "otto.fenn", "wrong-password-123")
    assert page.status_code == 200 and "Invalid username or password" in page.text


def test_a_short_or_common_password_is_refused(hub):
    text = _signup(hub, "rui.amsel", "short1")
    assert "Something went wrong" in text and "at least 12" in text  # the configured minimum
    _, page = _login(hub, "rui.amsel", "short1")
    assert page.status_code == 200 and "Invalid username or password" in page.text  # no account was made
    text = _signup(hub, "rui.amsel", "1qaz2wsx3edc")  # long enough, but on the common-password list
    assert "Something went wrong" in text
    _, page = _login(hub, "rui.amsel", "1qaz2wsx3edc")
    assert "Invalid username or password" in page.text
