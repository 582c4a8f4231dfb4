"""The progress letter to the referring clinician (docs/reassess.md): one or two pages of
plain clinical prose with the measures over time, their verdicts, sessions done against
planned, delivered impacts from a worn sensor where one is stored, the next block and the
cautions.  Jinja2 (``templates/progress_letter.html.j2``) and WeasyPrint, like the handout.

:func:`letter_context` reads everything from the store; :func:`render_letter_html` and
:func:`write_letter` print it.
"""

from __future__ import annotations

import re
from datetime import date
from pathlib import Path

from ..catalogue import IMPACT_LEVEL_LABELS
from ..cautions import SHORT_CAUTION, with_standard
from ..errors import InputError
from ..outcomes.adherence import sessions_against_planned
from ..outcomes.measures import measure_rules, measure_series
from ..plan_schema import start_day
from ..settings import Clinic, clinic as clinic_settings
from .content.weeks import day_words
from .progress_chart import measure_svg

__all__ = ["letter_context", "render_letter_html", "write_letter", "LETTER_SUFFIXES"]

LETTER_SUFFIXES = (".pdf", ".html")

_VERDICT_WORDS = {"improved": "improved", "no real change": "no real change", "worse": "worse"}


def _fmt(v) -> str:
    if v is None:
        return "-"
    v = float(v)
    return f"{v:g}" if v.is_integer() or abs(v) >= 100 else f"{v:.1f}" if abs(v) >= 10 else f"{v:.2f}".rstrip("0")


def _long_date(text: str | None) -> str:
    """A stored day (``YYYY-MM-DD``, or a timestamp that starts with one) as the pages print it."""
    if not text:
        return "-"
    return day_words(date.fromisoformat(str(text)[:10]))


_ISO_DAY = re.compile(r"\b(\d{4}-\d{2}-\d{2})(?:T[0-9:.]+(?:Z|[+-]\d{2}:\d{2})?)?\b")


def _prose(text: str) -> str:
    """A stored reason for the reader: its days (and any timestamp) written as the pages write days."""
    def one(match: re.Match) -> str:
        try:
            return _long_date(match.group(1))
        except ValueError:
            return match.group(0)
    return _ISO_DAY.sub(one, text)


def _bounds(name: str) -> tuple[float | None, float | None]:
    """The measure's own limits, from the retest's field metadata (the record's bounds)."""
    from ..outcomes.retest import RETEST_FIELD_META, RETEST_SCHEMA
    if "." in name:
        group, site = name.split(".", 1)
        node = RETEST_SCHEMA["$defs"]["TScores" if group == "t_scores" else "ZScores"]["properties"][site]
        node = next((o for o in node.get("anyOf", [node]) if o.get("type") != "null"), node)
        return node.get("minimum"), node.get("maximum")
    meta = RETEST_FIELD_META[name]
    return meta["minimum"], meta["maximum"]


