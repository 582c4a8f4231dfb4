"""The clinic-lead panel of the app: approve a clinic template's draft version.

Only a clinic lead may approve (``prescribe.settings.require_role``); a clinician sees
the drafts and, on Approve, a refusal that says who may.  Under JupyterHub the approver
recorded is the login.
"""

from __future__ import annotations

import html

import ipywidgets as w

from ..errors import InputError, NotPermittedError
from ..settings import clinician_role
from .views import guarded


class TemplateReview:
    """Drafts of the clinic's templates with an Approve button (leads only)."""

    def __init__(self, app):
        self.app = app
        self.session = app.session
        self.errors, self.lock = app.errors, app.lock  # what @guarded uses
        self.role = w.HTML("")
        self.role.add_class("pr-template-role")
        self.drafts = w.Dropdown(options=[("- no drafts -", None)], description="Draft",
                                 layout=w.Layout(width="420px"))
        self.drafts.add_class("pr-template-drafts")
        self.approve_button = w.Button(description="Approve (clinic lead)", button_style="warning")
        self.approve_button.add_class("pr-template-approve")
        self.approve_button.on_click(lambda _b: self.on_approve())
        self.status = w.HTML("")
        self.status.add_class("pr-template-status")
        self.widget = app._section("6. Clinic templates", "pr-section-templates", [
            w.HTML("<p>A clinic lead reviews and approves the clinic's program templates; approved versions "
                   "never change. Approving confirms the template fits local guidelines; it does not replace "
                   "each person's clinical review.</p>"),
            self.role, w.HBox([self.drafts, self.approve_button]), self.status])

    def refresh(self) -> None:
        who = self.session.clinician
        role = clinician_role(who) if who else "clinician"
        shown = html.escape(who) if who else "(type your name in section 5)"
        self.role.value = f"<p>Signed in as <b>{shown}</b>, role: <b class='pr-role'>{role}</b>.</p>"
        drafts = self.session.draft_templates()
        current = self.drafts.value
        options = [(f"{t['name']} v{t['version']} (by {t['created_by']})", f"{t['name']}@{t['version']}")
                   for t in drafts]
        self.drafts.options = options or [("- no drafts -", None)]
        if current in [v for _, v in options]:
            self.drafts.value = current

    @guarded("Approving the template")
    def on_approve(self) -> None:
        choice = self.drafts.value
        if not choice:
            raise InputError.single("draft", choice, "a draft template chosen from the list")
        name, version = choice.rsplit("@", 1)
        try:
            who = self.session.approve_template(name, int(version), self.app.clinician.value)
        except NotPermittedError as exc:  # shown here too, beside the button that was refused
            self.status.value = f'<div class="pr-error-box pr-template-refused" role="alert">Not approved: {html.escape(str(exc))}</div>'
            raise
        self.status.value = (f'<div class="pr-notice-box">Approved {html.escape(name)} version {version} '
                             f'as {html.escape(who)}.</div>')
        self.refresh()
