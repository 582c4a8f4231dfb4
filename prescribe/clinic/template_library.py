"""The clinic's template library: shipped templates beside the clinic's versioned ones.

Shipped templates are the TOML files of the package (``prescribe/data/templates``):
read-only, always usable, listed with status ``approved`` and origin ``shipped``.
Clinic templates are documents in the store, one row a version: ``draft`` when added,
``approved`` by a named clinician who is not the author (with a review-by date), or
``retired``.  An approved version never changes; editing makes the next draft version.

``NAME@VERSION`` names one version; a bare ``NAME`` means the newest approved version
(or the shipped file of that name).  Only shipped templates and approved clinic
versions can build programs (:func:`resolve` with ``purpose="plan"``); drafts and
retired versions are refused with a message saying which versions can be used.

This module sits beside the store (it reads and writes it); the domain checks it
calls live in :mod:`prescribe.planning.templates.document` and :mod:`prescribe.planning.templates.review`.
"""

from __future__ import annotations

import dataclasses
import re
import tomllib
from dataclasses import dataclass
from datetime import date, datetime, timezone
from pathlib import Path
from typing import Any

from ..errors import FieldProblem, InputError, NotFoundError
from ..fileio import read_text_file
from ..identifiers import check_identifier
from ..plan_schema import Plan
from ..planning.templates import TEMPLATE_DIR, Template, TemplateError, parse_template, template_names, template_problems

SHIPPED_AUTHOR = "prescribe (shipped with the package)"
_REF = re.compile(r"^([A-Za-z0-9_][A-Za-z0-9_.-]{0,119}?)(?:@(\d{1,6}))?$")
NAME_ALLOWED = ("a template name of letters, digits, '_', '-' or '.' (at most 120 characters), optionally "
                "followed by @VERSION, e.g. clinic_standard@2")
#: Top-level keys of a template document the store keeps (``[document]`` is written by
#: ``template show`` to describe a stored version and is never read back).
BODY_KEYS = ("name", "title", "summary", "max_impacts_reason", "impact", "resistance", "balance", "sources",
             "certainty")


@dataclass(frozen=True)
class TemplateVersion:
    """One version of a template, shipped or from the store, with its review record."""

    name: str
    version: int
    origin: str                 # shipped | clinic
    status: str                 # draft | approved | retired
    body: dict
    created: str | None = None
    author: str | None = None
    approver: str | None = None
    approved_at: str | None = None
    review_by: str | None = None
    retired_by: str | None = None
    retired_at: str | None = None
    change_note: str = ""
    text: str | None = None     # the file's own text (shipped), comments kept

    @property
    def ref(self) -> str:
        return f"{self.name}@{self.version}"

    @property
    def read_only(self) -> bool:
        return self.origin == "shipped" or self.status != "draft"

    def template(self) -> Template:
        """The validated template the planner uses (with this version's number and origin)."""
        try:
            tpl = parse_template(self.body, f"template {self.ref}")
        except TemplateError as exc:
            raise InputError.single(exc.key or "template", self.ref, f"a valid template ({exc.problem})") from None
        return dataclasses.replace(tpl, version=self.version, origin=self.origin)

    def review_overdue(self, today: date | None = None) -> bool:
        if not self.review_by:
            return False
        today = today or datetime.now(timezone.utc).date()
        return date.fromisoformat(self.review_by) < today

    def listing(self) -> dict:
        """The row ``prescribe template list`` prints."""
        return {"name": self.name, "version": self.version, "status": self.status, "origin": self.origin,
                "author": self.author, "approver": self.approver, "approved_at": self.approved_at,
                "review_by": self.review_by, "review_overdue": self.review_overdue(),
                "retired_by": self.retired_by, "retired_at": self.retired_at,
                "title": str(self.body.get("title", "")), "change_note": self.change_note,
                "read_only": self.read_only}


# =========================================================================================
# Names and versions
# =========================================================================================

def parse_ref(text: Any, field: str = "NAME@VERSION") -> tuple[str, int | None]:
    """``"clinic_standard@2"`` -> ``("clinic_standard", 2)``; ``"gentle"`` -> ``("gentle", None)``."""
    check_identifier(text, field)  # no NUL, control or invisible direction characters
    m = _REF.match(text.strip()) if isinstance(text, str) else None
    if not m:
        raise InputError.single(field, text, NAME_ALLOWED)
    version = int(m.group(2)) if m.group(2) is not None else None
    if version == 0:
        raise InputError.single(field, text, "a version number of 1 or more after @")
    return m.group(1), version


def shipped_versions() -> list[TemplateVersion]:
    """The package's templates (read-only), by name."""
    out = []
    for name in template_names():
        path = TEMPLATE_DIR / f"{name}.toml"
        text = path.read_text(encoding="utf-8")
        body = tomllib.loads(text)
        out.append(TemplateVersion(name=name, version=int(body.get("version", 1)), origin="shipped",
                                   status="approved", body=body, author=SHIPPED_AUTHOR, text=text))
    return out


