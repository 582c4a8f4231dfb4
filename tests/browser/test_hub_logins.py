"""Logins through JupyterHub: two invented clinicians sign in through the hub, each lands
in the app, each save is recorded under the login, and the lead-only action (approving
a clinic template) is refused for a clinician and done by the lead.

The hub runs our deploy/jupyterhub_config.py with two test-only changes: JupyterHub's
shared-password test authenticator with two invented users, and the simple local-process
spawner (every server runs as this user).  Everything listens on 127.0.0.1 on free ports
and is stopped at the end.  Needs the hub's proxy (`make hub-deps`).
"""

from __future__ import annotations

import os
import secrets
import subprocess
import sys
import time
from pathlib import Path

import pytest

from hub_support import stop_hub, wait_for_hub
from prescribe.store import open_store

from .conftest import CHROMIUM_ARGS, ROOT, SHOTS, _require_chromium, free_port, keep_local, shot, type_into

pytestmark = pytest.mark.browser

PROXY_BIN = ROOT / "deploy" / "proxy" / "node_modules" / ".bin"
CLINICIAN, LEAD = "mara.teal", "lena.vos"
TEMPLATE = "Osteopenia start (invented clinic)"
#: The whole login-to-saved path of one clinician may take this long on a busy machine [ms].
SPAWN_TIMEOUT_MS = 120_000

TEST_CONFIG = """
import os
load_subconfig(os.environ["PRESCRIBE_TEST_HUB_BASE"])
# test-only: a shared password for invented users instead of NativeAuthenticator's sign-up
c.JupyterHub.authenticator_class = "shared-password"
c.SharedPasswordAuthenticator.user_password = os.environ["PRESCRIBE_TEST_HUB_PASSWORD"]
c.Authenticator.allow_all = False
c.Authenticator.allowed_users = {%r, %r}
c.Authenticator.admin_users = set()
""" % (CLINICIAN, LEAD)


@pytest.fixture(scope="module")
def hub(tmp_path_factory):
    _require_chromium()
    if not (PROXY_BIN / "configurable-http-proxy").exists():
        message = "the hub's proxy is not installed (make hub-deps)"
        if os.environ.get("CI"):
            pytest.fail(message)
        pytest.skip(message)
    folder = tmp_path_factory.mktemp("hub")
    db = folder / "clinic.db"
    with open_store(str(db)) as store:
        store.add_template(TEMPLATE, {"weeks": 12}, "rui.amsel")  # a draft waiting for a lead
    config = folder / "test_config.py"
    config.write_text(TEST_CONFIG)
    password = secrets.token_urlsafe(16)
    port = free_port()
    env = {**os.environ,
           "PATH": os.pathsep.join([str(PROXY_BIN), str(Path(sys.executable).parent), os.environ.get("PATH", "")]),
           "PRESCRIBE_TEST_HUB_BASE": str(ROOT / "deploy" / "jupyterhub_config.py"),
           "PRESCRIBE_TEST_HUB_PASSWORD": password, "PRESCRIBE_DB": str(db), "PRESCRIBE_HUB_DIR": str(folder),
           "PRESCRIBE_HUB_PORT": str(port), "PRESCRIBE_HUB_PROXY_API_PORT": str(free_port()),
           "PRESCRIBE_HUB_API_PORT": str(free_port()), "PRESCRIBE_HUB_SPAWNER": "simple",
           "PRESCRIBE_HUB_LEADS": LEAD, "PRESCRIBE_CHECKOUT": str(ROOT)}
    env.pop("JUPYTERHUB_USER", None)
    log = folder / "hub.log"
    with open(log, "w") as out:
        proc = subprocess.Popen([str(Path(sys.executable).with_name("jupyterhub")), "-f", str(config)],
                                cwd=folder, env=env, stdout=out, stderr=subprocess.STDOUT, start_new_session=True)
    try:
        wait_for_hub(f"http://127.0.0.1:{port}", proc, log)
        yield {"url": f"http://127.0.0.1:{port}", "password": password, "db": str(db), "log": log}
    finally:
        stop_hub(proc, folder)  # the hub stops the clinicians' servers, its culler and its proxy
        SHOTS.mkdir(parents=True, exist_ok=True)
        (SHOTS / "hub.log").write_text(log.read_text(errors="replace"))


@pytest.fixture
def hub_browser(playwright):
    browser = playwright.chromium.launch(executable_path="/usr/bin/chromium", args=CHROMIUM_ARGS, headless=True)
    yield browser
    browser.close()


def _login(browser, hub, user: str):
    """A fresh browser context (its own cookies) logged in as ``user``, on the app page."""
    context = browser.new_context(viewport={"width": 1280, "height": 1400})
    outside = keep_local(context)
    page = context.new_page()
    page.set_default_timeout(60_000)
    page.goto(f"{hub['url']}/hub/login")
    page.fill("input[name=username]", user)
    page.fill("input[name=password]", hub["password"])
    page.locator("#login_submit, input[type=submit], button[type=submit]").first.click()
    page.wait_for_url(f"**/user/{user}/voila/render/clinic.ipynb**", timeout=SPAWN_TIMEOUT_MS)
    page.locator(".pr-intake-submit").wait_for(state="visible", timeout=SPAWN_TIMEOUT_MS)
    return context, page, outside


