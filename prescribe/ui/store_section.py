"""Section 5 of the app: who is saving, save the person and the program, the history of versions."""

from __future__ import annotations

import ipywidgets as w

from ..errors import InputError, PrescribeError
from .common import esc, guarded, set_options
from .history_view import history_html
from .identity import bind_name_field
from .program_model import readable_time
from .templates_view import program_notice_html


class StoreSection:
    """Store section of :class:`~prescribe.ui.app.ClinicApp` (a part of the app, not used alone)."""

    def _build_store_section(self) -> None:
        login = self.session.login
        self.clinician = w.Text(value="", description="Clinician *", placeholder="your name or initials",
                                tooltip=("your login: every save is recorded under it" if login else
                                         "your name or initials, recorded with every save"))
        self.clinician.add_class("pr-store-clinician")
        # The signed-in clinician (the hub login, or a passphrase sign-in), else typed here: a name
        # typed in another section never fills this one.
        bind_name_field(self.signed, self.clinician)
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
        # Any earlier version opened again: on the page to read, print or save as the next version.
        self.version_select = w.Dropdown(options=[], description="Version", layout=w.Layout(width="520px"),
                                         style={"description_width": "60px"})
        self.version_select.add_class("pr-version-select")
        self.version_button = self._button("Open this version", "pr-version-open")
        self.version_button.on_click(lambda _b: self.on_open_version())
        self.version_status = w.HTML("")
        self.version_status.add_class("pr-version-status")
        self.store_section = self._section("5. Save and history", "pr-section-store", [
            w.HBox([self.clinician, self.save_note, self.save_button]), self.store_status,
            w.HTML("<b>Program versions</b>"), self.history,
            w.HBox([self.version_select, self.version_button]), self.version_status])

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

    @guarded("Opening the program version")
    def on_open_version(self) -> bool:
        """Reopen the chosen program version of the open person (asked first when work is unsaved)."""
        version = self.version_select.value
        s = self.session
        if s.record is None or not version:
            raise InputError.single("version", version, "a saved program version of the open person, chosen "
                                                        "from the list")
        pid = s.record.patient_id
        latest = s.saved_version
        return self.ask_before_losing(
            f"Open program version {version} of {pid}",
            lambda: self.open_person(pid, None if version == latest else version))

    def _refresh_versions(self, versions: list[dict]) -> None:
        s = self.session
        options = [(f"Version {v['version']}, saved {readable_time(v['saved'])} by {v['clinician']}"
                    + (f": {v['note']}" if v.get("note") else "") + (" (in force)" if v["version"] == s.saved_version
                                                                     else ""), v["version"])
                   for v in reversed(versions)]
        set_options(self.version_select, options or [("- no saved version -", None)],
                    fallback=s.opened_version or s.saved_version)
        if s.opened_version is not None:
            self.version_status.value = (
                f'<div class="pr-notice-box pr-version-shown" role="status">On the page: program version '
                f"{s.opened_version}, as it was saved. The program in force is version {s.saved_version}; save "
                f"in this section to make version {s.opened_version}'s program the next version, or open the "
                "version in force again.</div>")
        else:
            self.version_status.value = ""

    def _refresh_store(self) -> None:
        try:
            people = self.session.saved_people_rows()
            versions = self.session.versions() if self.work_built else []
        except PrescribeError as exc:
            if self.work_built:
                self.history.value = f'<p class="pr-msg">The store could not be read: {esc(exc)}</p>'
            else:
                self.people_count.value = f'<span class="pr-msg">The store could not be read: {esc(exc)}</span>'
            return
        self.sensor_panel.show_latest()
        self.set_people(people)
        self.templates_view.refresh()  # the drafts waiting for review, once the section is open
        if not self.work_built:
            return
        self.history.value = history_html(versions, shown=self.session.opened_version or self.session.saved_version) \
            + program_notice_html(self.session)
        self._refresh_versions(versions)
