"""The app's clearance control: a referred person's program is a draft until cleared.

The control shows whether the program is a draft and, for a draft, lets the clinician
record the clearance (who; the time is taken when it is recorded).  The logic is in
:class:`prescribe.ui.session.ClinicSession` (``is_draft``, ``clear``); this module only
builds the widgets.  Stable CSS classes for browser tests: ``pr-clearance``,
``pr-draft-status``, ``pr-clearance-name``, ``pr-clearance-record``.
"""

from __future__ import annotations

import html

import ipywidgets as w

from .common import own_layout


class ClearanceView:
    """Draft status and the control that records a clinician's clearance."""

    def __init__(self, app) -> None:
        self.app = app
        self.status = w.HTML("")
        self.status.add_class("pr-draft-status")
        self.name = w.Text(value="", placeholder="clearing clinician's name", description="Cleared by",
                           layout=w.Layout(width="360px"))
        self.name.add_class("pr-clearance-name")
        self.button = w.Button(description="Record clearance", button_style="warning", layout=w.Layout(width="auto"))
        self.button.add_class("pr-clearance-record")
        self.button.on_click(lambda _b: self.on_clear())
        self.controls = own_layout(w.HBox([self.name, self.button]))  # shown and hidden
        self.widget = w.VBox([self.status, self.controls])
        self.widget.add_class("pr-clearance")

    def on_clear(self) -> None:
        try:
            self.app.session.clear(self.name.value or self.app.clinician.value)
        except Exception as exc:  # shown in the page: Voila hides tracebacks
            self.app.errors.show(f"Recording the clearance failed: {exc}")
        self.app.refresh(store=False)

    def refresh(self) -> None:
        s = self.app.session
        plan = s.plan
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
                                 f"{html.escape(plan.cleared_by)} at {html.escape(str(plan.cleared_at))}.</div>")
            self.controls.layout.display = "none"
        else:
            self.status.value, self.controls.layout.display = "", "none"
