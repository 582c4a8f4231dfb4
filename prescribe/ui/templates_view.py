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
the drafts waiting for review with an Approve button.

Who saves a draft, approves or retires is the signed-in clinician (:mod:`prescribe.ui.identity`:
the JupyterHub login, or a clinician signed in with a passphrase), never a typed name: the
four-eyes rule (the approver is never the author) means nothing if anyone can type another
name.  Every refusal is shown beside the button that was pressed.  Widgets carry stable
``pr-tpl-...`` CSS classes.
"""

from __future__ import annotations

import html
import re
import threading
from typing import Any

import ipywidgets as w

from ..errors import FieldProblem, InputError, PrescribeError
from .common import ErrorArea, LazyPanel, LazySection, set_options
from .identity import SignedIn
from .program_model import readable_date, readable_time

_ESC = html.escape

#: The figures compared over the reference panel (prescribe.planning.templates.COMPARED_FIGURES), in words.
FIGURE_WORDS = {"weeks_to_full_volume": "weeks to full volume", "peak_impacts": "most impacts in a session",
                "peak_intensity_pct_1rm": "heaviest load (% 1RM)", "total_osteogenic_index": "total osteogenic index",
                "top_impact_level": "highest impact level", "refusals": "refused programs"}
#: Where a template version comes from, in words.
ORIGIN_WORDS = {"shipped": "shipped with the tool", "clinic": "the clinic's own"}
#: Colours of A and B in the comparison charts (the title names them; no legend box over the bars).
COLOUR_A, COLOUR_B = "#1f3b57", "#b35c00"


def _esc(v: Any) -> str:
    return _ESC(str(v), quote=True)


def _css_key(path: str) -> str:
    return path.replace(".", "-").replace("[", "-").replace("]", "")


def _table(rows: list[dict], columns: list[tuple[str, str]] | list[str], css: str) -> str:
    """A table of ``rows``; ``columns`` are keys, or (key, heading) pairs."""
    if not rows:
        return f'<p class="{css}"><i>Nothing to show.</i></p>'
    pairs = [c if isinstance(c, tuple) else (c, c.replace("_", " ")) for c in columns]
    head = "".join(f"<th>{_esc(h)}</th>" for _, h in pairs)
    body = "".join("<tr>" + "".join(f"<td>{_esc('' if r.get(k) is None else r.get(k))}</td>" for k, _ in pairs)
                   + "</tr>" for r in rows)
    return f'<table class="pr-table {css}"><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>'


def template_label(v) -> str:
    """A template version as the lists show it: its title, then its name and version, status and origin."""
    title = str((v.body or {}).get("title") or v.name)
    return f"{title} ({v.name}, version {v.version}): {v.status}, {ORIGIN_WORDS.get(v.origin, v.origin)}"


def field_words(path: str) -> str:
    """A template field (``impact.impacts_step``, ``resistance.phases[0].sets``) in words: the
    template's own help text where its field metadata has the field, else its parts as words."""
    from ..planning.templates import template_fields
    for f in template_fields():
        if f.path == path:
            return re.sub(r"\s*\([^)]*\)\s*\.?$", "", f.help).rstrip(".")
    table, _, rest = path.partition(".")
    if table in ("sources", "certainty") and rest:
        known = next((f.path for f in template_fields() if f.key == rest), None)
        return f"{'source' if table == 'sources' else 'certainty'} of: " + (
            field_words(known) if known else rest.replace("_", " "))
    rest = re.sub(r"\[(\d+)\]", lambda m: f" {int(m.group(1)) + 1}", rest) if rest else ""
    rest = rest.replace("spine_sparing_phases", "spine-sparing phase").replace("phases", "phase")
    words = rest.replace("_", " ").replace(".", ": ")
    table = {"resistance": "strength"}.get(table, table).replace("_", " ")
    return f"{table}: {words}" if words else table


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
    from .wording import dates_in_words, plain
    try:
        text = program_template_notice(plan, session.store)
    except PrescribeError:
        return ""
    return (f'<div class="pr-notice-box pr-template-notice" role="status">{_esc(dates_in_words(plain(text)))}</div>'
            if text else "")


