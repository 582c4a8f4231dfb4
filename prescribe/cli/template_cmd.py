"""``prescribe template list|show|check|add|approve|retire|compare``: the clinic's templates under review.

Shipped templates are read-only and always listed; clinic templates are versioned
documents in the store (draft, approved by a clinician who is not the author, retired).
Input is checked before the store is opened, so bad input (exit 2) writes nothing.
"""

from __future__ import annotations

import sys
from contextlib import contextmanager

from ..errors import InputError
from .output import emit_json, emit_table
from .store_cmd import DB_HELP

CLINICIAN_HELP = "who does this (name or initials; recorded with the version and in the audit log)"


def register(sub) -> None:
    p = sub.add_parser("template", help="the clinic's program templates: list, show, check, add, approve, "
                                        "retire, compare",
                       description="Program templates under review. Shipped templates are read-only; the "
                                   "clinic's own are versioned in the store: draft, approved (by a clinician "
                                   "who is not the author, with a review-by date) or retired. See "
                                   "docs/templates.md.")
    t = p.add_subparsers(dest="template_command", metavar="TEMPLATE_COMMAND")
    t.required = True

    q = t.add_parser("list", help="shipped and clinic templates: name, version, status, author, approver, review_by")
    q.add_argument("--table", action="store_true", help="a readable table instead of JSON")
    q.add_argument("--db", help=DB_HELP)
    q.set_defaults(func=run_list)

    q = t.add_parser("show", help="one template as a TOML document")
    q.add_argument("ref", metavar="NAME[@VERSION]", help="a template; a bare name is its newest version")
    q.add_argument("--db", help=DB_HELP)
    q.set_defaults(func=run_show)

    q = t.add_parser("check", help="validate a draft: fields, bounds, sources, and the safety check over "
                                   "a reference panel of invented people")
    q.add_argument("file", metavar="FILE.toml")
    q.add_argument("--random", type=int, default=50, metavar="N",
                   help="random invented people added to the reference panel (default 50)")
    q.add_argument("--seed", type=int, default=2026, help="seed of the random people (default 2026)")
    q.set_defaults(func=run_check)

    q = t.add_parser("add", help="store a template file as the next draft version of its name")
    q.add_argument("file", metavar="FILE.toml")
    q.add_argument("--clinician", required=True, metavar="NAME", help=CLINICIAN_HELP)
    q.add_argument("--note", default=None, help="the change note of this version (default: the file's "
                                                "change_note, else the fields changed from the last version)")
    q.add_argument("--db", help=DB_HELP)
    q.set_defaults(func=run_add)

    q = t.add_parser("approve", help="approve a draft version (the approver is never the author)")
    q.add_argument("ref", metavar="NAME@VERSION")
    q.add_argument("--clinician", required=True, metavar="NAME", help=CLINICIAN_HELP)
    q.add_argument("--review-by", default=None, metavar="YYYY-MM-DD",
                   help="when the version must be reviewed again (default: a year from today)")
    q.add_argument("--db", help=DB_HELP)
    q.set_defaults(func=run_approve)

    q = t.add_parser("retire", help="retire a version: no new programs are built from it")
    q.add_argument("ref", metavar="NAME@VERSION")
    q.add_argument("--clinician", required=True, metavar="NAME", help=CLINICIAN_HELP)
    q.add_argument("--db", help=DB_HELP)
    q.set_defaults(func=run_retire)

    q = t.add_parser("compare", help="two templates side by side over the reference panel")
    q.add_argument("a", metavar="A", help="NAME[@VERSION] or a FILE.toml")
    q.add_argument("b", metavar="B", help="NAME[@VERSION] or a FILE.toml")
    q.add_argument("--table", action="store_true", help="a readable table instead of JSON")
    q.add_argument("--db", help=DB_HELP)
    q.set_defaults(func=run_compare)


