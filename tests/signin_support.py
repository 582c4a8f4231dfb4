"""Signing in invented clinicians in tests (this module holds no tests).

The single-user app records approvals, clearances and resumptions under a clinician signed
in with a passphrase a clinic lead set (prescribe/store/clinicians.py); these helpers set
one in the test's store and sign in through the page's own panel, as a clinician would.
"""

from __future__ import annotations

from prescribe.store import open_store

#: An invented passphrase, used for every invented clinician of the tests.
PASSPHRASE = "invented passphrase for tests"
LEAD = "Lead Setter (invented)"


def give_passphrase(store_url: str, *names: str) -> None:
    """Set ``PASSPHRASE`` for each of ``names`` in the store at ``store_url`` (as a lead would at the command line)."""
    with open_store(store_url) as store:
        for name in names:
            store.set_passphrase(name, PASSPHRASE, LEAD)


def sign_in(app, name: str) -> None:
    """Sign ``name`` in through the app's sign-in panel (the passphrase must be set in its store)."""
    app.signin.name.value = name
    app.signin.passphrase.value = PASSPHRASE
    app.signin.button.click()
    assert app.signed.name == name, app.signin.message.value