def _box(css: str) -> w.HTML:
    box = w.HTML("")
    box.add_class(css)
    return box


def _button(text: str, css: str, style: str = "") -> w.Button:
    b = w.Button(description=text, button_style=style, layout=w.Layout(width="auto"))
    b.add_class(css)
    return b


def refused_html(action: str, exc: Exception) -> str:
    """A refusal shown beside the button that was pressed."""
    from .wording import plain
    return (f'<div class="pr-error-box pr-tpl-refused" role="alert">{_esc(action)}: '
            f'{_esc(plain(exc))} Nothing was changed.</div>')


class TemplatesView(LazyPanel):
    """The clinic lead's section over a :class:`~prescribe.ui.session.ClinicSession` (its store)."""

    def __init__(self, session, app=None, signed: SignedIn | None = None) -> None:
        """The section over ``session``; inside the app, ``app`` (its lock and who is signed in)."""
        self.session = session
        self.app = app
        self.errors = app.errors if app is not None else ErrorArea()
        self.lock = app.lock if app is not None else threading.RLock()
        self.signed = signed or (app.signed if app is not None else SignedIn(login=session.login))
        self.loaded = False
        self.current = None          # the TemplateVersion shown in the form
        self.last_compare: dict | None = None
        self.last_whatif = None
        self.versions: list = []
        self._lock = threading.RLock()
        self.section = LazySection("8. Clinic templates (clinic lead)", "pr-section-templates", self._build,
                                   after=self.refresh)
        self.signed.observe(lambda _c: self._show_role(), names="name")

    def _build(self) -> list:
        """The section's widgets (built the first time it is opened)."""
        from ..planning.templates import CERTAINTY_LEVELS, template_fields

        self.fields = template_fields()
        self.error = _box("pr-tpl-error")
        self.role = _box("pr-template-role")
        self.refresh_button = _button("Refresh list", "pr-tpl-refresh")
        self.refresh_button.on_click(lambda _b: self.refresh())

        # Drafts waiting for a clinic lead: the quickest way to approve one.
        self.drafts = w.Dropdown(options=[("- no drafts -", None)], description="Draft",
                                 layout=w.Layout(width="560px"))
        self.drafts.add_class("pr-template-drafts")
        self.approve_draft_button = _button("Approve (clinic lead)", "pr-template-approve", "warning")
        self.approve_draft_button.on_click(lambda _b: self.on_approve_draft())
        self.draft_status = _box("pr-template-status")
        self.list_box = _box("pr-tpl-list")
        self.select = w.Dropdown(options=[], description="Template", layout=w.Layout(width="560px"))
        self.select.add_class("pr-tpl-select")
        self.open_button = _button("Show", "pr-tpl-open")
        self.open_button.on_click(lambda _b: self.on_open())
        self.doc_status = _box("pr-tpl-doc-status")

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
            label = w.HTML(f'<div class="pr-field-label" title="{_esc(f.help)}"><b>{_esc(field_words(f.path))}</b>'
                           f' <small>({_esc(bounds)})</small><br><small>{_esc(f.help)}</small></div>',
                           layout=w.Layout(width="330px"))
            self.inputs[f.path], self.sources[f.path], self.certainty[f.path], self.messages[f.path] = \
                box, src, cert, msg
            rows.append(w.VBox([w.HBox([label, box, cert, msg]), w.HBox([w.HTML("", layout=w.Layout(width="330px")),
                                                                          src])]))
        self.messages["general"] = _box("pr-tpl-msg-general")
        self.phases = _box("pr-tpl-phases")
        self.form = w.VBox([self.name, self.title, self.summary, *rows, w.HTML(
            "<b>Strength phases</b> <small>(kept as they are in the version shown; they are not edited "
            "here)</small>"), self.phases, self.note, self.messages["general"]])
        self.form.add_class("pr-tpl-form")

        self.check_button = _button("Check", "pr-tpl-check")
        self.check_button.on_click(lambda _b: self.on_check())
        self.save_button = _button("Save as new draft", "pr-tpl-save", "primary")
        self.save_button.on_click(lambda _b: self.on_save())
        self.review_by = w.Text(description="Review by", placeholder="YYYY-MM-DD (default: in a year)")
        self.review_by.add_class("pr-tpl-review-by")
        self.approve_button = _button("Approve", "pr-tpl-approve", "success")
        self.approve_button.on_click(lambda _b: self.on_approve())
        self.retire_button = _button("Retire", "pr-tpl-retire", "warning")
        self.retire_button.on_click(lambda _b: self.on_retire())
        self.status = _box("pr-tpl-status")
        self.check_result = _box("pr-tpl-check-result")

        # Compare.
        self.compare_a = w.Dropdown(options=[], description="A", layout=w.Layout(width="520px"))
        self.compare_a.add_class("pr-tpl-compare-a")
        self.compare_b = w.Dropdown(options=[], description="B", layout=w.Layout(width="520px"))
        self.compare_b.add_class("pr-tpl-compare-b")
        self.compare_button = _button("Compare over the panel", "pr-tpl-compare")
        self.compare_button.on_click(lambda _b: self.on_compare())
        self.compare_status = _box("pr-tpl-compare-status")
        self.compare_table = _box("pr-tpl-compare-table")
        self.compare_fields = _box("pr-tpl-compare-fields")
        self.chart_box = w.VBox([])
        self.chart_box.add_class("pr-tpl-compare-charts")
        self.charts = None

        # Caseload what-if (draft rule files are tried at the command line: `prescribe caseload whatif`).
        self.whatif_template = w.Dropdown(options=[], description="Template", layout=w.Layout(width="560px"))
        self.whatif_template.add_class("pr-tpl-whatif-template")
        self.whatif_button = _button("Run what-if on the caseload", "pr-tpl-whatif")
        self.whatif_button.on_click(lambda _b: self.on_whatif())
        self.progress = w.IntProgress(value=0, min=0, max=100, description="People", bar_style="info")
        self.progress.add_class("pr-tpl-whatif-progress")
        self.whatif_status = _box("pr-tpl-whatif-status")
        self.whatif_table = _box("pr-tpl-whatif-table")

        from ..cautions import with_standard
        cautions = w.HTML('<div class="pr-cautions"><b>Cautions</b><ul>' + "".join(
            f"<li>{_esc(c)}</li>" for c in with_standard(
                ["A template's figures over invented people are a review aid; every program built from it is "
                 "reviewed by a licensed clinician."])) + "</ul></div>")
        return [
            w.HTML("<p>A clinic lead reviews and approves the clinic's program templates; approved versions "
                   "never change. Approving confirms the template fits local guidelines; it does not replace "
                   "each person's clinical review. Saving a draft, approving and retiring are recorded under "
                   "the clinician signed in at the top of the page.</p>"),
            self.error, w.HBox([self.role, self.refresh_button]),
            w.HTML("<h3>Drafts waiting for review</h3>"), w.HBox([self.drafts, self.approve_draft_button]),
            self.draft_status, w.HTML("<h3>All versions</h3>"), self.list_box,
            w.HTML("<h3>Template</h3>"), w.HBox([self.select, self.open_button]), self.doc_status, self.form,
            w.HBox([self.check_button, self.save_button, self.review_by, self.approve_button, self.retire_button]),
            self.status, self.check_result,
            w.HTML("<h3>Compare two versions</h3>"), w.VBox([self.compare_a, self.compare_b]),
            self.compare_button, self.compare_status, self.compare_table, self.compare_fields, self.chart_box,
            w.HTML("<h3>Caseload what-if</h3>"), self.whatif_template,
            w.HBox([self.whatif_button, self.progress]), self.whatif_status, self.whatif_table, cautions]

    # -- plumbing ---------------------------------------------------------------------
    def _run(self, action: str, fn, *args, where: w.HTML | None = None):
        """``fn(*args)``; a failure is shown in ``where`` (beside the button pressed) in plain words."""
        where = where if where is not None else self.error
        with self._lock:
            try:
                result = fn(*args)
            except PrescribeError as exc:
                where.value = refused_html(action, exc)
                return None
            except Exception as exc:  # noqa: BLE001 - shown in the page, never lost
                where.value = (f'<div class="pr-error-box" role="alert">{_esc(action)} failed '
                               f'({exc.__class__.__name__}: {_esc(exc)}). Nothing was saved by this step.</div>')
                return None
            return result

    @property
    def store(self):
        return self.session.store

    def _lead(self, action: str) -> str:
        """The signed-in clinician, refused unless a clinic lead may do ``action``."""
        from ..settings import require_role
        who = self.signed.who(action)
        require_role(who, action)
        return who

    def _show_role(self) -> None:
        if not self.section.built:
            return
        from ..settings import clinician_role
        who = self.signed.name
        if who:
            self.role.value = (f"<p>Signed in as <b>{_esc(who)}</b>, role: <b class='pr-role'>"
                               f"{_esc(clinician_role(who))}</b>.</p>")
        else:
            self.role.value = ("<p>Not signed in (sign in at the top of the page to save, approve or retire): "
                               "role <b class='pr-role'>none</b>.</p>")

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
            rows.append({"template": r["title"] or v.name, "name": v.name, "version": v.version,
                         "status": r["status"], "origin": ORIGIN_WORDS.get(r["origin"], r["origin"]),
                         "author": r["author"], "approver": r["approver"],
                         "approved": readable_time(r["approved_at"]),
                         "review_by": readable_date(r["review_by"]) + (" (overdue)" if r["review_overdue"] else ""),
                         "change_note": r["change_note"]})
        self.list_box.value = _table(rows, [("template", "Template"), ("name", "Name"), ("version", "Version"),
                                            ("status", "Status"), ("origin", "Origin"), ("author", "Author"),
                                            ("approver", "Approver"), ("approved", "Approved"),
                                            ("review_by", "Review by"), ("change_note", "Change note")],
                                     "pr-tpl-list-table")
        refs = [(template_label(v), v.ref) for v in versions]
        changed = [set_options(dd, refs) for dd in (self.select, self.compare_a, self.compare_b, self.whatif_template)]
        if any(changed) and self.compare_b.value == self.compare_a.value and len(refs) > 1:  # a new list: A and B differ
            self.compare_b.value = refs[1][1]
        self.loaded = True
        self._refresh_drafts()
        if self.current is None and refs:
            self._open(self.select.value)

    def _label(self, ref: str) -> str:
        return next((template_label(v) for v in self.versions if v.ref == ref), ref)

    # -- drafts waiting for a lead --------------------------------------------------------
    def _refresh_drafts(self) -> None:
        self._show_role()
        options = []
        for t in self.session.draft_templates():
            title = str((t.get("body") or {}).get("title") or t["name"])
            options.append((f"{title} ({t['name']}, version {t['version']}), by {t['created_by']}",
                            f"{t['name']}@{t['version']}"))
        set_options(self.drafts, options or [("- no drafts -", None)])

    def on_approve_draft(self) -> str | None:
        """Approve the draft chosen in the list as the signed-in clinic lead (refused beside the button)."""
        self.draft_status.value = ""
        return self._run("Not approved", self._approve_draft, where=self.draft_status)

    def _approve_draft(self) -> str:
        choice = self.drafts.value
        if not choice:
            raise InputError.single("draft", choice, "a draft template chosen from the list")
        name, version = choice.rsplit("@", 1)
        who = self.session.approve_template(name, int(version), self._lead("approve_template"))
        self.draft_status.value = (f'<div class="pr-notice-box">Approved {_esc(self._label(choice))} as '
                                   f'{_esc(who)}.</div>')
        self._refresh()
        return who

    # -- the form ---------------------------------------------------------------------
    def on_open(self) -> None:
        self._run("Showing the template", self._open, self.select.value, where=self.doc_status)

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
        lists = {"phases": "usual", "spine_sparing_phases": "spine-sparing"}
        phase_rows = [{"list": lists[key], **ph, "weeks": ph.get("weeks") or "to the end"}
                      for key in lists for ph in res.get(key) or []]
        self.phases.value = _table(phase_rows, [("list", "Phases"), ("name", "Phase"), ("weeks", "Weeks"),
                                                ("sets", "Sets"), ("reps", "Reps"), ("pct_1rm", "% 1RM"),
                                                ("intensity", "Effort")], "pr-tpl-phase-table")
        self.note.value = ""
        self.show_problems([])
        self.check_result.value = ""
        shipped = tv.origin == "shipped"
        status = (f"<b>{_esc(template_label(tv))}</b>"
                  + (f"; author {_esc(tv.author)}" if tv.author else "")
                  + (f"; approved by {_esc(tv.approver)} on {_esc(readable_date(tv.approved_at))}, review by "
                     f"{_esc(readable_date(tv.review_by))}" if tv.approver else "")
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

    def _message_words(self, problem: FieldProblem, path: str) -> str:
        """A field's problem in the form's words: the field is the box it is shown beside."""
        text = problem.message
        if problem.field.startswith("sources."):
            return "Its source" + text[len(problem.field):]
        if problem.field.startswith("certainty."):
            return "Its certainty" + text[len(problem.field):]
        if problem.field == path and path in self.inputs:
            return "This value" + text[len(problem.field):]
        return field_words(problem.field)[:1].upper() + field_words(problem.field)[1:] + text[len(problem.field):] \
            if text.startswith(problem.field) else text

    def show_problems(self, problems: list[FieldProblem]) -> None:
        by_field: dict[str, list[str]] = {}
        for p in problems:
            path = p.field
            if path.startswith("sources.") or path.startswith("certainty."):
                key = path.split(".", 1)[1]
                path = next((f.path for f in self.fields if f.key == key), path)
            shown = path if path in self.messages else "general"
            by_field.setdefault(shown, []).append(self._message_words(p, path))
        for key, box in self.messages.items():
            msgs = by_field.get(key, [])
            box.value = "".join(f'<div class="pr-msg">{_esc(m)}</div>' for m in msgs)

    def on_check(self) -> dict | None:
        return self._run("Checking the template", self._check, where=self.check_result)

    def _check(self) -> dict:
        from ..clinic.template_library import check_document
        from .wording import plain

        doc = self.document()
        report = check_document(doc, random_people=20)
        self.show_problems([FieldProblem(p["field"], p["value"], p["allowed"], p["kind"])
                            for p in report["problems"]])
        if report["problems"]:
            n = len(report["problems"])
            self.check_result.value = (f'<div class="pr-refusal-box" role="alert">{n} field{"s" if n != 1 else ""} '
                                       "to correct (see the messages beside them).</div>")
        elif report["refusals"]:
            rows = [{**r, "message": plain(r["message"]), "exercise": plain(r.get("exercise_id") or "")}
                    for r in report["refusals"]]
            self.check_result.value = ('<div class="pr-refusal-box" role="alert">Refused: programs built from it '
                                       'would break a safety rule.</div>' + _table(
                                           rows, [("patient_id", "Invented person"), ("week", "Week"),
                                                  ("exercise", "Exercise"), ("message", "What is wrong")],
                                           "pr-tpl-refusals"))
        else:
            self.check_result.value = (f'<div class="pr-notice-box">Check passed: every field in bounds with a '
                                       f'source; no safety rule broken for {report["people_checked"]} invented '
                                       'people.</div>')
        return report

    def on_save(self):
        self.status.value = ""
        return self._run("Not saved", self._save, where=self.status)

    def _save(self):
        from ..clinic.template_library import add_document, field_problems

        who = self.signed.who("save_template")  # the author: the four-eyes rule compares it with the approver
        doc = self.document()
        problems = field_problems(doc)
        self.show_problems(problems)
        if problems:
            n = len(problems)
            self.status.value = (f'<div class="pr-refusal-box" role="alert">Not saved: {n} field'
                                 f'{"s" if n != 1 else ""} to correct (see the messages beside them).</div>')
            return None
        tv = add_document(self.store, doc, who, note=self.note.value.strip() or None)
        self.status.value = (f'<div class="pr-notice-box">Saved {_esc(template_label(tv))} by {_esc(who)}. '
                             f'Change note: {_esc(tv.change_note)}. Another clinician approves it.</div>')
        self._refresh()
        self.select.value = tv.ref
        self._open(tv.ref)
        return tv

    def _chosen_version(self) -> tuple[str, int]:
        if self.current is None or self.current.origin != "clinic":
            raise InputError.single("template", template_label(self.current) if self.current else None,
                                    "a clinic template version (shipped templates are read-only)")
        return self.current.name, self.current.version

    def on_approve(self):
        self.status.value = ""
        return self._run("Not approved", self._approve, where=self.status)

    def _approve(self):
        name, version = self._chosen_version()
        row = self.store.approve_template(name, version, self._lead("approve_template"),
                                          review_by=self.review_by.value.strip() or None)
        self._refresh()
        self._open(f"{name}@{version}")
        self.status.value = (f'<div class="pr-notice-box">Approved {_esc(template_label(self.current))} by '
                             f'{_esc(row["approved_by"])}; review by {_esc(readable_date(row["review_by"]))}.</div>')
        return row

    def on_retire(self):
        self.status.value = ""
        return self._run("Not retired", self._retire, where=self.status)

    def _retire(self):
        name, version = self._chosen_version()
        row = self.store.retire_template(name, version, self._lead("retire_template"))
        self._refresh()
        self._open(f"{name}@{version}")
        self.status.value = (f'<div class="pr-notice-box">Retired {_esc(template_label(self.current))}: no new '
                             'programs are built from it.</div>')
        return row

    # -- compare ----------------------------------------------------------------------
    def on_compare(self):
        self.compare_status.value = ""
        return self._run("Comparing", self._compare, where=self.compare_status)

    def _compare(self) -> dict:
        from ..clinic.template_library import resolve
        from ..planning.templates.review import COMPARED_FIGURES, compare_templates

        a = resolve(self.compare_a.value, self.store, purpose="read", field="A")
        b = resolve(self.compare_b.value, self.store, purpose="read", field="B")
        result = compare_templates(a.template(), b.template(), a.body, b.body, label_a=a.ref, label_b=b.ref)
        rows = []
        for p in result["people"]:
            row = {"person": p["patient_id"]}
            for side in ("a", "b"):
                for k in COMPARED_FIGURES:
                    row[f"{k} {side}"] = p[side][k]
                row[f"refusals {side}"] = len(p[f"{side}_refusals"])
            row["differs"] = ", ".join(FIGURE_WORDS.get(k, k.replace("_", " ")) for k in p["differs"])
            rows.append(row)
        columns = [("person", "Invented person")]
        for side in ("a", "b"):
            columns += [(f"{k} {side}", f"{FIGURE_WORDS.get(k, k)}, {side.upper()}") for k in COMPARED_FIGURES]
            columns.append((f"refusals {side}", f"refused programs, {side.upper()}"))
        columns.append(("differs", "What differs"))
        self.compare_table.value = (f"<p>A = <b>{_esc(template_label(a))}</b>, B = <b>{_esc(template_label(b))}"
                                    f"</b>, over {len(rows)} invented people.</p>"
                                    + _table(rows, columns, "pr-tpl-compare-rows"))
        differ = [{"field": field_words(d["field"]), "a": d["a"], "b": d["b"]} for d in result["fields_differ"]]
        self.compare_fields.value = "<b>Fields that differ</b>" + _table(
            differ, [("field", "Field"), ("a", "A"), ("b", "B")], "pr-tpl-diff-rows")
        self._draw(result)
        self.last_compare = result
        return result

    def _draw(self, result: dict) -> None:
        """Two grouped bar charts, A and B per panel person; every scale has its full domain
        (a bar chart over a scale without a maximum is drawn empty), whole-number ticks on counts."""
        import bqplot as bq
        from .charts import whole_ticks

        people = [p["patient_id"].replace("PANEL-", "") for p in result["people"]]

        def col(side, key):
            return [float(p[side][key] or 0) for p in result["people"]]
        oi = [col("a", "total_osteogenic_index"), col("b", "total_osteogenic_index")]
        impacts = [col("a", "peak_impacts"), col("b", "peak_impacts")]
        if self.charts is None:
            self.x = bq.OrdinalScale()
            self.y_oi, self.y_impacts = bq.LinearScale(min=0.0, max=1.0), bq.LinearScale(min=0.0, max=1.0)
            margin = {"top": 50, "bottom": 45, "left": 90, "right": 20}
            self.oi_bars = bq.Bars(x=[], y=[], scales={"x": self.x, "y": self.y_oi}, type="grouped",
                                   colors=[COLOUR_A, COLOUR_B], padding=0.2)
            self.impact_bars = bq.Bars(x=[], y=[], scales={"x": self.x, "y": self.y_impacts}, type="grouped",
                                       colors=[COLOUR_A, COLOUR_B], padding=0.2)
            self.impacts_axis = bq.Axis(scale=self.y_impacts, side="left", label="impacts", tick_format="d",
                                        label_offset="50px")
            f1 = bq.Figure(title="Total osteogenic index over the program, per invented person: A dark, B orange",
                           marks=[self.oi_bars], fig_margin=margin,
                           axes=[bq.Axis(scale=self.x, label="invented person"),
                                 bq.Axis(scale=self.y_oi, side="left", label="osteogenic index", tick_format=".0f",
                                         label_offset="65px")],
                           layout={"width": "100%", "height": "280px"})
            f1.add_class("pr-tpl-chart-oi")
            f2 = bq.Figure(title="Most impacts in a session, per invented person: A dark, B orange",
                           marks=[self.impact_bars], fig_margin=margin,
                           axes=[bq.Axis(scale=self.x, label="invented person"), self.impacts_axis],
                           layout={"width": "100%", "height": "280px"})
            f2.add_class("pr-tpl-chart-impacts")
            self.charts = (f1, f2)
            self.chart_box.children = self.charts
        top_oi = max([1.0, *oi[0], *oi[1]])
        ticks = whole_ticks(max([0.0, *impacts[0], *impacts[1]]))
        with self.oi_bars.hold_sync():
            self.y_oi.max = top_oi * 1.1
            self.oi_bars.x, self.oi_bars.y = people, oi
        with self.impact_bars.hold_sync():
            self.y_impacts.max = float(ticks[-1]) * 1.05
            self.impacts_axis.tick_values = ticks
            self.impact_bars.x, self.impact_bars.y = people, impacts

    # -- what-if ----------------------------------------------------------------------
    def on_whatif(self):
        self.whatif_status.value = ""
        return self._run("Running the what-if", self._whatif, where=self.whatif_status)

    def _whatif(self):
        from ..clinic.caseload import whatif
        from ..clinic.template_library import resolve
        from .wording import label, plain

        tv = resolve(self.whatif_template.value, self.store, purpose="read", field="template") \
            if self.whatif_template.value else None

        def progress(done, total):
            self.progress.max = max(total, 1)
            self.progress.value = done

        result = whatif(self.store, template=tv, template_label=tv.ref if tv else None, progress=progress)
        self.progress.bar_style = "success"
        rows = [{**r, "field": label(str(r.get("field", ""))), "before": plain(r["before"]).replace(";", ", "),
                 "after": plain(r["after"]).replace(";", ", ")} for r in result.rows()]
        self.whatif_table.value = (f"<p>{len(result.changes)} of {result.people_checked} people would change "
                                   f"under {_esc(template_label(tv) if tv else 'the shipped template choice')}.</p>"
                                   + _table(rows, [("patient_id", "Person"), ("field", "What changes"),
                                                   ("before", "Before"), ("after", "After")], "pr-tpl-whatif-rows"))
        self.last_whatif = result
        return result
