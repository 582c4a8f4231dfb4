"""Browser fixtures: the real app served by `prescribe app`, driven in Debian's chromium.

Every page refuses requests that do not go to 127.0.0.1 and the test fails if any
was attempted.  Screenshots go to test-artifacts/browser/.
"""

from __future__ import annotations

import os
import shutil
import socket
import subprocess
import sys
import time
from pathlib import Path
from urllib.parse import urlparse

import pytest

ROOT = Path(__file__).resolve().parents[2]
CHROMIUM = "/usr/bin/chromium"
SHOTS = ROOT / "test-artifacts" / "browser"
CHROMIUM_ARGS = [
    "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage", "--disable-background-networking",
    "--disable-component-update", "--disable-sync", "--no-first-run", "--disable-extensions",
    "--host-resolver-rules=MAP * ~NOTFOUND, EXCLUDE 127.0.0.1",
]
LOCAL_HOSTS = {"127.0.0.1"}
#: How long the first page may take (kernel start plus the app's imports) [ms].
PAGE_TIMEOUT_MS = 90_000


def pytest_collection_modifyitems(config, items):
    here = Path(__file__).parent
    for item in items:
        if here in Path(str(item.fspath)).parents:
            item.add_marker(pytest.mark.browser)


def _require_chromium() -> None:
    if os.path.exists(CHROMIUM):
        return
    if os.environ.get("CI"):
        pytest.fail(f"{CHROMIUM} is missing; CI must install Debian's chromium (apt-get install chromium)")
    pytest.skip(f"{CHROMIUM} is not installed (apt-get install --no-install-recommends chromium); "
                "browser tests need it")


@pytest.fixture(scope="session")
def browser_type_launch_args(browser_type_launch_args):
    """pytest-playwright: Debian's chromium, never a downloaded browser."""
    _require_chromium()
    return {**browser_type_launch_args, "executable_path": CHROMIUM, "args": CHROMIUM_ARGS, "headless": True}


@pytest.fixture(scope="session")
def browser_context_args(browser_context_args):
    return {**browser_context_args, "accept_downloads": True, "viewport": {"width": 1280, "height": 1400}}


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def prescribe_exe() -> list[str]:
    exe = Path(sys.executable).with_name("prescribe")
    return [str(exe)] if exe.exists() else [sys.executable, "-m", "prescribe.cli"]


def wait_for_port(host: str, port: int, proc: subprocess.Popen, timeout_s: float = 60.0) -> None:
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        if proc.poll() is not None:
            raise RuntimeError(f"the server exited early with code {proc.returncode}")
        try:
            # A listening socket is enough: a GET of the page would start a kernel.
            with socket.create_connection((host, port), timeout=2):
                return
        except OSError:
            time.sleep(0.2)
    raise RuntimeError(f"{host}:{port} did not answer within {timeout_s} s")


def stop(proc: subprocess.Popen, timeout_s: float = 20) -> None:
    """Stop a server this test started: politely, then for good."""
    proc.terminate()
    try:
        proc.wait(timeout=timeout_s)
    except subprocess.TimeoutExpired:
        proc.kill()


class AppServer:
    def __init__(self, url: str, db_path: Path, proc: subprocess.Popen, log: Path):
        self.url, self.db_path, self.proc, self.log = url, db_path, proc, log


@pytest.fixture(scope="session")
def app_server(tmp_path_factory):
    """`prescribe app` on a free port with a fresh store; yields an AppServer."""
    _require_chromium()
    folder = tmp_path_factory.mktemp("app")
    db_path = folder / "clinic.db"
    # A clinic settings file of the test's own (none yet: the app asks for the clinic once).
    env = {**os.environ, "PRESCRIBE_DB": str(db_path), "XDG_CONFIG_HOME": str(folder / "config")}
    for var in ("PRESCRIBE_SETTINGS", "PRESCRIBE_CLINIC_NAME", "PRESCRIBE_CLINIC_CONTACT"):
        env.pop(var, None)
    init = subprocess.run([*prescribe_exe(), "db", "init"], env=env, capture_output=True, text=True, timeout=120)
    if init.returncode != 0:
        raise RuntimeError(f"prescribe db init failed: {init.stderr}")
    port = free_port()
    log = folder / "server.log"
    with open(log, "w") as out:
        proc = subprocess.Popen([*prescribe_exe(), "app", "--port", str(port)], env=env, stdout=out,
                                stderr=subprocess.STDOUT, start_new_session=True)
    url = f"http://127.0.0.1:{port}/"
    try:
        wait_for_port("127.0.0.1", port, proc)
        yield AppServer(url, db_path, proc, log)
    finally:
        stop(proc, 15)
        if SHOTS.exists():
            shutil.copy(log, SHOTS / "server.log")


