"""The record system in the app (HL7 FHIR R4, docs/fhir.md): bring a person in from a Bundle,
send the saved program out as a Bundle.

"Bring in from the record system" (section 1): a FileUpload of a Bundle; the intake form is
filled from it, the boxes it filled are marked (CSS class ``pr-from-fhir``) and listed with the
resource each came from; the clinician checks them and presses *Check and screen* as usual
(nothing is screened or saved by the upload itself).  "Send to the record system" (section 5):
the Bundle of the current saved program, as a download link.  The reading and writing are
:mod:`prescribe.fhir`'s; this module only shows them.
"""

from __future__ import annotations

import base64
import json

import ipywidgets as w

from ..errors import InputError
from .common import esc, guarded

#: Marks a box the record system filled (until the clinician changes it or a new person starts).
FILLED_CLASS = "pr-from-fhir"


class FhirPanel:
    """The two record-system controls, over the app (:class:`~prescribe.ui.app.ClinicApp`)."""

    def __init__(self, app) -> None:
        self.app = app
        self.errors = app.errors
        self.lock = app.lock  # one action at a time (common.guarded)
        self.upload = w.FileUpload(accept=".json,application/fhir+json,application/json", multiple=False,
                                   description="Bring in from the record system",
                                   layout=w.Layout(width="auto"),
                                   tooltip="a FHIR R4 Bundle (JSON) of one person, exported by the clinic's "
                                           "record system")
        self.upload.add_class("pr-fhir-upload")
        self.upload.observe(self._on_upload, names="value")
        self.import_status = w.HTML("")
        self.import_status.add_class("pr-fhir-import-status")
        self.import_widget = w.VBox([
            w.HBox([self.upload, w.HTML("<small>A FHIR R4 Bundle of one person: the boxes it fills are marked; "
                                        "check them, then press <b>Check and screen</b>.</small>")]),
            self.import_status])
        self.send_button = w.Button(description="Send to the record system", layout=w.Layout(width="auto"),
                                    tooltip="the saved program as a FHIR R4 Bundle for the clinic's integration engine")
        self.send_button.add_class("pr-fhir-send")
        self.send_button.on_click(lambda _b: self.on_send())
        self.send_link = w.HTML("")
        self.send_link.add_class("pr-fhir-download")
        self.export_widget = w.HBox([self.send_button, self.send_link])
        self.marked: list[w.Widget] = []
        self.last_import = None

    # -- bring in ---------------------------------------------------------------------
    def _on_upload(self, change) -> None:
        files = change["new"]
        if files:
            item = files[0]
            self.bring_in(bytes(item["content"]), item.get("name", "bundle.json"))

    @guarded("Bringing the person in from the record system")
    def bring_in(self, content: bytes, name: str = "bundle.json") -> None:
        """Fill the intake form from a Bundle's bytes; mark and list what it filled."""
        from ..fhir.reader import read_bundle
        from ..fileio import parse_json_text

        self.import_status.value = ""
        try:
            text = content.decode("utf-8-sig")
        except UnicodeDecodeError:
            raise InputError.single(name, "not UTF-8 text", "a FHIR R4 Bundle in JSON (UTF-8)") from None
        result = read_bundle(parse_json_text(text, name), source=name)
        self.app.ask_before_losing(f"Bring in {result.record.patient_id} from {name}",
                                   lambda: self._fill(result, name))

    def _fill(self, result, name: str) -> None:
        """Start a new person and fill the form from the Bundle's record (nothing asked: the caller asks)."""
        self.app.start_new()
        self.app.intake.fill(result.record.model_dump(mode="json"))
        self._mark(sorted({p["field"].split("[")[0] for p in result.provenance}))
        self.last_import = result
        rows = "".join(f"<li>{esc(p['field'])}: {esc(p['resource'])}</li>" for p in result.provenance)
        unused = "".join(f"<li>{esc(n['resource'])}: {esc(n['why'])}</li>" for n in result.not_used)
        notes = "".join(f"<li>{esc(n)}</li>" for n in result.notes)
        self.import_status.value = (
            f'<div class="pr-notice-box"><b>Brought in {esc(result.record.patient_id)} from {esc(name)}.</b> '
            "The marked boxes were filled from the record system: check each against the person, then press "
            "<b>Check and screen</b>. Nothing has been screened or saved yet."
            f'<details open><summary>Filled ({len(result.provenance)})</summary><ul class="pr-fhir-filled">{rows}</ul>'
            "</details>"
            + (f"<details><summary>Not used ({len(result.not_used)})</summary><ul>{unused}</ul></details>" if unused else "")
            + (f'<details open><summary>Notes ({len(result.notes)})</summary><ul class="pr-fhir-notes">{notes}</ul>'
               "</details>" if notes else "")
            + "</div>")

    def _mark(self, fields: list[str]) -> None:
        self.clear_marks()
        inputs = self.app.intake.inputs
        for key, widget in inputs.items():
            if key in fields or key.split(".")[0] in fields:  # a score's own site, a whole object
                widget.add_class(FILLED_CLASS)
                self.marked.append(widget)
        for row in getattr(self.app.intake, "fracture_rows", []):
            if "fractures" in fields:
                for k, widget in row.items():
                    if not k.startswith("_"):
                        widget.add_class(FILLED_CLASS)
                        self.marked.append(widget)
        for code, box in getattr(self.app.intake, "conditions", {}).items():
            if box.value and "conditions" in fields:
                box.add_class(FILLED_CLASS)
                self.marked.append(box)

    def clear_marks(self) -> None:
        for widget in self.marked:
            widget.remove_class(FILLED_CLASS)
        self.marked = []

    def marked_keys(self) -> list[str]:
        inputs = self.app.intake.inputs
        return sorted(k for k, v in inputs.items() if FILLED_CLASS in v._dom_classes)

    # -- send -------------------------------------------------------------------------
    @guarded("Preparing the Bundle for the record system")
    def on_send(self) -> None:
        """The saved program of the person on screen as a FHIR R4 Bundle, as a download link."""
        from ..errors import NotFoundError
        from ..fhir.writer import program_bundle
        from ..settings import current_clinician

        s = self.app.session
        if s.record is None:
            raise InputError.single("person", None, "a person checked and saved (press Check and screen, then Save)")
        pid = s.record.patient_id
        store = s.store
        try:
            record = store.get_patient(pid)
            plan = store.get_program(pid)
            version = store.latest_program_version(pid)
        except NotFoundError:
            raise InputError.single("program", pid, "a saved program (press Save person and program first)") from None
        who = current_clinician(self.app.clinician.value.strip() if getattr(self.app, "work_built", False) else None)
        bundle = program_bundle(plan, record, who, version=version)
        data = json.dumps(bundle, indent=2, ensure_ascii=False).encode("utf-8")
        name = f"fhir-{pid}-v{version}.json"
        status = next(e["resource"]["status"] for e in bundle["entry"] if e["resource"]["resourceType"] == "CarePlan")
        self.send_link.value = (
            f'<a class="pr-fhir-bundle-link" download="{esc(name)}" href="data:application/fhir+json;base64,'
            f'{base64.b64encode(data).decode("ascii")}">Download the Bundle for the record system '
            f'({len(data) // 1024 + 1} kB, program version {version}, CarePlan {esc(status)})</a>'
            "<br><small>Your clinic's integration engine sends it to the record system; this app opens no "
            "connection itself.</small>")
