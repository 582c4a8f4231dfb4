"""Render a plan as a printable handout: HTML through Jinja2, PDF through WeasyPrint.

The templates autoescape everything; the charts escape their own text; the few
values that go into print CSS (page headers) are escaped as CSS strings.
"""

from __future__ import annotations

import os
from functools import lru_cache
from pathlib import Path
from typing import Any

from jinja2 import Environment, FileSystemLoader, StrictUndefined
from markupsafe import Markup

from .. import __version__
from ..cautions import PERSON_SHORT_CAUTION, SHORT_CAUTION
from ..errors import InputError
from ..fileio import write_atomically
from ..plan_schema import PLAN_FORMAT_VERSION, Plan, parse_plan
from ..safety import is_draft
from ..settings import Clinic, clinic as clinic_from_settings
from . import charts, content, explain_figures, pdf
from .sensor_chart import sensor_charts

AUDIENCES = ("person", "clinician", "both")
#: Paper names as the command line takes them -> CSS page size.
PAPERS = {"a4": "A4", "letter": "letter"}
SUFFIXES = (".html", ".pdf")
TEMPLATES = Path(__file__).with_name("templates")


def check_options(audience: str, paper: str, names: tuple[str, str] = ("audience", "paper")) -> None:
    """Refuse an unknown audience or paper size with an :class:`InputError` naming the option."""
    if audience not in AUDIENCES:
        raise InputError.single(names[0], audience, "one of " + ", ".join(AUDIENCES))
    if paper not in PAPERS:
        raise InputError.single(names[1], paper, "one of " + ", ".join(PAPERS))


def check_out_path(out_path: str | os.PathLike) -> Path:
    """The output path, if its suffix is one we write; else an :class:`InputError` naming ``--out``."""
    out = Path(out_path)
    if out.suffix.lower() not in SUFFIXES:
        raise InputError.single("--out", str(out_path), "a file name ending in " + " or ".join(SUFFIXES))
    return out


def as_plan(plan: Plan | dict | Any, source: str | None = None) -> Plan:
    """A validated :class:`Plan` (a dict is checked with :func:`parse_plan`)."""
    return plan if isinstance(plan, Plan) else parse_plan(plan, source)


def css_string(value: Any) -> Markup:
    """A double-quoted CSS string; anything but plain letters, digits and punctuation is hex-escaped."""
    safe = set("abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ0123456789 .,:;-_()")
    body = "".join(ch if ch in safe else f"\\{ord(ch):06x}" for ch in str(value))
    return Markup(f'"{body}"')


@lru_cache(maxsize=1)
def _environment() -> Environment:
    env = Environment(loader=FileSystemLoader(str(TEMPLATES)), autoescape=True,
                      undefined=StrictUndefined, trim_blocks=True, lstrip_blocks=True)
    env.filters["css_string"] = css_string
    return env


#: The mark on every page of a draft program's handout.
DRAFT_TEXT = "DRAFT: do not start this program until a clinician has cleared you for it"

#: The word first on every page of the person's pages of a paused program (before the DRAFT mark).
PAUSED_WORD = "PAUSED"


def person_pause_text(clinic: Clinic) -> str:
    """What a paused program's person's pages say first, in the person's own plain words
    (never the clinician's reason); the clinic's contact from the settings when set."""
    call = f"Call the clinic: {clinic.contact}." if clinic.contact else "Call the clinic."
    return (f"{PAUSED_WORD}: Do not do these exercises until your clinician tells you to start again. {call} "
            "Keep to your usual daily activities.")


def handout_context(plan: Plan, audience: str, paper: str, clinic: Clinic, sensor_summary: dict | None = None,
                    large_print: bool = False) -> dict:
    """Everything the template shows, worked out from the plan.

    What only the person's pages show (charts, tables, guides) or only the clinician's
    (dose rows, evidence) is worked out only when those pages are printed; a PDF for both
    audiences renders each audience's page on its own.
    """
    facts = content.week_facts(plan)
    person, clinician = audience in ("person", "both"), audience in ("clinician", "both")
    larger = charts.with_larger_text if large_print else (lambda chart: chart)
    return {
        "plan": plan, "audience": audience, "paper": paper, "page_size": PAPERS[paper],
        "large_print": bool(large_print),
        "person": person, "clinician": clinician,
        "clinic": clinic, "short_caution": SHORT_CAUTION, "cautions": content.all_cautions(plan),
        "person_cautions": content.person_cautions(plan) if person else None,
        "person_notes": plan.screening.person_notes,
        # Carer-led (screening carer_led): the person's pages speak to whoever helps (docs/handout.md).
        "carer": bool(plan.screening.carer_led), "person_name": content.person_name(plan),
        "person_short_caution": PERSON_SHORT_CAUTION,
        "glance": content.at_a_glance(plan, facts),
        "goals": content.goals(plan) if person else None,
        "next_review": content.next_review(plan) if person else None,
        "reviews": content.review_weeks(plan) if person else None,
        "table": content.week_table(plan) if person else None,
        "guides": content.exercise_guides(plan) if person else None,
        "bouts": content.bout_advice(plan) if person else None,
        "impacts_chart": larger(charts.impacts_chart(plan)) if person else None,
        "intensity_chart": larger(charts.intensity_chart(plan)) if person else None,
        "dose_rows": content.dose_rows(plan) if clinician else None,
        "evidence": content.evidence(plan) if clinician else None,
        "explanations": explain_figures.plan_explanations(plan) if clinician else None,
        **(_limits_and_why(plan) if clinician else {"limits": None}),
        "screening": plan.screening, "level_labels": content.LEVEL_LABELS, "if_hard_general": content.IF_HARD_GENERAL,
        "versions": [("Tool version (plan)", plan.tool_version), ("Rule-set version", plan.ruleset_version),
                     ("Template", _template_text(plan)),
                     ("Plan format", plan.plan_format_version), ("Plan created", plan.created),
                     ("Handout made by", f"prescribe {__version__}, plan format {PLAN_FORMAT_VERSION}")],
        "has_weak": any(f.weak_window for f in facts),
        # A referred person's program not yet cleared: DRAFT on every page (docs/safety.md).
        "draft": is_draft(plan), "draft_text": DRAFT_TEXT,
        # A paused program (docs/sessions.md): PAUSED first on every page of the person's pages,
        # in their own words; the clinician's pages give the date, week and reason.
        "pause": plan.paused, "resumed": plan.resumed, "paused_word": PAUSED_WORD,
        "person_pause_text": person_pause_text(clinic),
        "minutes_only": any(f.impact_level >= 1 and not f.impacts_per_session for f in facts),
        "sensor_charts": sensor_charts(sensor_summary) if clinician else [],
    }