class OutsideRequests(list):
    """Requests to anywhere but 127.0.0.1 (each was aborted)."""


def keep_local(context) -> OutsideRequests:
    """Abort every request of ``context`` that does not go to 127.0.0.1; return the list they go to."""
    outside = OutsideRequests()

    def guard(route):
        host = urlparse(route.request.url).hostname
        if route.request.url.startswith(("data:", "blob:", "about:")) or host in LOCAL_HOSTS:
            route.continue_()
        else:
            outside.append(route.request.url)
            route.abort()

    context.route("**/*", guard)
    return outside


@pytest.fixture
def app_page(app_server, context):
    """A page of the app, with every outside request aborted and recorded; fails the test if any."""
    outside = keep_local(context)
    page = context.new_page()
    page.set_default_timeout(30_000)
    page.outside_requests = outside
    yield page
    assert not outside, f"requests tried to leave 127.0.0.1: {outside}"


def open_app(page, app_server) -> None:
    """Open the app and wait until the intake form is usable."""
    page.goto(app_server.url, timeout=PAGE_TIMEOUT_MS)
    page.locator(".pr-intake-submit").wait_for(state="visible", timeout=PAGE_TIMEOUT_MS)


def shot(page, name: str, of: str | None = None) -> Path:
    """Keep a screenshot of this step as a test artefact: the element ``of`` (CSS), else the view.

    Voila scrolls inside its own container, so a full-page shot shows only the top: name the
    section to keep.
    """
    SHOTS.mkdir(parents=True, exist_ok=True)
    path = SHOTS / f"{name}.png"
    if of:
        page.locator(of).first.screenshot(path=str(path))
    else:
        page.screenshot(path=str(path))
    return path


def type_into(page, css_class: str, text: str) -> None:
    box = page.locator(f".{css_class} input, input.{css_class}").first
    box.fill(text)
    box.press("Tab")


def choose(page, css_class: str, label: str) -> None:
    """Pick a dropdown entry by the text it shows (ipywidgets options carry their labels)."""
    page.locator(f".{css_class} select, select.{css_class}").first.select_option(label=label)


def sign_in(page, app_server, name: str) -> None:
    """Give ``name`` the tests' invented passphrase in the app's store (as a lead would at the
    command line) and sign in with it through the page's sign-in panel."""
    sys.path.insert(0, str(ROOT / "tests"))
    from signin_support import PASSPHRASE, give_passphrase
    give_passphrase(str(app_server.db_path), name)
    page.locator(".pr-signin-name input").first.fill(name)
    page.locator(".pr-signin-passphrase input").first.fill(PASSPHRASE)
    page.locator(".pr-signin-passphrase input").first.press("Tab")
    page.locator(".pr-signin-button").click()
    page.wait_for_function(
        "(name) => { const e = document.querySelector('.pr-signed-name'); return e && e.innerText === name; }",
        arg=name, timeout=30_000)


def sign_out(page) -> None:
    page.locator(".pr-signout-button").click()
    page.locator(".pr-signin-name input").first.wait_for(state="visible")


def axis_ticks(page, figure_css: str, label: str) -> list[str] | None:
    """The tick labels drawn on the axis called ``label`` of a bqplot figure (None when that axis
    is not drawn: hidden axes have no width on the page)."""
    return page.evaluate(
        """([css, label]) => {
             const f = document.querySelector(css);
             if (!f) return null;
             const axis = Array.from(f.querySelectorAll('g.axis')).find(
                 a => a.querySelector('.axislabel') && a.querySelector('.axislabel').textContent === label);
             if (!axis || axis.getBoundingClientRect().width === 0) return null;
             return Array.from(axis.querySelectorAll('.tick text')).map(t => t.textContent);
           }""", [figure_css, label])


def console_errors(page) -> list[str]:
    """Start recording the page's console errors; returns the list they are added to."""
    errors: list[str] = []
    page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
    return errors