def letter_context(store, patient_id: str, *, today: date | None = None, clinic: Clinic | None = None) -> dict:
    """Everything the letter prints for one stored person (InputError when there is no retest yet)."""
    today = today or date.today()
    clinic = clinic or clinic_settings()
    rows = store.retests(patient_id)              # NotFoundError names the id
    if not rows:
        raise InputError.single("patient_id", patient_id, "a person with at least one stored retest (store one "
                                                          "with `prescribe reassess RETEST.json`)")
    latest = rows[-1]
    result = latest["result"]
    versions = store.program_versions(patient_id)
    plans = [(v["created"], store.get_program(patient_id, v["version"])) for v in versions]
    start = start_day(plans[0][1]).isoformat()
    series = measure_series(start, rows)   # the baseline (at the program's start), then each retest
    by_measure = {m["measure"]: m for m in result["measures"]}
    rules = measure_rules()
    measures = []
    for name, rule in rules.items():
        points = series.get(name, [])
        m = by_measure.get(name)
        if m is None:
            continue
        measures.append({
            "label": rule.label, "unit": rule.unit, "baseline": _fmt(m["baseline"]), "now": _fmt(m["now"]),
            "change": ("+" if m["change"] > 0 else "") + _fmt(m["change"]), "mdc": _fmt(m["mdc"]),
            "verdict": _VERDICT_WORDS[m["verdict"]], "status": m["mdc_status"],
            "svg": measure_svg(rule.label, rule.unit, points, m["baseline"], m["mdc"], _bounds(name)),
            "source": m["mdc_source"],
            # a measure first taken at a retest: its first value is the baseline, from that day
            "since": _long_date(points[0][0]) if points and points[0][0] != start else None})
    sessions = store.sessions(patient_id)
    adherence = sessions_against_planned(plans, [s["session_date"] for s in sessions],
                                         date.fromisoformat(latest["date"]))
    sensor = None
    summaries = store.sensor_summaries(patient_id)
    if summaries:
        s = summaries[-1]["summary"]
        days = len(s.get("days") or [])
        sensor = {"impacts": int(s.get("impacts") or 0), "days": days,
                  "per_day": round((s.get("impacts") or 0) / days) if days else None,
                  "from": _long_date(s.get("start")) if s.get("start") else None,
                  "to": _long_date(s.get("end")) if s.get("end") else None,
                  "site": s.get("site") or "body"}
    nb = result.get("next_block")
    next_block = None
    if nb:
        next_block = {"starts_on": _long_date(nb["starts_on"]), "weeks": nb["weeks"],
                      "level": f"{nb['start_level']} ({IMPACT_LEVEL_LABELS.get(nb['start_level'], '')})",
                      "phase": nb.get("start_phase") or "-", "version": nb.get("program_version"),
                      "week": nb["continues_from_week"], "template": nb.get("template") or "-"}
    first_template = plans[0][1].template
    template = (first_template.title or first_template.name) if first_template is not None else None
    record = store.get_patient(patient_id)
    reasons = [{**r, "message": _prose(r["message"])} for r in result.get("reasons") or []]
    # every threshold and every reason printed, each source once
    sources = list(dict.fromkeys([m["source"] for m in measures] + [r["source"] for r in reasons if r.get("source")]))
    screening = dict(result.get("screening") or {})
    if screening.get("max_impact_level") is not None:
        level = screening["max_impact_level"]
        screening["level_words"] = f"{level} ({IMPACT_LEVEL_LABELS.get(level, '')})"
    return {
        "clinic": clinic, "today": _long_date(today.isoformat()), "patient_id": patient_id,
        "age": record.age_years, "sex": record.sex,
        "start": _long_date(start), "template": template or "the standard program",
        "retest_date": _long_date(latest["date"]), "retests": len(rows),
        "measures": measures, "first_measured": result.get("first_measured") or [],
        "adherence": adherence, "adherence_pct": (round(100 * adherence["fraction"])
                                                  if adherence["fraction"] is not None else None),
        "sensor": sensor, "decision": result["decision"], "reasons": reasons,
        "next_block": next_block, "flags": result.get("flags") or [],
        "falls": result.get("falls_since_last", 0), "height_loss": result.get("height_loss_cm"),
        "screening": screening,
        # the retest's own: the standard ones, a referral's, and those of the person's program
        "cautions": with_standard(result.get("cautions") or []), "short_caution": SHORT_CAUTION, "sources": sources,
        "clinician": latest.get("clinician") or "",
    }


def render_letter_html(ctx: dict) -> str:
    from .render import _environment
    return _environment().get_template("progress_letter.html.j2").render(**ctx)


def write_letter(store, patient_id: str, out: str | Path, *, today: date | None = None,
                 clinic: Clinic | None = None) -> dict:
    """Write the letter as PDF or HTML (by ``out``'s suffix); returns {out, format, pages?}."""
    path = Path(out)
    suffix = path.suffix.lower()
    if suffix not in LETTER_SUFFIXES:
        raise InputError.single("--out", str(out), "a file name ending in .pdf or .html")
    html = render_letter_html(letter_context(store, patient_id, today=today, clinic=clinic))
    from ..fileio import write_atomically
    if suffix == ".html":
        write_atomically(path, html, "--out")
        return {"out": str(out), "format": "html"}
    from .pdf import html_to_pdf
    pdf = html_to_pdf(html)
    write_atomically(path, pdf, "--out")
    from pypdf import PdfReader
    import io
    pages = len(PdfReader(io.BytesIO(pdf)).pages)
    return {"out": str(out), "format": "pdf", "pages": pages}
