"""Asks for the clinic's name and phone once, when no clinic name is set.

Handouts tell the person to call the clinic; without settings they say "Clinic name not
set".  On a real install the app shows this small form until a name and a contact are
saved (to the settings file :func:`prescribe.settings.clinic` reads); the demo
(`make app`) comes with the invented clinic's settings, so the form does not appear.
"""

from __future__ import annotations

import html

import ipywidgets as w

from ..errors import InputError
from .. import settings
from .common import own_layout


class ClinicSettingsForm:
    """Name and contact of the clinic, saved once; hidden while a name is set."""

    def __init__(self) -> None:
        self.name = w.Text(value="", description="Clinic name *", placeholder="as printed on handouts",
                           layout=w.Layout(width="420px"), style={"description_width": "110px"})
        self.name.add_class("pr-clinic-name")
        self.contact = w.Text(value="", description="Phone *", placeholder="phone, then any e-mail or address",
                              layout=w.Layout(width="420px"), style={"description_width": "110px"})
        self.contact.add_class("pr-clinic-contact")
        self.message = w.HTML("")
        self.message.add_class("pr-msg")
        self.message.add_class("pr-clinic-message")
        self.save_button = w.Button(description="Save clinic settings", button_style="primary",
                                    layout=w.Layout(width="auto"))
        self.save_button.add_class("pr-clinic-save")
        self.save_button.on_click(lambda _b: self.save())
        self.status = w.HTML("")
        self.status.add_class("pr-clinic-status")
        self.form = own_layout(w.VBox([
            w.HTML("<p><b>Your clinic</b>: handouts tell the person to call the clinic. Enter its name and phone "
                   "once; they are kept in the clinic settings file and printed on every handout.</p>"),
            self.name, self.contact, w.HBox([self.save_button, self.message])]))
        self.widget = w.VBox([self.form, self.status])
        self.widget.add_class("pr-clinic-settings")
        self.refresh()

    def refresh(self) -> None:
        try:
            shown = not settings.clinic_is_set()
        except InputError as exc:  # an unreadable settings file: say so where it would be fixed
            self.message.value = html.escape(str(exc))
            shown = True
        self.form.layout.display = "flex" if shown else "none"

    def save(self) -> bool:
        try:
            path = settings.save_clinic(self.name.value, self.contact.value)
        except InputError as exc:
            self.message.value = html.escape(str(exc))
            return False
        self.message.value = ""
        c = settings.clinic()
        self.status.value = (f'<div class="pr-notice-box" role="status">Clinic settings saved ({html.escape(str(path))}): '
                             f"handouts will show {html.escape(c.name)}, {html.escape(c.contact)}.</div>")
        self.refresh()
        return True
