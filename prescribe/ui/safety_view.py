"""The app's clearance control: a referred person's program is a draft until cleared.

The control shows whether the program is a draft and, for a draft, lets the signed-in
clinician record the clearance (the time is taken when it is recorded).  A clearance says
that a clinician has checked the person, so it is recorded under the clinician signed in
at the top of the page (the JupyterHub login, or a passphrase sign-in;
:mod:`prescribe.ui.identity`), never under a typed name.  A refusal (nobody signed in) is
shown beside the button.  The logic is in :class:`prescribe.ui.session.ClinicSession`
(``is_draft``, ``clear``); this module only builds the widgets.  Stable CSS classes for
browser tests: ``pr-clearance``, ``pr-draft-status``, ``pr-clearance-who``,
``pr-clearance-record``, ``pr-clearance-msg``.
"""

from __future__ import annotations

import html

import ipywidgets as w

from ..errors import InputError
from .common import own_layout
from .program_model import readable_time


class ClearanceView:
    """Draft status and the control that records the signed-in clinician's clearance."""

    def __init__(self, app) -> None:
        self.app = app
        self.status = w.HTML("")
        self.status.add_class("pr-draft-status")
        self.who = w.HTML("")
        self.who.add_class("pr-clearance-who")
        self.button = w.Button(description="Record clearance", button_style="warning", layout=w.Layout(width="auto"))
        self.button.add_class("pr-clearance-record")
        self.button.on_click(lambda _b: self.on_clear())
        self.message = w.HTML("")
        self.message.add_class("pr-clearance-msg")
        self.controls = own_layout(w.HBox([self.who, self.button, self.message]))  # shown and hidden
        self.widget = w.VBox([self.status, self.controls])
        self.widget.add_class("pr-clearance")
        app.signed.observe(lambda _c: self._show_who(), names="name")

    def _show_who(self) -> None:
        name = self.app.signed.name
        self.who.value = (f"<span>Recorded as cleared by <b>{html.escape(name)}</b> (signed in).</span>" if name else
                          "<span>Sign in at the top of the page to record the clearance under your name.</span>")

    def on_clear(self) -> bool:
        self.message.value = ""
        s = self.app.session
        try:
            who = self.app.signed.who("clear")
            ok = s.clear(who)
        except InputError as exc:  # nobody signed in: said beside the button, nothing recorded
            self.message.value = f'<span class="pr-msg">Not cleared: {html.escape(str(exc))} Nothing was recorded.</span>'
            return False
        except Exception as exc:  # noqa: BLE001 - shown in the page: Voila hides tracebacks
            self.message.value = f'<span class="pr-msg">Recording the clearance failed: {html.escape(str(exc))}</span>'
            return False
        if not ok:
            self.message.value = f'<span class="pr-msg">{html.escape(s.refusal or "Not cleared.")}</span>'
        self.app.refresh(store=False)
        return ok

    def refresh(self) -> None:
        s = self.app.session
        plan = s.plan
        self._show_who()
        if plan is None:
            self.status.value, self.controls.layout.display = "", "none"
            return
        if s.is_draft:
            self.status.value = ('<div class="pr-refusal-box pr-draft-banner" role="alert"><b>DRAFT</b>: the '
                                 "screening asks that a clinician clear this person before any loading. Do not "
                                 "start this program until the clearance is recorded below.</div>")
            self.controls.layout.display = None
        elif plan.cleared_by:
            self.status.value = (f'<div class="pr-notice-box pr-cleared" role="status">Cleared by '
                                 f"{html.escape(plan.cleared_by)} on {html.escape(readable_time(plan.cleared_at))}."
                                 "</div>")
            self.controls.layout.display = "none"
        else:
            self.status.value, self.controls.layout.display = "", "none"