def _open(args, create: bool = False):
    from ..store import open_store
    return open_store(args.db, create=create)


def _maybe_store(args):
    """The store when there is one (None when the default file does not exist yet)."""
    from ..errors import StoreError
    try:
        return _open(args, create=False)
    except StoreError as exc:
        if "there is no store" in str(exc):
            return None
        raise


def _versioned(ref: str) -> tuple[str, int]:
    from ..clinic.template_library import parse_ref
    name, version = parse_ref(ref)
    if version is None:
        raise InputError.single("NAME@VERSION", ref, "a template name with its version, e.g. clinic_standard@2")
    return name, version


@contextmanager
def _named(ref: str, store):
    """A version that is not in the store is bad input naming NAME@VERSION (exit 2)."""
    from ..errors import FieldProblem, NotFoundError
    try:
        yield
    except InputError as exc:  # name the command-line options the user typed
        option = {"clinician": "--clinician", "review_by": "--review-by"}
        raise InputError([FieldProblem(option.get(p.field, p.field), p.value, p.allowed, p.kind)
                          for p in exc.problems], exc.source) from None
    except NotFoundError:
        raise InputError.single("NAME@VERSION", ref, f"a clinic template version stored in {store.where} "
                                                     "(see `prescribe template list`)") from None


def _clinic_only(name: str, ref: str) -> None:
    from ..planning.templates import template_names
    if name in template_names():
        raise InputError.single("NAME@VERSION", ref, "a clinic template version (shipped templates are read-only)")


def run_list(args) -> int:
    from ..clinic.template_library import list_versions

    store = _maybe_store(args)
    try:
        rows = [v.listing() for v in list_versions(store)]
    finally:
        if store is not None:
            store.close()
    if args.table:
        emit_table([{**r, "approver": r["approver"] or "", "review_by": (r["review_by"] or "") +
                     (" (overdue)" if r["review_overdue"] else "")} for r in rows],
                   ["name", "version", "status", "origin", "author", "approver", "review_by", "title"])
    else:
        emit_json(rows)
    return 0


def run_show(args) -> int:
    from ..clinic.template_library import document_text, parse_ref, resolve

    name, _ = parse_ref(args.ref, "NAME[@VERSION]")
    store = None if _shipped(name) else _maybe_store(args)
    try:
        tv = resolve(args.ref, store, purpose="read", field="NAME[@VERSION]")
    finally:
        if store is not None:
            store.close()
    sys.stdout.write(document_text(tv))
    return 0


def _shipped(name: str) -> bool:
    from ..planning.templates import template_names
    return name in template_names()


def run_check(args) -> int:
    from ..clinic.template_library import check_document, read_document

    if args.random < 0 or args.random > 10_000:
        raise InputError.single("--random", args.random, "a whole number from 0 to 10000")
    doc = read_document(args.file)
    report = check_document(doc, random_people=args.random, seed=args.seed, source=args.file)
    emit_json(report)
    for p in report["problems"]:
        print(f"prescribe template check: bad field: {p['message']}", file=sys.stderr)
    for r in report["refusals"]:
        where = f"week {r['week']}" if r.get("week") else "the whole program"
        print(f"prescribe template check: refused ({r['rule']}): person {r['patient_id']}, {where}: "
              f"{r['message']}", file=sys.stderr)
    if not report["ok"]:
        print(f"prescribe template check: {args.file} is not ready: {len(report['problems'])} bad field(s), "
              f"{len(report['refusals'])} safety refusal(s)", file=sys.stderr)
        return 2
    return 0


def run_add(args) -> int:
    from ..clinic.template_library import add_document, field_problems, read_document

    doc = read_document(args.file)
    problems = field_problems(doc)       # bad input stops here, before the store is touched
    if problems:
        raise InputError(problems, args.file)
    with _open(args, create=True) as store:
        tv = add_document(store, doc, args.clinician, note=args.note)
        out = {**tv.listing(), "db": store.where}
    emit_json(out)
    return 0