def _from_row(row: dict) -> TemplateVersion:
    return TemplateVersion(name=row["name"], version=row["version"], origin="clinic", status=row["status"],
                           body=row["body"], created=row["created"], author=row["created_by"],
                           approver=row["approved_by"], approved_at=row["approved_at"],
                           review_by=row.get("review_by"), retired_by=row.get("retired_by"),
                           retired_at=row.get("retired_at"), change_note=row.get("change_note") or "")


def list_versions(store=None) -> list[TemplateVersion]:
    """Shipped templates, then the clinic's versions (by name and version) when a store is given."""
    out = shipped_versions()
    if store is not None:
        out += [_from_row(r) for r in store.templates()]
    return out


def _allowed_for_plan(store, name: str) -> str:
    usable = [v.ref for v in list_versions(store) if v.name == name and v.status == "approved"]
    if usable:
        return "a shipped template or an approved clinic version (" + name + ": " + ", ".join(usable) + ")"
    return "a shipped template (" + ", ".join(template_names()) + ") or an approved clinic version"


def resolve(ref: str, store=None, *, purpose: str = "plan", field: str = "--template") -> TemplateVersion:
    """The template version ``ref`` names.

    ``purpose="plan"`` accepts shipped templates and approved clinic versions only (a
    bare name means its newest approved version); ``purpose="read"`` any version (a
    bare name: the newest version of any status).  Unknown names and versions, and
    drafts or retired versions for a plan, are :class:`InputError` naming ``field``.
    """
    name, version = parse_ref(ref, field)
    shipped = {v.name: v for v in shipped_versions()}
    if name in shipped:
        tv = shipped[name]
        if version not in (None, tv.version):
            raise InputError.single(field, ref, f"{name}@{tv.version} (the shipped template {name!r} has "
                                                f"version {tv.version} only)")
        return tv
    rows = [] if store is None else store.templates(name)
    if not rows:
        known = ", ".join(sorted({v.name for v in list_versions(store)}))
        raise InputError.single(field, ref, f"the name of a shipped or clinic template ({known})")
    versions = [_from_row(r) for r in rows]
    if version is None:
        pool = [v for v in versions if v.status == "approved"] if purpose == "plan" else versions
        if not pool:
            raise InputError.single(field, ref, f"{_allowed_for_plan(store, name)}; {name} has no approved "
                                                "version yet (approve one with `prescribe template approve`)")
        return pool[-1]
    found = next((v for v in versions if v.version == version), None)
    if found is None:
        raise InputError.single(field, ref, f"a stored version of {name} (" +
                                ", ".join(str(v.version) for v in versions) + ")")
    if purpose == "plan" and found.status != "approved":
        raise InputError.single(field, ref, f"{_allowed_for_plan(store, name)}; {ref} is {found.status} "
                                            "and cannot build programs")
    return found


# =========================================================================================
# Reading, checking and adding documents
# =========================================================================================

def read_document(path: str | Path, field: str = "FILE.toml") -> dict:
    """A template document from a TOML file (InputError for an unreadable or malformed file)."""
    return parse_document(read_text_file(path, field, "TOML file"), str(path), field)


def parse_document(text: str, where: str = "template", field: str = "FILE.toml") -> dict:
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError.single(field, where, f"valid TOML ({exc})") from None


def field_problems(doc: dict) -> list[FieldProblem]:
    """Every bad field of a template document (types, bounds, a source on every number)."""
    problems = template_problems(doc)
    unknown = [k for k in doc if k not in BODY_KEYS and k not in ("version", "change_note", "document")]
    problems += [FieldProblem(k, doc[k], "a template key (" + ", ".join(BODY_KEYS) + ")", kind="unknown_field")
                 for k in unknown]
    return problems


def body_of(doc: dict) -> dict:
    """The part of a document the store keeps (no ``version``, ``change_note`` or ``[document]``)."""
    return {k: doc[k] for k in BODY_KEYS if k in doc}


