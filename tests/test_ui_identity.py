"""Who is signed in to the page (prescribe.ui.identity), without a browser.  Invented clinicians.

Approvals, clearances and resumptions are recorded under a signed-in clinician, never a typed
name: the JupyterHub login when the app runs under the hub, else a clinician signed in with the
passphrase a clinic lead set.  The sign-in lapses after IDLE_MINUTES without a vouching action
(common practice for a shared clinic computer).
"""

from __future__ import annotations

import pytest

from prescribe.ui import ClinicApp, ClinicSession
from prescribe.ui.identity import IDLE_MINUTES, NotSignedIn, SignedIn
from signin_support import PASSPHRASE, give_passphrase


class Clock:
    def __init__(self) -> None:
        self.now = 1_000_000.0

    def __call__(self) -> float:
        return self.now


def test_nobody_signed_in_is_refused_naming_what_is_needed():
    with pytest.raises(NotSignedIn, match="signed-in clinician is required: a clinician signed in with their "
                                          "passphrase"):
        SignedIn().who("approve_template")


def test_a_passphrase_signs_in_and_the_sign_in_lapses_when_unused(tmp_db):
    give_passphrase(tmp_db, "Dr Ines Vale (invented)")
    clock = Clock()
    signed = SignedIn(clock=clock)
    session = ClinicSession(store_url=tmp_db)
    assert not signed.sign_in(session.store, "Dr Ines Vale (invented)", "wrong passphrase!!").ok
    assert signed.name == ""
    assert signed.sign_in(session.store, "Dr Ines Vale (invented)", PASSPHRASE).ok
    clock.now += IDLE_MINUTES * 60 - 1
    assert signed.who("clear") == "Dr Ines Vale (invented)"  # used: alive for another IDLE_MINUTES
    clock.now += IDLE_MINUTES * 60 - 1
    assert signed.who("resume") == "Dr Ines Vale (invented)"
    clock.now += IDLE_MINUTES * 60 + 1
    with pytest.raises(NotSignedIn, match="lapsed"):
        signed.who("resume")
    assert signed.name == ""


def test_under_the_hub_the_login_is_signed_in_and_never_lapses(monkeypatch, tmp_db):
    monkeypatch.setenv("JUPYTERHUB_USER", "mara.teal")
    clock = Clock()
    app = ClinicApp(ClinicSession(store_url=tmp_db))
    app.signed._clock = clock
    assert app.signed.name == "mara.teal" and app.signed.is_hub
    assert app.signin.form.layout.display == "none" and app.signin.out_button.layout.display == "none"
    clock.now += 10 * IDLE_MINUTES * 60
    assert app.signed.who("approve_template") == "mara.teal"
    app.signed.sign_out()  # the hub's login is not signed out from the page
    assert app.signed.name == "mara.teal"


def test_the_panel_never_keeps_the_passphrase_and_says_why_a_sign_in_failed(tmp_db):
    give_passphrase(tmp_db, "Dr Ines Vale (invented)")
    app = ClinicApp(ClinicSession(store_url=tmp_db))
    panel = app.signin
    panel.name.value, panel.passphrase.value = "Nobody Known (invented)", PASSPHRASE
    panel.button.click()
    assert panel.passphrase.value == "" and "no passphrase is set for this name" in panel.message.value
    panel.name.value, panel.passphrase.value = "Dr Ines Vale (invented)", "not the right one"
    panel.button.click()
    assert "does not match" in panel.message.value and "4 more tries" in panel.message.value
    panel.name.value, panel.passphrase.value = "Dr Ines Vale (invented)", PASSPHRASE
    panel.button.click()
    assert app.signed.name == "Dr Ines Vale (invented)" and "Dr Ines Vale (invented)" in panel.status.value
    assert panel.form.layout.display == "none" and panel.out_button.layout.display is None
