"""Section 1 of the app: find and open a saved person or start a new one, check and screen.

Opening another person, starting a new one, bringing one in from the record system or
reopening an earlier program version replaces what is on the page.  When the page holds
work the store does not (a person not saved yet, a change since the last save, details
typed but not checked, an earlier version reopened and not saved again), the page says
what would be lost and asks first: *Discard and continue* or *Keep working*.
"""

from __future__ import annotations

from typing import Callable

import ipywidgets as w
from traitlets import HasTraits, Unicode

from ..errors import InputError
from .common import esc, guarded, set_options


class PendingChange(HasTraits):
    """A change of person waiting for the clinician's word because it would lose unsaved work."""

    question = Unicode("", help="what would happen and what would be lost, in words; empty: nothing waits")

    def __init__(self, **kwargs) -> None:
        super().__init__(**kwargs)
        self.action: Callable[[], None] | None = None

    def ask(self, question: str, action: Callable[[], None]) -> None:
        self.action = action
        self.question = question

    def withdraw(self) -> None:
        self.action = None
        self.question = ""


class PersonSection:
    """Person section of :class:`~prescribe.ui.app.ClinicApp` (a part of the app, not used alone)."""

    def _build_person_section(self) -> None:
        self.submit_button = self._button("Check and screen", "pr-intake-submit", "primary")
        self.submit_button.on_click(lambda _b: self.on_submit())
        self.new_button = self._button("New person", "pr-new-person")
        self.new_button.on_click(lambda _b: self.on_new())
        self.search = w.Text(value="", placeholder="part of an id or of the name on the handout",
                             description="Find", layout=w.Layout(width="320px"), style={"description_width": "40px"})
        self.search.add_class("pr-person-search")
        self.search.observe(lambda _ch: self._show_people(), names="value")
        self.load_select = w.Dropdown(options=[], description="Saved people", layout=w.Layout(width="420px"),
                                      style={"description_width": "100px"})
        self.load_select.add_class("pr-load-select")
        self.load_button = self._button("Open", "pr-load-button")
        self.load_button.on_click(lambda _b: self.on_load())
        self.people_count = w.HTML("")
        self.people_count.add_class("pr-people-count")
        self.intake_status = w.HTML("")
        self.intake_status.add_class("pr-intake-status")
        # Asked before unsaved work is lost (its widgets are made the first time it is asked).
        self.pending = PendingChange()
        self.discard_box = w.VBox([])
        self.discard_box.add_class("pr-unsaved-box")
        self.pending.observe(lambda _c: self._show_pending(), names="question")
        self._people_rows: list[dict] = []
        self._people_names: dict[str, str] | None = None
        self._form_snapshot: dict | None = None
        self.person_section = self._section("1. Person: baseline at intake", "pr-section-person", [
            w.HBox([self.search, self.people_count]),
            w.HBox([self.load_select, self.load_button, self.new_button]), self.discard_box,
            self.intake.widget, w.HBox([self.submit_button, self.intake_status])])

    # -- unsaved work -------------------------------------------------------------------
    def _snapshot_form(self) -> None:
        """What the form holds now counts as kept (it was just filled, cleared or checked)."""
        self._form_snapshot = self.intake.data()

    def unsaved_work(self) -> str:
        """What the page holds that the store does not, in words ("" when nothing would be lost)."""
        s = self.session
        lost = []
        if s.record is not None and s.unsaved:
            pid = s.record.patient_id
            if s.opened_version is not None:
                lost.append(f"program version {s.opened_version} of {pid}, reopened and not saved again")
            elif s.saved_version is None and s.record_version is None:
                lost.append(f"{pid}, checked but never saved")
            else:
                since = f"program version {s.saved_version}" if s.saved_version else "the record"
                lost.append(f"the changes to {pid} since {since} was saved or opened")
        if self._form_snapshot is not None and self.intake.data() != self._form_snapshot:
            lost.append("details typed in the form and not yet checked")
        return "; ".join(lost)

    def ask_before_losing(self, what: str, action: Callable[[], None]) -> bool:
        """Run ``action`` at once when nothing unsaved would be lost; otherwise ask first.  Returns
        whether it ran."""
        lost = self.unsaved_work()
        if not lost:
            self.pending.withdraw()
            action()
            return True
        self.pending.ask(f"Not saved yet: {lost}. {what} anyway and lose this? Save it in section 5 first to "
                         "keep it.", action)
        return False

    def _show_pending(self) -> None:
        question = self.pending.question
        if question and not self.discard_box.children:
            self.discard_text = w.HTML("")
            self.discard_text.add_class("pr-unsaved-question")
            self.discard_button = self._button("Discard and continue", "pr-unsaved-discard", "danger")
            self.discard_button.on_click(lambda _b: self.on_discard())
            self.keep_button = self._button("Keep working", "pr-unsaved-keep")
            self.keep_button.on_click(lambda _b: self.pending.withdraw())
            self.discard_box.children = [self.discard_text, w.HBox([self.discard_button, self.keep_button])]
        if not self.discard_box.children:
            return
        self.discard_text.value = (f'<div class="pr-refusal-box" role="alertdialog">{esc(question)}</div>'
                                   if question else "")
        for widget in self.discard_box.children[1].children:
            widget.disabled = not question
        self.discard_box.children[1].layout = w.Layout(display="flex" if question else "none")

    @guarded("Continuing without saving")
    def on_discard(self) -> None:
        action = self.pending.action
        self.pending.withdraw()
        if action is not None:
            action()

    # -- people -------------------------------------------------------------------------
    def _show_people(self) -> None:
        """The saved people whose id (or name on the handout) contains the search text."""
        needle = self.search.value.strip().casefold()
        rows = self._people_rows
        if needle:
            names = self._names() if len(needle) >= 2 else {}
            rows = [r for r in rows if needle in r["patient_id"].casefold()
                    or needle in names.get(r["patient_id"], "").casefold()]
        options = [(self._person_label(r), r["patient_id"]) for r in rows]
        if needle:
            self.people_count.value = (f"<small>{len(rows)} of {len(self._people_rows)} saved people match</small>")
            set_options(self.load_select, options if options else [("- nobody matches -", None)])
        else:
            self.people_count.value = f"<small>{len(self._people_rows)} saved people</small>"
            set_options(self.load_select, [("- choose -", None)] + options)

    @staticmethod
    def _person_label(row: dict) -> str:
        """A person in the list: their pseudonymous id (what the clinic files them under)."""
        return row["patient_id"]

    def _names(self) -> dict[str, str]:
        """Each saved person's name on the handout (read once a list, for the search)."""
        if self._people_names is None:
            self._people_names = self.session.people_names()
        return self._people_names

    def set_people(self, rows: list[dict]) -> None:
        """The store's people, newest first (the search keeps filtering them)."""
        if rows != self._people_rows:
            self._people_names = None
        self._people_rows = rows
        self._show_people()

    # -- actions -----------------------------------------------------------------------------
    @guarded("Checking the details")
    def on_submit(self) -> bool:
        ok = self.session.submit(self.intake.data())
        self.intake.show_problems(self.session.problems)
        n = len(self.session.problems)
        self.intake_status.value = (f'<span class="pr-msg">{n} field{"s" if n != 1 else ""} to correct '
                                    f'(see the messages beside them). Nothing was screened or saved.</span>'
                                    if not ok else "<span>Details checked; screening and program below.</span>")
        if ok:
            self._snapshot_form()
        self.refresh()
        return ok

    @guarded("Starting a new person")
    def on_new(self) -> bool:
        return self.ask_before_losing("Start a new person", self.start_new)

    def start_new(self) -> None:
        """Clear the page for a new person (nothing asked: callers ask first)."""
        self.session.reset()
        self.intake.clear()
        fhir = getattr(self, "fhir", None)
        if fhir is not None:
            fhir.clear_marks()  # no box is marked as filled from the record system any more
        self._snapshot_form()
        self.intake_status.value = ""
        if self.work_built:
            self.store_status.value = ""
        self.refresh()

    @guarded("Opening the saved person")
    def on_load(self) -> bool:
        patient_id = self.load_select.value
        if not patient_id:
            raise InputError.single("saved person", patient_id, "a person chosen from the list")
        return self.ask_before_losing(f"Open {patient_id}", lambda: self.open_person(patient_id))

    def open_person(self, patient_id: str, version: int | None = None) -> None:
        """Open a saved person (at an earlier program ``version`` when given); nothing asked."""
        self.session.load(patient_id, version)
        self.intake.fill(self.session.record.model_dump(mode="json"))
        self._snapshot_form()
        shown = (f" at program version {self.session.opened_version} (not the program in force, version "
                 f"{self.session.saved_version}: save it to make it the next version)"
                 if self.session.opened_version is not None else "")
        self.intake_status.value = f"<span>Opened {esc(patient_id)}{esc(shown)}.</span>"
        self.refresh()
