"""Section 4 of the app: preview the handout, prepare its PDF or HTML for download."""

from __future__ import annotations

import base64

import ipywidgets as w

from ..languages import LANGUAGE_NAMES, LANGUAGES, SOURCE_LANGUAGE
from .common import esc, guarded


class HandoutSection:
    """Handout section of :class:`~prescribe.ui.app.ClinicApp` (a part of the app, not used alone)."""

    def _build_handout_section(self) -> None:
        self.audience = w.Dropdown(options=[("for the person and the clinician", "both"),
                                            ("for the person", "person"), ("for the clinician", "clinician")],
                                   value="both", description="Handout", layout=w.Layout(width="360px"))
        self.audience.add_class("pr-handout-audience")
        self.paper = w.Dropdown(options=[("A4", "a4"), ("US letter", "letter")], value="a4", description="Paper")
        self.paper.add_class("pr-handout-paper")
        self.large_print = w.Checkbox(value=False, description="Large print (the person's pages)", indent=False)
        self.large_print.add_class("pr-handout-large-print")
        # The language of the person's pages (the clinician's stay in English and say whether a
        # qualified translator has reviewed that language's text).
        self.language = w.Dropdown(options=[(f"{LANGUAGE_NAMES[tag][0]} ({LANGUAGE_NAMES[tag][1]})"
                                             if LANGUAGE_NAMES[tag][0] != LANGUAGE_NAMES[tag][1]
                                             else LANGUAGE_NAMES[tag][0], tag) for tag in LANGUAGES],
                                   value=SOURCE_LANGUAGE, description="Person's pages in",
                                   style={"description_width": "initial"}, layout=w.Layout(width="320px"))
        self.language.add_class("pr-handout-language")
        self.language_note = w.HTML("")
        self.language_note.add_class("pr-handout-language-note")
        self.language.observe(lambda _change: self._show_language_review(), names="value")
        self.preview_button = self._button("Preview", "pr-handout-preview")
        self.preview_button.on_click(lambda _b: self.on_preview())
        self.pdf_button = self._button("Prepare PDF", "pr-handout-make-pdf")
        self.pdf_button.on_click(lambda _b: self.on_prepare("pdf"))
        self.html_button = self._button("Prepare HTML", "pr-handout-make-html")
        self.html_button.on_click(lambda _b: self.on_prepare("html"))
        self.download = w.HTML("")
        self.download.add_class("pr-handout-download")
        self.preview = w.HTML("")
        self.preview.add_class("pr-handout-frame")
        self.handout_section = self._section("4. Handout", "pr-section-handout", [
            w.HBox([self.audience, self.paper, self.large_print]), w.HBox([self.language, self.language_note]),
            w.HBox([self.preview_button, self.pdf_button, self.html_button, self.download]), self.preview])

    @guarded("Reading the clinic's translation reviews")
    def _show_language_review(self) -> None:
        """Beside the choice: whether a qualified translator has reviewed that language's text
        (the clinic settings); the clinician's page of the handout says the same."""
        from ..settings import translation_review

        tag = self.language.value
        if tag == SOURCE_LANGUAGE:
            self.language_note.value = ""
            return
        name = LANGUAGE_NAMES[tag][0]
        review = translation_review(tag)
        text = (f"{name} text reviewed by {review.reviewed_by} on {review.reviewed_on.isoformat()}."
                if review.reviewed else
                f"The {name} text has not been reviewed by a qualified translator: check it with the person.")
        self.language_note.value = f'<span class="pr-language-review">{esc(text)}</span>'

    @guarded("Previewing the handout")
    def on_preview(self) -> None:
        doc = self.session.handout("html", self.audience.value, self.paper.value,
                                   large_print=self.large_print.value, language=self.language.value).decode("utf-8")
        self.preview.value = (f'<iframe class="pr-handout-iframe" title="handout preview" srcdoc="{esc(doc)}" '
                              'style="width:100%;height:640px;border:1px solid #ccd;background:white"></iframe>')

    @guarded("Preparing the handout")
    def on_prepare(self, fmt: str) -> None:
        # Shown at once (a PDF takes a second or two), replaced by the link when it is ready.
        self.download.value = f'<span class="pr-preparing" role="status">Preparing the {fmt.upper()}...</span>'
        data = self.session.handout(fmt, self.audience.value, self.paper.value, large_print=self.large_print.value,
                                    language=self.language.value)
        mime = "application/pdf" if fmt == "pdf" else "text/html"
        suffix = "" if self.language.value == SOURCE_LANGUAGE else f"-{self.language.value}"
        name = f"handout-{self.session.record.patient_id}{suffix}.{fmt}"
        link = (f'<a class="pr-download-{fmt}" download="{esc(name)}" '
                f'href="data:{mime};base64,{base64.b64encode(data).decode("ascii")}">Download {fmt.upper()} '
                f'({len(data) // 1024 + 1} kB)</a>')
        self.download.value = link

    def _refresh_handout(self) -> None:
        if self.session.plan is None:  # nothing to print: no stale preview or download of another program
            self.preview.value = ""
            self.download.value = ""
