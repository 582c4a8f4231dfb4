"""Section 5 of the app: who is saving, save the person and the program, the history of versions."""

from __future__ import annotations

import ipywidgets as w

from ..errors import PrescribeError
from .common import esc, guarded, set_options
from .history_view import history_html
from .templates_view import program_notice_html


class StoreSection:
    """Store section of :class:`~prescribe.ui.app.ClinicApp` (a part of the app, not used alone)."""

    def _build_store_section(self) -> None:
        login = self.session.login
        self.clinician = w.Text(value=self.session.clinician, description="Clinician *",
                                placeholder="your name or initials", disabled=login is not None,
                                tooltip=("your login: every save is recorded under it" if login else
                                         "your name or initials, recorded with every save"))
        self.clinician.add_class("pr-store-clinician")
        self.names.add(self.clinician)  # typed once for the page (common.SharedName)
        if login is not None:
            self.clinician.add_class("pr-store-clinician-login")
        self.save_note = w.Text(value="", description="Note", placeholder="why this version (optional)",
                                layout=w.Layout(width="420px"),
                                tooltip="kept with the program version in the history below")
        self.save_note.add_class("pr-store-note")
        self.save_button = self._button("Save person and program", "pr-store-save", "success")
        self.save_button.on_click(lambda _b: self.on_save())
        self.store_status = w.HTML("")
        self.store_status.add_class("pr-store-status")
        self.history = w.HTML("")
        self.history.add_class("pr-store-history")
        self.store_section = self._section("5. Save and history", "pr-section-store", [
            w.HBox([self.clinician, self.save_note, self.save_button]), self.store_status,
            w.HTML("<b>Program versions</b>"), self.history])

    @guarded("Saving")
    def on_save(self) -> None:
        version = self.session.save(self.clinician.value.strip(), note=self.save_note.value.strip())
        if version is not None:
            self.save_note.value = ""  # saved with that version; a new note goes with the next
        pid = self.session.record.patient_id
        if self.session.notice:
            self.store_status.value = f'<div class="pr-notice-box">{esc(self.session.notice)}</div>'
        else:
            what = f"program version {version}" if version else "record (no program yet)"
            self.store_status.value = f'<div class="pr-notice-box">Saved {esc(pid)}: {what}.</div>'
        self.refresh()

    def _refresh_store(self) -> None:
        try:
            people = self.session.saved_people()
            versions = self.session.versions()
        except PrescribeError as exc:
            self.history.value = f'<p class="pr-msg">The store could not be read: {esc(exc)}</p>'
            return
        self.sensor_panel.show_latest()
        set_options(self.load_select, [("- choose -", None)] + [(p, p) for p in people])
        self.history.value = history_html(versions) + program_notice_html(self.session)
        self.templates_view.refresh()  # the drafts waiting for review, once the section is open
