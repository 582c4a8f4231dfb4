"""Section 1 of the app: open a saved person or start a new one, check and screen."""

from __future__ import annotations

from ..errors import InputError
from .common import esc, guarded

import ipywidgets as w


class PersonSection:
    """Person section of :class:`~prescribe.ui.app.ClinicApp` (a part of the app, not used alone)."""

    def _build_person_section(self) -> None:
        self.submit_button = self._button("Check and screen", "pr-intake-submit", "primary")
        self.submit_button.on_click(lambda _b: self.on_submit())
        self.new_button = self._button("New person", "pr-new-person")
        self.new_button.on_click(lambda _b: self.on_new())
        self.load_select = w.Dropdown(options=[], description="Saved people", layout=w.Layout(width="380px"),
                                      style={"description_width": "100px"})
        self.load_select.add_class("pr-load-select")
        self.load_button = self._button("Open", "pr-load-button")
        self.load_button.on_click(lambda _b: self.on_load())
        self.intake_status = w.HTML("")
        self.intake_status.add_class("pr-intake-status")
        self.person_section = self._section("1. Person: baseline at intake", "pr-section-person", [
            w.HBox([self.load_select, self.load_button, self.new_button]),
            self.intake.widget, w.HBox([self.submit_button, self.intake_status])])

    @guarded("Checking the details")
    def on_submit(self) -> bool:
        ok = self.session.submit(self.intake.data())
        self.intake.show_problems(self.session.problems)
        n = len(self.session.problems)
        self.intake_status.value = (f'<span class="pr-msg">{n} field{"s" if n != 1 else ""} to correct '
                                    f'(see the messages beside them). Nothing was screened or saved.</span>'
                                    if not ok else "<span>Details checked; screening and program below.</span>")
        self.refresh()
        return ok

    @guarded("Starting a new person")
    def on_new(self) -> None:
        self.session.reset()
        self.intake.clear()
        self.intake_status.value = ""
        self.store_status.value = ""
        self.refresh()

    @guarded("Opening the saved person")
    def on_load(self) -> None:
        patient_id = self.load_select.value
        if not patient_id:
            raise InputError.single("saved person", patient_id, "a person chosen from the list")
        self.session.load(patient_id)
        self.intake.fill(self.session.record.model_dump(mode="json"))
        self.intake_status.value = f"<span>Opened {esc(patient_id)}.</span>"
        self.refresh()