def _limits_and_why(plan: Plan) -> dict:
    """The clinician's pages: the plan's limits with their reasons, and each exercise's reasons,
    the sources numbered once (prescribe.planning.why prints the same rows for `prescribe why`)."""
    from ..planning.why import limit_rows, why_by_exercise
    from ..safety import plan_limits
    limits = plan_limits(plan)
    numbers: dict[str, int] = {}

    def cite(source: str) -> int:
        return numbers.setdefault(source, len(numbers) + 1)

    lrows = limit_rows(limits)
    for row in lrows:
        for r in row["reasons"]:
            r["n"] = cite(r["source"])
    wrows = why_by_exercise(plan)
    for row in wrows:
        for w in (*row["chosen"], *(w for d in row["doses"] for w in d["why"])):
            w["n"] = cite(w["source"])
    return {"limits": limits, "limit_rows": lrows, "why_rows": wrows,
            "why_sources": sorted(numbers, key=numbers.get)}


def render_html(plan: Plan | dict, audience: str = "both", paper: str = "a4",
                clinic: Clinic | None = None, sensor_summary: dict | None = None, large_print: bool = False) -> str:
    """The handout as one self-contained HTML page (print CSS and inline SVG charts).

    ``audience`` is person, clinician or both; ``paper`` is a4 or letter.  The
    clinic's name and contact come from :func:`prescribe.settings.clinic` unless given.
    ``large_print`` sets the person's pages in the large-print edition (body text 15 pt,
    headings larger, the same content reflowed); the clinician's pages stay as they are.
    """
    check_options(audience, paper)
    plan = as_plan(plan)
    clinic = clinic if clinic is not None else clinic_from_settings()
    return _environment().get_template("handout.html.j2").render(
        **handout_context(plan, audience, paper, clinic, sensor_summary, large_print))


def render_pdf(plan: Plan | dict, audience: str = "both", paper: str = "a4",
               clinic: Clinic | None = None, parallel: bool | None = None,
               sensor_summary: dict | None = None, large_print: bool = False) -> bytes:
    """The handout as PDF bytes (WeasyPrint), with page numbers and the short caution on every page.

    For both audiences the person's pages and the clinician's pages are two documents,
    each numbered on its own, joined into one file; they are laid out side by side
    when the machine allows (``parallel`` None decides; see :mod:`prescribe.handout.pdf`).
    """
    check_options(audience, paper)
    plan = as_plan(plan)
    clinic = clinic if clinic is not None else clinic_from_settings()
    audiences = ("person", "clinician") if audience == "both" else (audience,)
    htmls = [render_html(plan, audience=a, paper=paper, clinic=clinic, sensor_summary=sensor_summary,
                         large_print=large_print) for a in audiences]
    return pdf.join_pdfs(pdf.render_parts(htmls, base_url=str(TEMPLATES), parallel=parallel))


def write_handout(plan: Plan | dict, out_path: str | os.PathLike, audience: str = "both",
                  paper: str = "a4", clinic: Clinic | None = None, sensor_summary: dict | None = None,
                  large_print: bool = False) -> Path:
    """Write the handout as HTML or PDF, chosen by the suffix of ``out_path``.

    The file is written to a temporary name first and then renamed, so an existing
    file is never left half written.
    """
    out = check_out_path(out_path)
    suffix = out.suffix.lower()
    check_options(audience, paper, ("--audience", "--paper"))
    if suffix == ".pdf":
        data = render_pdf(plan, audience=audience, paper=paper, clinic=clinic, sensor_summary=sensor_summary,
                          large_print=large_print)
    else:
        data = render_html(plan, audience=audience, paper=paper, clinic=clinic,
                           sensor_summary=sensor_summary, large_print=large_print).encode("utf-8")
    directory = out.parent if str(out.parent) else Path(".")
    if not directory.is_dir():
        raise InputError.single("--out", str(out_path), "a file in an existing folder")
    write_atomically(out, data, "--out")
    return out


def _template_text(plan) -> str:
    """The template a program was built from, with its version (``name@version``, origin)."""
    tpl = plan.template
    if tpl is None:
        return "not recorded"
    version = plan.template_version or tpl.version
    text = tpl.name + (f"@{version}" if version else " (version not recorded)")
    return text + (f" ({tpl.origin})" if tpl.origin else "")