def _lead(clinician: str, action: str) -> str:
    """The clinician (the hub login under JupyterHub), refused unless a clinic lead may do ``action``."""
    from ..settings import current_clinician, require_role
    who = current_clinician(clinician, required=True)
    require_role(who, action)
    return who


def run_approve(args) -> int:
    name, version = _versioned(args.ref)
    _clinic_only(name, args.ref)
    from ..clinic.template_library import _from_row
    with _open(args) as store, _named(args.ref, store):
        row = store.approve_template(name, version, _lead(args.clinician, "approve_template"),
                                     review_by=args.review_by)
    emit_json(_from_row(row).listing())
    return 0


def run_retire(args) -> int:
    name, version = _versioned(args.ref)
    _clinic_only(name, args.ref)
    from ..clinic.template_library import _from_row
    with _open(args) as store, _named(args.ref, store):
        row = store.retire_template(name, version, _lead(args.clinician, "retire_template"))
    emit_json(_from_row(row).listing())
    return 0


def _side(ref: str, store, field: str):
    """A template to compare: a stored or shipped version, or a TOML file (a draft not yet added)."""
    import dataclasses
    from pathlib import Path

    from ..clinic.template_library import TemplateVersion, body_of, field_problems, read_document, resolve

    if ref.endswith(".toml") or Path(ref).is_file():
        doc = read_document(ref, field)
        problems = field_problems(doc)
        if problems:
            raise InputError(problems, ref)
        tv = TemplateVersion(name=str(doc["name"]), version=1, origin="clinic", status="draft", body=body_of(doc))
        return tv, ref, dataclasses.replace(tv.template(), version=0)
    tv = resolve(ref, store, purpose="read", field=field)
    return tv, tv.ref, tv.template()


def run_compare(args) -> int:
    from ..planning.templates.review import compare_templates

    store = _maybe_store(args)
    try:
        a, label_a, tpl_a = _side(args.a, store, "A")
        b, label_b, tpl_b = _side(args.b, store, "B")
    finally:
        if store is not None:
            store.close()
    result = compare_templates(tpl_a, tpl_b, a.body, b.body, label_a=label_a, label_b=label_b)
    if not args.table:
        emit_json(result)
        return 0
    out = sys.stdout
    out.write(f"Template A = {label_a}, B = {label_b}, over {len(result['panel'])} invented people\n\n")
    rows = []
    for p in result["people"]:
        fa, fb = p["a"], p["b"]
        rows.append({"person": p["patient_id"],
                     "full vol wk A/B": f"{_s(fa['weeks_to_full_volume'])}/{_s(fb['weeks_to_full_volume'])}",
                     "peak impacts A/B": f"{_s(fa['peak_impacts'])}/{_s(fb['peak_impacts'])}",
                     "peak %1RM A/B": f"{_s(fa['peak_intensity_pct_1rm'])}/{_s(fb['peak_intensity_pct_1rm'])}",
                     "total OI A/B": f"{_s(fa['total_osteogenic_index'])}/{_s(fb['total_osteogenic_index'])}",
                     "refusals A/B": f"{len(p['a_refusals'])}/{len(p['b_refusals'])}"})
    emit_table(rows, list(rows[0]) if rows else ["person"], out)
    out.write("\nFields that differ:\n")
    if result["fields_differ"]:
        emit_table([{"field": d["field"], "A": _s(d["a"]), "B": _s(d["b"])} for d in result["fields_differ"]],
                   ["field", "A", "B"], out)
    else:
        out.write("  none\n")
    out.write("\nCautions:\n")
    for c in result["cautions"]:
        out.write(f"  - {c}\n")
    return 0


def _s(v) -> str:
    if v is None:
        return "-"
    if isinstance(v, float):
        return f"{v:g}"
    text = str(v)
    return text if len(text) <= 60 else text[:57] + "..."
