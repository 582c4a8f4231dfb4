"""The clinic lead's section of the app: the clinic's templates under review.

- the template list (shipped and clinic versions: status, author, approver, review dates);
- a template shown as a form built from the template's own field metadata
  (:func:`prescribe.planning.templates.template_fields`: bounds, unit, help), each number with
  its source and certainty; editable into a new draft version, each bad value named
  beside its field;
- check (fields and the safety check over the reference panel), approve (never by the
  author), retire;
- two versions compared over the reference panel, with charts;
- the caseload what-if, with a progress bar and a table of who would change.

The section is shown by its title and built the first time it is opened (nothing is
built or read before), so the clinician's page opens as fast as without it.  At its top,
the drafts waiting for review with an Approve button (clinic leads only: a clinician
sees the drafts and, on Approve, a refusal that says who may; under JupyterHub the
approver recorded is the login).  Widgets carry stable ``pr-tpl-...`` CSS classes.
"""

from __future__ import annotations

import html
import threading
from typing import Any

import ipywidgets as w

from ..errors import FieldProblem, InputError, NotPermittedError, PrescribeError
from .common import ErrorArea, LazyPanel, LazySection, guarded, set_options

_ESC = html.escape


def _esc(v: Any) -> str:
    return _ESC(str(v), quote=True)


def _css_key(path: str) -> str:
    return path.replace(".", "-").replace("[", "-").replace("]", "")


def _table(rows: list[dict], columns: list[str], css: str) -> str:
    if not rows:
        return f'<p class="{css}"><i>Nothing to show.</i></p>'
    head = "".join(f"<th>{_esc(c.replace('_', ' '))}</th>" for c in columns)
    body = "".join("<tr>" + "".join(f"<td>{_esc('' if r.get(c) is None else r.get(c))}</td>" for c in columns)
                   + "</tr>" for r in rows)
    return f'<table class="pr-table {css}"><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>'


def _number(text: str, whole: bool) -> Any:
    """The typed value of a form box; text that is not a number is returned as typed, so the
    template's own check names it (bounded widgets would clamp it silently)."""
    t = (text or "").strip()
    if t == "":
        return None
    try:
        return int(t) if whole else float(t)
    except ValueError:
        try:
            f = float(t)
        except ValueError:
            return t
        return int(f) if whole and f.is_integer() else f


def program_notice_html(session) -> str:
    """A notice when the open program's template version is retired or past its review date."""
    plan = getattr(session, "plan", None)
    if plan is None or getattr(session, "store_url", None) is None:
        return ""
    from ..clinic.template_library import program_template_notice
    try:
        text = program_template_notice(plan, session.store)
    except PrescribeError:
        return ""
    return f'<div class="pr-notice-box pr-template-notice" role="status">{_esc(text)}</div>' if text else ""


