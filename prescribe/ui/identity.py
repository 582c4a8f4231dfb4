"""Who is signed in to the page, for the actions that vouch for someone.

Approving a clinic template, recording a clearance and resuming a paused program each say
"a clinician has checked this".  A typed name proves nothing: anyone can type another
name.  So these three actions (and saving a template draft, whose author the four-eyes
rule compares with the approver) take the clinician from a sign-in, never from a text box:

* under JupyterHub, the hub's login (``JUPYTERHUB_USER``): signed in from the start, no
  passphrase, no sign-out;
* in the single-user app, a clinician signs in at the top of the page with the passphrase
  a clinic lead set at the command line (``prescribe clinician passphrase NAME --clinician
  LEAD``; only a salted scrypt hash is stored, prescribe/store/clinicians.py).  The sign-in
  lapses after ``IDLE_MINUTES`` without a vouching action, and Sign out ends it at once.

:class:`SignedIn` is the state (a small traitlets object, so the visit's model can take it
over); :class:`SignInPanel` is its widgets.  Widgets carry stable CSS classes
(``pr-signin-...``) for browser tests.
"""

from __future__ import annotations

import html
import time
from typing import Callable

import ipywidgets as w
from traitlets import Float, HasTraits, Unicode

from ..errors import FieldProblem, InputError
from .common import own_layout

#: Minutes without a vouching action after which the sign-in lapses (common practice for a
#: shared clinic computer).
IDLE_MINUTES = 30

#: What each vouching action is called in a message (action key -> words).
ACTION_WORDS = {
    "approve_template": "approving a template",
    "retire_template": "retiring a template",
    "save_template": "saving a template draft",
    "clear": "recording a clearance",
    "resume": "resuming a paused program",
}


class NotSignedIn(InputError):
    """A vouching action without a signed-in clinician (bad input: nothing is changed)."""

    def __init__(self, action: str, lapsed: bool = False) -> None:
        words = ACTION_WORDS.get(action, action)
        why = ("your sign-in lapsed after "
               f"{IDLE_MINUTES} minutes without use" if lapsed else "nobody is signed in")
        super().__init__([_problem(words, why)])
        self.action = action


def _problem(words: str, why: str) -> FieldProblem:
    return FieldProblem("signed-in clinician", None,
                        f"a clinician signed in with their passphrase at the top of the page ({why}); "
                        f"{words} records who vouched for it, and a typed name proves nothing",
                        kind="missing")


class SignedIn(HasTraits):
    """The clinician signed in to this page, if any."""

    name = Unicode("", help="the signed-in clinician; empty while nobody is signed in")
    how = Unicode("", help='"hub" (the JupyterHub login) or "passphrase"; empty while nobody is signed in')
    last_used = Float(0.0, help="time.time() of the sign-in or of the last vouching action")

    def __init__(self, login: str | None = None, clock: Callable[[], float] = time.time, **kwargs) -> None:
        super().__init__(**kwargs)
        self._clock = clock
        if login:
            self.set_trait("name", login)
            self.set_trait("how", "hub")
            self.set_trait("last_used", clock())

    @property
    def is_hub(self) -> bool:
        return self.how == "hub"

    def sign_in(self, store, name: str, passphrase: str):
        """Check ``name``'s passphrase in ``store``; signed in when it matches.  Returns the
        store's :class:`~prescribe.store.clinicians.SignInResult`."""
        if self.is_hub:
            raise InputError.single("sign in", name, f"nothing: under the clinic's login you are signed in as "
                                                     f"{self.name}")
        result = store.check_passphrase(name, passphrase)
        if result.ok:
            self.how = "passphrase"
            self.last_used = self._clock()
            self.name = result.clinician
        return result

    def sign_out(self) -> None:
        if self.is_hub:
            return
        self.name, self.how, self.last_used = "", "", 0.0

    def who(self, action: str) -> str:
        """The signed-in clinician for ``action`` (a key of ACTION_WORDS); raises :class:`NotSignedIn`.

        Each use keeps the sign-in alive for another ``IDLE_MINUTES``.
        """
        if not self.name:
            raise NotSignedIn(action)
        now = self._clock()
        if not self.is_hub and now - self.last_used > IDLE_MINUTES * 60:
            self.sign_out()
            raise NotSignedIn(action, lapsed=True)
        self.last_used = now
        return self.name


def _esc(value) -> str:
    return html.escape(str(value), quote=True)