def check_document(doc: dict, *, random_people: int = 50, seed: int = 2026, source: str = "template") -> dict:
    """Validate a draft: its fields, then the safety check over the reference panel and
    ``random_people`` random invented people.

    Returns ``{ok, name, problems: [...], refusals: [{rule, patient_id, week,
    exercise_id, message}], people_checked, cautions}``; a document with bad fields is
    not run over the panel (its problems say why).
    """
    from ..cautions import with_standard
    from ..planning.templates.review import panel_outcomes, random_records, reference_records

    problems = field_problems(doc)
    report: dict = {"name": doc.get("name"), "source": source,
                    "problems": [p.as_dict() for p in problems], "refusals": [], "people_checked": 0}
    if not problems:
        try:
            tpl = dataclasses.replace(parse_template(body_of(doc), source), origin="clinic")
        except TemplateError as exc:  # a problem the field check does not name: still bad input
            problems = [FieldProblem(exc.key or "template", None, f"a valid template ({exc.problem})")]
            report["problems"] = [p.as_dict() for p in problems]
    if not problems:
        people = reference_records() + random_records(random_people, seed)
        outcomes = panel_outcomes(tpl, people)
        report["refusals"] = [r for o in outcomes for r in o.refusals]
        report["people_checked"] = len(people)
        report["panel"] = {"reference_people": len(people) - random_people, "random_people": random_people,
                           "seed": seed}
    report["ok"] = not report["problems"] and not report["refusals"]
    report["cautions"] = with_standard(["A template that passes these checks still needs a clinician's review "
                                        "and approval (the approver is never the author)."])
    return report


def _auto_note(previous: TemplateVersion | None, body: dict) -> str:
    from ..planning.templates.review import field_differences

    if previous is None:
        return "first version"
    diffs = field_differences(previous.body, body)
    if not diffs:
        return f"no change from version {previous.version}"
    shown = "; ".join(f"{d['field']}: {d['a']!r} -> {d['b']!r}" for d in diffs[:8])
    more = f"; and {len(diffs) - 8} more" if len(diffs) > 8 else ""
    return f"changed from version {previous.version}: {shown}{more}"


def add_document(store, doc: dict, clinician: str, note: str | None = None) -> TemplateVersion:
    """Store ``doc`` as the next draft version of its name.

    Every field is checked first (InputError naming each bad one; nothing stored).
    A shipped template's name is refused: shipped templates are read-only, so a
    clinic's own template takes its own name.  The change note is ``note``, else the
    document's ``change_note``, else a list of the fields changed from the previous
    version (or "first version").
    """
    problems = field_problems(doc)
    if problems:
        raise InputError(problems, "template")
    name = doc["name"].strip()
    parse_ref(name, "name")
    if "@" in name:
        raise InputError.single("name", name, NAME_ALLOWED)
    if name in template_names():
        raise InputError.single("name", name, "a name of the clinic's own (the shipped templates " +
                                ", ".join(template_names()) + " are read-only; copy one under a new name)")
    body = body_of({**doc, "name": name})
    try:
        parse_template(body, f"template {name}")
    except TemplateError as exc:
        raise InputError.single(exc.key or "template", name, f"a valid template ({exc.problem})") from None
    rows = store.templates(name)
    previous = _from_row(rows[-1]) if rows else None
    text = note if note is not None else doc.get("change_note")
    if text is not None and not isinstance(text, str):
        raise InputError.single("change_note", text, "text")
    text = (text or "").strip() or _auto_note(previous, body)
    version = store.add_template(name, body, clinician, note=text)
    return _from_row(store.get_template(name, version))


# =========================================================================================
# Showing documents
# =========================================================================================

def document_text(tv: TemplateVersion) -> str:
    """The template as TOML: the shipped file's own text, or a stored version with a
    ``[document]`` table saying which version it is and who reviewed it."""
    from ..planning.templates.review import dump_toml

    if tv.origin == "shipped" and tv.text is not None:
        return tv.text
    meta = {k: v for k, v in (("name", tv.name), ("version", tv.version), ("status", tv.status),
                              ("author", tv.author), ("created", tv.created), ("change_note", tv.change_note),
                              ("approver", tv.approver), ("approved_at", tv.approved_at),
                              ("review_by", tv.review_by), ("retired_by", tv.retired_by),
                              ("retired_at", tv.retired_at)) if v is not None}
    header = (f"Clinic template {tv.ref} ({tv.status}). An approved version never changes: to edit, change "
              "this file\nand add it again with `prescribe template add`; it becomes the next draft version. "
              "The [document]\ntable describes this stored version and is not read back.")
    return dump_toml({**tv.body, "document": meta}, header)


def program_template_notice(plan: Plan, store=None, today: date | None = None) -> str | None:
    """A warning when a program's template version has since been retired or is past its
    review date (None when it is current, shipped, or not recorded)."""
    if plan.template is None:
        return None
    name, version = plan.template.name, plan.template.version or plan.template_version
    if not name or not version or store is None or name in template_names():
        return None
    try:
        row = store.get_template(name, int(version))
    except NotFoundError:
        return f"This program was built from template {name}@{version}, which is not in this store."
    tv = _from_row(row)
    if tv.status == "retired":
        return (f"This program was built from template {tv.ref}, retired by {tv.retired_by} on "
                f"{(tv.retired_at or '')[:10]}: review it against the clinic's current template.")
    if tv.review_overdue(today):
        return (f"This program was built from template {tv.ref}, whose review was due on {tv.review_by}: "
                "check it against current evidence before relying on it.")
    return None