class TemplatesView(LazyPanel):
    """The clinic lead's section over a :class:`~prescribe.ui.session.ClinicSession` (its store)."""

    def __init__(self, session, app=None) -> None:
        """The section over ``session``; inside the app, ``app`` (its error area for the drafts' Approve)."""
        self.session = session
        self.app = app
        self.errors = app.errors if app is not None else ErrorArea()  # what @guarded uses
        self.lock = app.lock if app is not None else threading.RLock()
        self.loaded = False
        self.current = None          # the TemplateVersion shown in the form
        self.last_compare: dict | None = None
        self.last_whatif = None
        self._lock = threading.RLock()
        self.section = LazySection("8. Clinic templates (clinic lead)", "pr-section-templates", self._build,
                                   after=self.refresh)

    def _build(self) -> list:
        """The section's widgets (built the first time it is opened)."""
        from ..planning.templates import CERTAINTY_LEVELS, template_fields

        session = self.session
        self.fields = template_fields()

        def button(text, css, style=""):
            b = w.Button(description=text, button_style=style, layout=w.Layout(width="auto"))
            b.add_class(css)
            return b

        def html_box(css):
            box = w.HTML("")
            box.add_class(css)
            return box

        self.error = html_box("pr-tpl-error")
        login = getattr(session, "login", None)  # under the hub, the login: recorded, never typed
        self.clinician = w.Text(value=getattr(session, "clinician", "") or "", description="Clinician *",
                                placeholder="your name or initials", disabled=login is not None)
        self.clinician.add_class("pr-tpl-clinician")
        if self.app is not None:
            self.app.names.add(self.clinician)

        # Drafts waiting for a clinic lead: the quickest way to approve one.
        self.role = html_box("pr-template-role")
        self.drafts = w.Dropdown(options=[("- no drafts -", None)], description="Draft",
                                 layout=w.Layout(width="420px"))
        self.drafts.add_class("pr-template-drafts")
        self.approve_draft_button = button("Approve (clinic lead)", "pr-template-approve", "warning")
        self.approve_draft_button.on_click(lambda _b: self.on_approve_draft())
        self.draft_status = html_box("pr-template-status")
        self.list_box = html_box("pr-tpl-list")
        self.refresh_button = button("Refresh list", "pr-tpl-refresh")
        self.refresh_button.on_click(lambda _b: self.refresh())
        self.select = w.Dropdown(options=[], description="Template", layout=w.Layout(width="380px"))
        self.select.add_class("pr-tpl-select")
        self.open_button = button("Show", "pr-tpl-open")
        self.open_button.on_click(lambda _b: self.on_open())
        self.doc_status = html_box("pr-tpl-doc-status")

        # The form, from the template's own metadata.
        self.name = w.Text(description="Name", layout=w.Layout(width="380px"))
        self.name.add_class("pr-tpl-name")
        self.title = w.Text(description="Title", layout=w.Layout(width="600px"))
        self.title.add_class("pr-tpl-title")
        self.summary = w.Textarea(description="Summary", layout=w.Layout(width="600px", height="60px"))
        self.summary.add_class("pr-tpl-summary")
        self.note = w.Text(description="Change note", placeholder="what changed and why (default: the fields "
                                                                  "changed)", layout=w.Layout(width="600px"))
        self.note.add_class("pr-tpl-note")
        self.inputs: dict[str, w.Text] = {}
        self.sources: dict[str, w.Text] = {}
        self.certainty: dict[str, w.Dropdown] = {}
        self.messages: dict[str, w.HTML] = {}
        rows = []
        for f in self.fields:
            box = w.Text(layout=w.Layout(width="90px"))
            box.add_class(f"pr-tpl-field-{_css_key(f.path)}")
            src = w.Text(placeholder="source (citation, 'common practice' or 'from memory')",
                         layout=w.Layout(width="420px"))
            src.add_class(f"pr-tpl-source-{_css_key(f.path)}")
            cert = w.Dropdown(options=[("certainty: not recorded", "")] + [(c, c) for c in CERTAINTY_LEVELS],
                              layout=w.Layout(width="200px"))
            cert.add_class(f"pr-tpl-certainty-{_css_key(f.path)}")
            msg = w.HTML("")
            msg.add_class(f"pr-tpl-msg-{_css_key(f.path)}")
            bounds = f"{f.low:g} to {f.high:g} {f.unit}"
            label = w.HTML(f'<div class="pr-field-label" title="{_esc(f.help)}"><b>{_esc(f.path)}</b> '
                           f'<small>({_esc(bounds)})</small><br><small>{_esc(f.help)}</small></div>',
                           layout=w.Layout(width="330px"))
            self.inputs[f.path], self.sources[f.path], self.certainty[f.path], self.messages[f.path] = \
                box, src, cert, msg
            rows.append(w.VBox([w.HBox([label, box, cert, msg]), w.HBox([w.HTML("", layout=w.Layout(width="330px")),
                                                                          src])]))
        self.messages["general"] = html_box("pr-tpl-msg-general")
        self.phases = html_box("pr-tpl-phases")
        self.form = w.VBox([self.name, self.title, self.summary, *rows, w.HTML("<b>Resistance phases</b> "
                            "<small>(kept from the version shown; edit them in the TOML file)</small>"),
                            self.phases, self.note, self.messages["general"]])
        self.form.add_class("pr-tpl-form")

        self.check_button = button("Check", "pr-tpl-check")
        self.check_button.on_click(lambda _b: self.on_check())
        self.save_button = button("Save as new draft", "pr-tpl-save", "primary")
        self.save_button.on_click(lambda _b: self.on_save())
        self.review_by = w.Text(description="Review by", placeholder="YYYY-MM-DD (default: in a year)")
        self.review_by.add_class("pr-tpl-review-by")
        self.approve_button = button("Approve", "pr-tpl-approve", "success")
        self.approve_button.on_click(lambda _b: self.on_approve())
        self.retire_button = button("Retire", "pr-tpl-retire", "warning")
        self.retire_button.on_click(lambda _b: self.on_retire())
        self.status = html_box("pr-tpl-status")
        self.check_result = html_box("pr-tpl-check-result")

        # Compare.
        self.compare_a = w.Dropdown(options=[], description="A", layout=w.Layout(width="300px"))
        self.compare_a.add_class("pr-tpl-compare-a")
        self.compare_b = w.Dropdown(options=[], description="B", layout=w.Layout(width="300px"))
        self.compare_b.add_class("pr-tpl-compare-b")
        self.compare_button = button("Compare over the panel", "pr-tpl-compare")
        self.compare_button.on_click(lambda _b: self.on_compare())
        self.compare_table = html_box("pr-tpl-compare-table")
        self.compare_fields = html_box("pr-tpl-compare-fields")
        self.chart_box = w.VBox([])
        self.chart_box.add_class("pr-tpl-compare-charts")
        self.charts = None

        # Caseload what-if.
        self.whatif_template = w.Dropdown(options=[], description="Template", layout=w.Layout(width="300px"))
        self.whatif_template.add_class("pr-tpl-whatif-template")
        self.whatif_rules = w.Text(description="Rules folder", placeholder="optional: a folder of draft rule files",
                                   layout=w.Layout(width="420px"))
        self.whatif_rules.add_class("pr-tpl-whatif-rules")
        self.whatif_button = button("Run what-if on the caseload", "pr-tpl-whatif")
        self.whatif_button.on_click(lambda _b: self.on_whatif())
        self.progress = w.IntProgress(value=0, min=0, max=100, description="People", bar_style="info")
        self.progress.add_class("pr-tpl-whatif-progress")
        self.whatif_table = html_box("pr-tpl-whatif-table")

        from ..cautions import with_standard
        cautions = w.HTML('<div class="pr-cautions"><b>Cautions</b><ul>' + "".join(
            f"<li>{_esc(c)}</li>" for c in with_standard(
                ["A template's figures over invented people are a review aid; every program built from it is "
                 "reviewed by a licensed clinician."])) + "</ul></div>")
        return [
            w.HTML("<p>A clinic lead reviews and approves the clinic's program templates; approved versions "
                   "never change. Approving confirms the template fits local guidelines; it does not replace "
                   "each person's clinical review.</p>"),
            self.error, w.HBox([self.clinician, self.refresh_button]), self.role,
            w.HTML("<h3>Drafts waiting for review</h3>"), w.HBox([self.drafts, self.approve_draft_button]),
            self.draft_status, w.HTML("<h3>All versions</h3>"), self.list_box,
            w.HTML("<h3>Template</h3>"), w.HBox([self.select, self.open_button]), self.doc_status, self.form,
            w.HBox([self.check_button, self.save_button, self.review_by, self.approve_button, self.retire_button]),
            self.status, self.check_result,
            w.HTML("<h3>Compare two versions</h3>"), w.HBox([self.compare_a, self.compare_b, self.compare_button]),
            self.compare_table, self.compare_fields, self.chart_box,
            w.HTML("<h3>Caseload what-if</h3>"), w.HBox([self.whatif_template, self.whatif_rules]),
            w.HBox([self.whatif_button, self.progress]), self.whatif_table, cautions]

    # -- plumbing ---------------------------------------------------------------------
    def _run(self, action: str, fn, *args):
        with self._lock:
            try:
                result = fn(*args)
            except PrescribeError as exc:
                self.error.value = f'<div class="pr-error-box" role="alert">{_esc(action)}: {_esc(exc)}</div>'
                return None
            except Exception as exc:  # noqa: BLE001 - shown in the page, never lost
                self.error.value = (f'<div class="pr-error-box" role="alert">{_esc(action)} failed '
                                    f'({exc.__class__.__name__}: {_esc(exc)}). Nothing was saved by this step.</div>')
                return None
            self.error.value = ""
            return result

    @property
    def store(self):
        return self.session.store

    def _who(self) -> str:
        who = self.clinician.value.strip()
        if not who:
            raise InputError.single("clinician", who, "your name or initials (recorded with the version)")
        return who

    def _lead(self, action: str) -> str:
        """The clinician (the hub login under JupyterHub), refused unless a clinic lead may do ``action``."""
        from ..settings import current_clinician, require_role
        who = current_clinician(self._who())
        require_role(who, action)
        return who

    # -- list -------------------------------------------------------------------------
    def refresh(self) -> None:
        """Re-read the versions and the drafts (nothing to do until the section is built)."""
        if not self.section.built:
            return
        self._run("Listing the templates", self._refresh)

    def _refresh(self) -> None:
        from ..clinic.template_library import list_versions

        versions = list_versions(self.store)
        self.versions = versions
        rows = []
        for v in versions:
            r = v.listing()
            rows.append({**r, "review_by": (r["review_by"] or "") + (" (overdue)" if r["review_overdue"] else ""),
                         "ref": v.ref})
        self.list_box.value = _table(rows, ["ref", "status", "origin", "author", "approver", "approved_at",
                                            "review_by", "change_note"], "pr-tpl-list-table")
        refs = [(f"{v.ref} ({v.status}, {v.origin})", v.ref) for v in versions]
        changed = [set_options(dd, refs) for dd in (self.select, self.compare_a, self.compare_b, self.whatif_template)]
        if any(changed) and self.compare_b.value == self.compare_a.value and len(refs) > 1:  # a new list: A and B differ
            self.compare_b.value = refs[1][1]
        self.loaded = True
        self._refresh_drafts()
        if self.current is None and refs:
            self._open(self.select.value)

    # -- drafts waiting for a lead --------------------------------------------------------
    def _refresh_drafts(self) -> None:
        from ..settings import clinician_role

        who = self.clinician.value.strip()
        role = clinician_role(who) if who else "clinician"
        shown = _esc(who) if who else "(type your name above)"
        self.role.value = f"<p>Signed in as <b>{shown}</b>, role: <b class='pr-role'>{role}</b>.</p>"
        options = [(f"{t['name']} v{t['version']} (by {t['created_by']})", f"{t['name']}@{t['version']}")
                   for t in self.session.draft_templates()]
        set_options(self.drafts, options or [("- no drafts -", None)])

    @guarded("Approving the template")
    def on_approve_draft(self) -> None:
        """Approve the draft chosen in the list (clinic leads only; refused in the page otherwise)."""
        choice = self.drafts.value
        if not choice:
            raise InputError.single("draft", choice, "a draft template chosen from the list")
        name, version = choice.rsplit("@", 1)
        try:
            who = self.session.approve_template(name, int(version), self.clinician.value)
        except NotPermittedError as exc:  # shown here too, beside the button that was refused
            self.draft_status.value = (f'<div class="pr-error-box pr-template-refused" role="alert">Not approved: '
                                       f'{_esc(exc)}</div>')
            raise
        self.draft_status.value = (f'<div class="pr-notice-box">Approved {_esc(name)} version {version} '
                                   f'as {_esc(who)}.</div>')
        self._refresh()

    # -- the form ---------------------------------------------------------------------
    def on_open(self) -> None:
        self._run("Showing the template", self._open, self.select.value)

    def _open(self, ref: str) -> None:
        from ..clinic.template_library import resolve

        tv = resolve(ref, self.store, purpose="read", field="template")
        self.current = tv
        body = tv.body
        self.name.value = tv.name if tv.origin == "clinic" else f"clinic_{tv.name}"
        self.title.value = str(body.get("title", ""))
        self.summary.value = str(body.get("summary", ""))
        sources, certainty = body.get("sources") or {}, body.get("certainty") or {}
        for f in self.fields:
            value = (body.get(f.table) or {}).get(f.key)
            self.inputs[f.path].value = "" if value is None else (f"{value:g}" if isinstance(value, float)
                                                                   else str(value))
            self.sources[f.path].value = str(sources.get(f.key, ""))
            self.certainty[f.path].value = certainty.get(f.key, "") if certainty.get(f.key) in \
                [o[1] for o in self.certainty[f.path].options] else ""
        res = body.get("resistance") or {}
        phase_rows = [{"list": key, **ph} for key in ("phases", "spine_sparing_phases") for ph in res.get(key) or []]
        self.phases.value = _table(phase_rows, ["list", "name", "weeks", "sets", "reps", "pct_1rm", "intensity"],
                                   "pr-tpl-phase-table")
        self.note.value = ""
        self.show_problems([])
        self.check_result.value = ""
        shipped = tv.origin == "shipped"
        status = (f"<b>{_esc(tv.ref)}</b>: {_esc(tv.status)}, {_esc(tv.origin)}"
                  + (f"; author {_esc(tv.author)}" if tv.author else "")
                  + (f"; approved by {_esc(tv.approver)} on {_esc((tv.approved_at or '')[:10])}, review by "
                     f"{_esc(tv.review_by)}" if tv.approver else "")
                  + (f"; retired by {_esc(tv.retired_by)}" if tv.retired_by else "")
                  + (f"<br>Change note: {_esc(tv.change_note)}" if tv.change_note else "")
                  + ("<br><i>Shipped templates are read-only: saving makes a clinic template of your own "
                     "(name it).</i>" if shipped else
                     "<br><i>This version never changes: saving makes the next draft version.</i>"
                     if tv.read_only else ""))
        self.doc_status.value = f'<div class="pr-notice-box">{status}</div>'

    def document(self) -> dict:
        """The template document the form holds (numbers typed; bad text kept for the check to name)."""
        base = self.current.body if self.current is not None else {}
        doc: dict = {"name": self.name.value.strip(), "title": self.title.value.strip(),
                     "summary": self.summary.value.strip()}
        if base.get("max_impacts_reason"):
            doc["max_impacts_reason"] = base["max_impacts_reason"]
        impact, balance = dict(base.get("impact") or {}), dict(base.get("balance") or {})
        sources, certainty = dict(base.get("sources") or {}), {}
        for f in self.fields:
            value = _number(self.inputs[f.path].value, f.whole)
            table = impact if f.table == "impact" else balance
            if value is None:
                table.pop(f.key, None)
            else:
                table[f.key] = value
            src = self.sources[f.path].value.strip()
            if src:
                sources[f.key] = src
            else:
                sources.pop(f.key, None)
            if self.certainty[f.path].value:
                certainty[f.key] = self.certainty[f.path].value
        for key, value in (base.get("certainty") or {}).items():
            if key not in {f.key for f in self.fields}:
                certainty.setdefault(key, value)
        doc.update({"impact": impact, "resistance": base.get("resistance") or {}, "balance": balance,
                    "sources": sources})
        if certainty:
            doc["certainty"] = certainty
        return doc

    def show_problems(self, problems: list[FieldProblem]) -> None:
        by_field: dict[str, list[str]] = {}
        for p in problems:
            path = p.field
            if path.startswith("sources.") or path.startswith("certainty."):
                key = path.split(".", 1)[1]
                path = next((f.path for f in self.fields if f.key == key), path)
            by_field.setdefault(path if path in self.messages else "general", []).append(p.message)
        for key, box in self.messages.items():
            msgs = by_field.get(key, [])
            box.value = "".join(f'<div class="pr-msg">{_esc(m)}</div>' for m in msgs)

    def on_check(self) -> dict | None:
        return self._run("Checking the template", self._check)

    def _check(self) -> dict:
        from ..clinic.template_library import check_document

        doc = self.document()
        report = check_document(doc, random_people=20)
        self.show_problems([FieldProblem(p["field"], p["value"], p["allowed"], p["kind"])
                            for p in report["problems"]])
        if report["problems"]:
            n = len(report["problems"])
            self.check_result.value = (f'<div class="pr-refusal-box" role="alert">{n} field{"s" if n != 1 else ""} '
                                       "to correct (see the messages beside them).</div>")
        elif report["refusals"]:
            self.check_result.value = ('<div class="pr-refusal-box" role="alert">Refused: programs built from it '
                                       'would break a safety rule.</div>' + _table(
                                           report["refusals"], ["rule", "patient_id", "week", "exercise_id",
                                                                "message"], "pr-tpl-refusals"))
        else:
            self.check_result.value = (f'<div class="pr-notice-box">Check passed: every field in bounds with a '
                                       f'source; no safety rule broken for {report["people_checked"]} invented '
                                       'people.</div>')
        return report

    def on_save(self):
        return self._run("Saving the draft", self._save)

    def _save(self):
        from ..clinic.template_library import add_document, field_problems

        who = self._who()
        doc = self.document()
        problems = field_problems(doc)
        self.show_problems(problems)
        if problems:
            n = len(problems)
            self.status.value = (f'<div class="pr-refusal-box" role="alert">Not saved: {n} field'
                                 f'{"s" if n != 1 else ""} to correct (see the messages beside them).</div>')
            return None
        tv = add_document(self.store, doc, who, note=self.note.value.strip() or None)
        self.status.value = (f'<div class="pr-notice-box">Saved {_esc(tv.ref)} as a draft by {_esc(who)}. '
                             f'Change note: {_esc(tv.change_note)}. Another clinician approves it.</div>')
        self._refresh()
        self.select.value = tv.ref
        self._open(tv.ref)
        return tv

    def _chosen_version(self) -> tuple[str, int]:
        if self.current is None or self.current.origin != "clinic":
            raise InputError.single("template", self.current.ref if self.current else None,
                                    "a clinic template version (shipped templates are read-only)")
        return self.current.name, self.current.version

    def on_approve(self):
        return self._run("Approving", self._approve)

    def _approve(self):
        name, version = self._chosen_version()
        row = self.store.approve_template(name, version, self._lead("approve_template"),
                                          review_by=self.review_by.value.strip() or None)
        self.status.value = (f'<div class="pr-notice-box">Approved {_esc(name)}@{version} by '
                             f'{_esc(row["approved_by"])}; review by {_esc(row["review_by"])}.</div>')
        self._refresh()
        self._open(f"{name}@{version}")
        return row

    def on_retire(self):
        return self._run("Retiring", self._retire)

    def _retire(self):
        name, version = self._chosen_version()
        row = self.store.retire_template(name, version, self._lead("retire_template"))
        self.status.value = (f'<div class="pr-notice-box">Retired {_esc(name)}@{version}: no new programs are '
                             'built from it.</div>')
        self._refresh()
        self._open(f"{name}@{version}")
        return row

    # -- compare ----------------------------------------------------------------------
    def on_compare(self):
        return self._run("Comparing", self._compare)

    def _compare(self) -> dict:
        from ..clinic.template_library import resolve
        from ..planning.templates.review import compare_templates

        a = resolve(self.compare_a.value, self.store, purpose="read", field="A")
        b = resolve(self.compare_b.value, self.store, purpose="read", field="B")
        result = compare_templates(a.template(), b.template(), a.body, b.body, label_a=a.ref, label_b=b.ref)
        rows = [{"person": p["patient_id"],
                 **{f"{k} A": p["a"][k] for k in ("weeks_to_full_volume", "peak_impacts", "peak_intensity_pct_1rm",
                                                  "total_osteogenic_index")},
                 **{f"{k} B": p["b"][k] for k in ("weeks_to_full_volume", "peak_impacts", "peak_intensity_pct_1rm",
                                                  "total_osteogenic_index")},
                 "refusals A": len(p["a_refusals"]), "refusals B": len(p["b_refusals"]),
                 "differs": ", ".join(p["differs"])} for p in result["people"]]
        self.compare_table.value = (f"<p>A = <b>{_esc(a.ref)}</b>, B = <b>{_esc(b.ref)}</b>, over "
                                    f"{len(rows)} invented people.</p>" + _table(rows, list(rows[0]),
                                                                                  "pr-tpl-compare-rows"))
        self.compare_fields.value = "<b>Fields that differ</b>" + _table(result["fields_differ"],
                                                                          ["field", "a", "b"], "pr-tpl-diff-rows")
        self._draw(result)
        self.last_compare = result
        return result

    def _draw(self, result: dict) -> None:
        import bqplot as bq

        people = [p["patient_id"].replace("PANEL-", "") for p in result["people"]]
        if self.charts is None:
            x = bq.OrdinalScale()
            y1, y2 = bq.LinearScale(min=0.0), bq.LinearScale(min=0.0)
            self.oi_bars = bq.Bars(x=[], y=[], scales={"x": x, "y": y1}, type="grouped",
                                   colors=["#1f3b57", "#b35c00"], labels=["A", "B"], display_legend=True)
            self.impact_bars = bq.Bars(x=[], y=[], scales={"x": x, "y": y2}, type="grouped",
                                       colors=["#1f3b57", "#b35c00"], labels=["A", "B"], display_legend=True)
            f1 = bq.Figure(title="Total osteogenic index over the program, per person", marks=[self.oi_bars],
                           axes=[bq.Axis(scale=x, label="panel person"),
                                 bq.Axis(scale=y1, side="left", label="index [BW]")],
                           layout={"width": "100%", "height": "260px"})
            f1.add_class("pr-tpl-chart-oi")
            f2 = bq.Figure(title="Peak impacts per session, per person", marks=[self.impact_bars],
                           axes=[bq.Axis(scale=x, label="panel person"),
                                 bq.Axis(scale=y2, side="left", label="impacts", tick_format="d")],
                           layout={"width": "100%", "height": "260px"})
            f2.add_class("pr-tpl-chart-impacts")
            self.charts = (f1, f2)
            self.chart_box.children = self.charts

        def col(side, key):
            return [float(p[side][key] or 0) for p in result["people"]]
        self.oi_bars.x = people
        self.oi_bars.y = [col("a", "total_osteogenic_index"), col("b", "total_osteogenic_index")]
        self.impact_bars.x = people
        self.impact_bars.y = [col("a", "peak_impacts"), col("b", "peak_impacts")]

    # -- what-if ----------------------------------------------------------------------
    def on_whatif(self):
        return self._run("Running the what-if", self._whatif)

    def _whatif(self):
        from ..clinic.caseload import whatif
        from ..clinic.template_library import resolve

        rules = None
        folder = self.whatif_rules.value.strip()
        if folder:
            from ..errors import RuleFileError
            from ..screening.rules import load_rules
            try:
                rules = load_rules(folder)
            except (RuleFileError, OSError) as exc:
                raise InputError.single("rules folder", folder, f"a folder of valid rule files ({exc})") from None
        tv = resolve(self.whatif_template.value, self.store, purpose="read", field="template") \
            if self.whatif_template.value else None

        def progress(done, total):
            self.progress.max = max(total, 1)
            self.progress.value = done

        result = whatif(self.store, rules=rules, rules_label=folder or None, template=tv,
                        template_label=tv.ref if tv else None, progress=progress)
        self.progress.bar_style = "success"
        rows = result.rows()
        self.whatif_table.value = (f"<p>{len(result.changes)} of {result.people_checked} people would change "
                                   f"under {_esc(tv.ref if tv else 'the shipped template choice')}"
                                   f"{' and the rules in ' + _esc(folder) if folder else ''}.</p>"
                                   + _table(rows, ["patient_id", "field", "before", "after"], "pr-tpl-whatif-rows"))
        self.last_whatif = result
        return result