SIGN_IN_REASONS = {
    "unknown": "no passphrase is set for this name in this clinic's store (a clinic lead sets one at the "
               "command line)",
    "wrong": "the passphrase does not match",
    "locked": "too many wrong passphrases: this name is locked for a few minutes",
}


class SignInPanel:
    """Sign in and out at the top of the page (or, under JupyterHub, who the login is)."""

    def __init__(self, signed_in: SignedIn, store_of: Callable[[], object]) -> None:
        self.signed = signed_in
        self._store_of = store_of
        self.status = w.HTML("")
        self.status.add_class("pr-signin-status")
        self.name = w.Text(value="", placeholder="your name, as the clinic lead set it", description="Clinician",
                           layout=w.Layout(width="300px"), style={"description_width": "70px"})
        self.name.add_class("pr-signin-name")
        self.passphrase = w.Password(value="", placeholder="passphrase", layout=w.Layout(width="200px"))
        self.passphrase.add_class("pr-signin-passphrase")
        self.button = w.Button(description="Sign in", layout=w.Layout(width="auto"))
        self.button.add_class("pr-signin-button")
        self.button.on_click(lambda _b: self.on_sign_in())
        self.out_button = w.Button(description="Sign out", layout=w.Layout(width="auto"))
        self.out_button.add_class("pr-signout-button")
        self.out_button.on_click(lambda _b: self.on_sign_out())
        self.message = w.HTML("")
        self.message.add_class("pr-signin-message")
        self.form = own_layout(w.HBox([self.name, self.passphrase, self.button]))  # shown and hidden
        own_layout(self.out_button)
        self.widget = w.VBox([w.HBox([self.status, self.out_button]), self.form, self.message])
        self.widget.add_class("pr-signin")
        self.signed.observe(lambda _c: self.refresh(), names=["name", "how"])
        self.refresh()

    def refresh(self) -> None:
        from ..settings import clinician_role
        s = self.signed
        if s.name:
            role = clinician_role(s.name)
            via = "through the clinic's login" if s.is_hub else "with your passphrase"
            self.status.value = (f'<div class="pr-notice-box">Signed in {via} as <b class="pr-signed-name">'
                                 f'{_esc(s.name)}</b> (role: {_esc(role)}). Approvals, clearances and '
                                 "resumptions are recorded under this name.</div>")
            self.form.layout.display = "none"
            self.out_button.layout.display = "none" if s.is_hub else None
        else:
            self.status.value = ('<div class="pr-notice-box">Not signed in. Approving a template, recording a '
                                 "clearance or resuming a paused program needs you signed in with your "
                                 "passphrase.</div>")
            self.form.layout.display = None
            self.out_button.layout.display = "none"

    def on_sign_in(self) -> bool:
        name = self.name.value.strip()
        passphrase = self.passphrase.value
        self.passphrase.value = ""  # never kept in the page
        if not name or not passphrase:
            self.message.value = ('<span class="pr-msg">Enter your name and your passphrase. Nothing was '
                                  "changed.</span>")
            return False
        try:
            result = self.signed.sign_in(self._store_of(), name, passphrase)
        except Exception as exc:  # noqa: BLE001 - shown beside the button: Voila hides tracebacks
            self.message.value = f'<span class="pr-msg">Signing in failed: {_esc(exc)}</span>'
            return False
        if result.ok:
            self.message.value = ""
            return True
        why = SIGN_IN_REASONS.get(result.reason, result.reason)
        left = (f" {result.attempts_left} more tr{'y' if result.attempts_left == 1 else 'ies'} before the name "
                "is locked for a few minutes." if result.reason == "wrong" and result.attempts_left else "")
        self.message.value = f'<span class="pr-msg">Not signed in: {_esc(why)}.{_esc(left)}</span>'
        return False

    def on_sign_out(self) -> None:
        self.signed.sign_out()
        self.name.value = ""
        self.message.value = '<span>Signed out.</span>'


def bind_name_field(signed: SignedIn, field: w.Text) -> None:
    """A clinician field that shows the signed-in name (and cannot be changed) while someone is
    signed in, and is typed freely otherwise (saves and logged sessions record it)."""
    def follow(_change=None) -> None:
        if signed.name:
            field.value, field.disabled = signed.name, True
        elif field.disabled:
            field.value, field.disabled = "", False
    signed.observe(follow, names="name")
    follow()