def _save_person(page, patient_id: str) -> str:
    type_into(page, "pr-intake-patient_id", patient_id)
    type_into(page, "pr-intake-age_years", "67")
    page.locator(".pr-intake-sex select").first.select_option(label="female")
    type_into(page, "pr-intake-body_mass_kg", "61")
    type_into(page, "pr-intake-height_cm", "160")
    type_into(page, "pr-intake-t_scores-femoral_neck", "-2.3")
    page.locator(".pr-intake-submit").click()
    page.wait_for_function("() => { const e = document.querySelector('.pr-week-table');"
                           " return e && e.innerText.includes('impacts per session'); }", timeout=60_000)
    # The clinician field shows the login and cannot be edited.
    box = page.locator(".pr-store-clinician input").first
    assert box.input_value() == page.locator(".pr-signed-name").inner_text() and box.is_disabled()
    page.locator(".pr-store-save").click()
    page.wait_for_function("() => { const e = document.querySelector('.pr-store-status');"
                           " return e && e.innerText.includes('Saved'); }", timeout=60_000)
    return page.locator(".pr-store-status").inner_text()


def _open_templates(page) -> None:
    """Open section 8 (built when opened) and wait for its drafts list."""
    page.locator(".pr-section-templates .jupyter-widget-Collapse-header").first.click()
    page.locator(".pr-template-role").wait_for(state="visible", timeout=60_000)


def _approve(page) -> None:
    page.locator(".pr-template-drafts select").first.select_option(index=0)
    page.locator(".pr-template-approve").click()


def test_each_save_is_recorded_under_its_login_and_only_a_lead_approves(hub, hub_browser):
    started = time.monotonic()
    contexts = []
    try:
        ctx_c, clinician, outside_c = _login(hub_browser, hub, CLINICIAN)
        contexts.append(ctx_c)
        ctx_l, lead, outside_l = _login(hub_browser, hub, LEAD)
        contexts.append(ctx_l)

        # Signed in as the login, with no passphrase (the save's clinician field: _save_person).
        for page, user in ((clinician, CLINICIAN), (lead, LEAD)):
            assert page.locator(".pr-signed-name").inner_text() == user

        assert "Saved DEMO-HUB-1" in _save_person(clinician, "DEMO-HUB-1")
        assert "Saved DEMO-HUB-2" in _save_person(lead, "DEMO-HUB-2")
        shot(clinician, "hub-10-clinician-saved", of=".pr-section-store")

        # A clinician may not approve a clinic template: refused, with who may.
        _open_templates(clinician)
        assert "clinician" in clinician.locator(".pr-template-role").inner_text()
        _approve(clinician)
        # Refused beside the Approve button (not at the top of the page), naming who may.
        clinician.locator(".pr-template-status .pr-error-box").wait_for(state="visible", timeout=30_000)
        refusal = clinician.locator(".pr-template-status .pr-error-box").inner_text()
        assert "Not approved" in refusal and CLINICIAN in refusal and "clinic lead" in refusal
        assert clinician.locator(".pr-error .pr-error-box").count() == 0
        # Signed in through the hub: no passphrase asked, no sign-out.
        assert CLINICIAN in clinician.locator(".pr-signin-status").inner_text()
        assert clinician.locator(".pr-signin-name input").first.is_hidden()
        shot(clinician, "hub-11-clinician-refused", of=".pr-section-templates")

        # The lead (a member of the hub's clinic-leads group) may.
        _open_templates(lead)
        assert "lead" in lead.locator(".pr-template-role").inner_text()
        _approve(lead)
        lead.wait_for_function("() => { const e = document.querySelector('.pr-template-status');"
                               " return e && e.innerText.includes('Approved'); }", timeout=30_000)
        shot(lead, "hub-12-lead-approved", of=".pr-section-templates")
        assert not outside_c and not outside_l, f"requests tried to leave 127.0.0.1: {outside_c + outside_l}"
    finally:
        for ctx in contexts:
            ctx.close()

    with open_store(hub["db"]) as store:
        assert [v["clinician"] for v in store.program_versions("DEMO-HUB-1")] == [CLINICIAN]
        assert [v["clinician"] for v in store.program_versions("DEMO-HUB-2")] == [LEAD]
        assert {a["clinician"] for a in store.audit("DEMO-HUB-1")} == {CLINICIAN}
        assert {a["clinician"] for a in store.audit("DEMO-HUB-2")} == {LEAD}
        [template] = store.templates(TEMPLATE)
        assert template["status"] == "approved" and template["approved_by"] == LEAD
    assert time.monotonic() - started < 600  # bounded: the whole run stays well inside CI's budget
