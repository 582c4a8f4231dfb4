"""Render a plan as a printable handout: HTML through Jinja2, PDF through WeasyPrint.

The templates autoescape everything; the charts escape their own text; the few
values that go into print CSS (page headers) are escaped as CSS strings.
"""

from __future__ import annotations

import datetime as dt
import os
import re
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from typing import Any

from jinja2 import Environment, FileSystemLoader, StrictUndefined
from markupsafe import Markup

from .. import __version__
from ..cautions import PERSON_SHORT_CAUTION, SHORT_CAUTION
from ..errors import InputError
from ..fileio import write_atomically
from ..languages import LANGUAGE_NAMES, N_, SOURCE_LANGUAGE, check_language
from ..plan_schema import PLAN_FORMAT_VERSION, Plan, parse_plan
from ..safety import is_draft, plan_limits
from ..settings import Clinic, clinic as clinic_from_settings, translation_review
from . import charts, content, explain_figures, i18n, pdf
from .sensor_chart import sensor_charts

AUDIENCES = ("person", "clinician", "both")
#: Paper names as the command line takes them -> CSS page size.
PAPERS = {"a4": "A4", "letter": "letter"}
SUFFIXES = (".html", ".pdf")
TEMPLATES = Path(__file__).with_name("templates")


def check_options(audience: str, paper: str, names: tuple[str, ...] = ("audience", "paper", "language"),
                  language: str = SOURCE_LANGUAGE) -> None:
    """Refuse an unknown audience, paper size or language with an :class:`InputError` naming the option."""
    if audience not in AUDIENCES:
        raise InputError.single(names[0], audience, "one of " + ", ".join(AUDIENCES))
    if paper not in PAPERS:
        raise InputError.single(names[1], paper, "one of " + ", ".join(PAPERS))
    check_language(language, names[2] if len(names) > 2 else "language")


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
                      undefined=StrictUndefined, trim_blocks=True, lstrip_blocks=True,
                      extensions=["jinja2.ext.i18n"])
    env.filters["css_string"] = css_string
    # The person's pages ask the language being rendered (prescribe.handout.i18n.using) for
    # every text; the clinician's part of the template asks for none.  Whitespace inside a
    # {% trans %} block is collapsed, as the extraction does (babel.cfg: trimmed).
    env.policies["ext.i18n.trimmed"] = True
    env.install_gettext_callables(i18n.gettext, i18n.ngettext, newstyle=True, pgettext=i18n.pgettext)
    return env


#: The mark on every page of a draft program's handout.
DRAFT_TEXT = N_("DRAFT: do not start this program until a clinician has cleared you for it")

#: The word first on every page of the person's pages of a paused program (before the DRAFT mark).
PAUSED_WORD = N_("PAUSED")


def person_pause_text(clinic: Clinic) -> str:
    """What a paused program's person's pages say first, in the person's own plain words
    (never the clinician's reason); the clinic's contact from the settings when set.  In the
    current language."""
    _ = i18n.gettext
    call = (_("Call the clinic: %(contact)s.") % {"contact": clinic.contact} if clinic.contact
            else _("Call the clinic."))
    return _("%(paused)s: Do not do these exercises until your clinician tells you to start again. %(call)s "
             "Keep to your usual daily activities.") % {"paused": _(PAUSED_WORD), "call": call}


def css_page_counter(text: str) -> Markup:
    """"page %(page)s of %(pages)s" (translated) as CSS content: strings and page counters."""
    parts = []
    for piece in re.split(r"(%\((?:page|pages)\)s)", text):
        if piece == "%(page)s":
            parts.append("counter(page)")
        elif piece == "%(pages)s":
            parts.append("counter(pages)")
        elif piece:
            parts.append(css_string(piece))
    return Markup(" ".join(parts))


@dataclass(frozen=True)
class LanguageNote:
    """What the clinician's page says about the language of the person's pages."""

    tag: str
    name: str
    review: str
    mark: str
    untranslated: tuple[str, ...] = ()


def language_note(language: str, untranslated: list[str] | tuple[str, ...] = ()) -> LanguageNote:
    """The clinician's line on the person's pages' language: whether a qualified translator has
    reviewed that language's text (the clinic settings), and any text printed untranslated."""
    name = LANGUAGE_NAMES[language][0]
    if language == SOURCE_LANGUAGE:
        return LanguageNote(language, name, "The text is written in English, the clinic's language; "
                                            "nothing is translated.", "")
    review = translation_review(language)
    revised = i18n.revision_date(language)
    if review.reviewed:
        text = (f"A qualified translator has reviewed the {name} text: {review.reviewed_by}, on "
                f"{review.reviewed_on.isoformat()} (clinic settings).")
        if revised is not None and revised > review.reviewed_on:
            text += (f" The translation has changed since (revised on {revised.isoformat()}): have the changes "
                     "reviewed before relying on them.")
    else:
        text = (f"No qualified translator has reviewed the {name} text yet. It was written by the developers "
                "of prescribe; check it with a qualified medical translator or a clinician who reads "
                f"{name} before the person relies on it. Record a review in the clinic settings "
                f"([translations.{language}] reviewed_by and reviewed_on).")
    with i18n.using(language) as lang:
        mark = lang.gettext(i18n.IN_ENGLISH)
    return LanguageNote(language, name, text, mark, tuple(untranslated))


def handout_context(plan: Plan, audience: str, paper: str, clinic: Clinic, sensor_summary: dict | None = None,
                    large_print: bool = False, language: str | i18n.Language = SOURCE_LANGUAGE,
                    untranslated: list[str] | tuple[str, ...] = ()) -> dict:
    """Everything the template shows, worked out from the plan.

    What only the person's pages show (charts, tables, guides) or only the clinician's
    (dose rows, evidence) is worked out only when those pages are printed; a PDF for both
    audiences renders each audience's page on its own.  The person's pages are worked out
    in ``language``, the clinician's in the clinic's language (English); ``untranslated``
    names the texts the person's pages printed in English (a PDF's clinician part is laid
    out on its own and is told them).
    """
    facts = content.week_facts(plan)
    person, clinician = audience in ("person", "both"), audience in ("clinician", "both")
    larger = charts.with_larger_text if large_print else (lambda chart: chart)
    with i18n.using(SOURCE_LANGUAGE):  # the clinician's pages, whatever the person's language
        ctx = {
            "plan": plan, "audience": audience, "paper": paper, "page_size": PAPERS[paper],
            "large_print": bool(large_print),
            "person": person, "clinician": clinician,
            "clinic": clinic, "short_caution": SHORT_CAUTION, "cautions": content.all_cautions(plan),
            # Carer-led (screening carer_led): the person's pages speak to whoever helps (docs/handout.md).
            "carer": bool(plan_limits(plan).carer_led), "person_name": content.person_name(plan),
            "glance": content.at_a_glance(plan, facts),
            "dose_rows": content.dose_rows(plan) if clinician else None,
            "evidence": content.evidence(plan) if clinician else None,
            "explanations": explain_figures.plan_explanations(plan) if clinician else None,
            **(_limits_and_why(plan) if clinician else {"limits": None}),
            "created_on": content.weeks.day_words(_created_day(plan)),   # a day in words, not a timestamp
            "screening": plan.screening, "level_labels": content.LEVEL_LABELS,
            "versions": [("Tool version (plan)", plan.tool_version), ("Rule-set version", plan.ruleset_version),
                         ("Template", _template_text(plan)),
                         ("Plan format", plan.plan_format_version), ("Plan created", plan.created),
                         ("Handout made by", f"prescribe {__version__}, plan format {PLAN_FORMAT_VERSION}")],
            "has_weak": any(f.weak_window for f in facts),
            # A referred person's program not yet cleared: DRAFT on every page (docs/safety.md).
            "draft": is_draft(plan),
            # A paused program (docs/sessions.md): PAUSED first on every page of the person's pages,
            # in their own words; the clinician's pages give the date, week and reason.
            "pause": plan.paused, "resumed": plan.resumed,
            "minutes_only": any(f.impact_level >= 1 and not f.impacts_per_session for f in facts),
            "sensor_charts": sensor_charts(sensor_summary) if clinician else [],
            "clinician_page_counter": css_page_counter("page %(page)s of %(pages)s"),
        }
    with i18n.using(language) as lang:  # the person's pages
        _ = i18n.gettext
        name = ctx["person_name"]
        ctx.update({
            "language": lang.tag, "html_lang": lang.tag if person else SOURCE_LANGUAGE,
            "document_title": (_("Exercise program for %(name)s") % {"name": name} if person and not clinician
                               else f"Exercise program for {plan.patient_id}"),
            "person_cautions": content.person_cautions(plan) if person else None,
            "person_notes": [i18n.translate(text) for text in plan.screening.person_notes],
            "person_short_caution": i18n.translate(PERSON_SHORT_CAUTION),
            "person_header": _("Program for %(name)s") % {"name": name},
            "page_counter": css_page_counter(_("page %(page)s of %(pages)s")),
            "person_glance": content.at_a_glance(plan, facts) if person else None,
            "made_on": content.weeks.day_words(_created_day(plan)) if person else None,
            "goals": content.goals(plan) if person else None,
            "next_review": content.next_review(plan) if person else None,
            "reviews": content.review_weeks(plan) if person else None,
            "table": content.week_table(plan) if person else None,
            "guides": content.exercise_guides(plan) if person else None,
            "bouts": content.bout_advice(plan) if person else None,
            # Each chart only where it has something to draw (a level-1 program: its minutes).
            "person_charts": [(kind, larger(chart)) for kind, chart in charts.person_charts(plan)] if person else [],
            "if_hard_general": _(content.IF_HARD_GENERAL),
            "hold_note": _(content.tables.HOLD_NOTE),
            "paused_word": _(PAUSED_WORD) if person else PAUSED_WORD,
            "person_pause_text": person_pause_text(clinic),
            # Punctuation as the language writes it (Chinese: full-width, no spaces).
            "stop": i18n.pgettext("end of sentence", "."), "colon": i18n.pgettext("label colon", ":"),
            "name_join": i18n.pgettext("sentence join", ". "), "sentence_space": i18n.sentence_space(),
            "in_brackets": lambda text: _("(%(text)s)") % {"text": text},
        })
        draft_text = _(DRAFT_TEXT) if person else DRAFT_TEXT
    if person and clinician and not lang.english:
        draft_text += " / " + DRAFT_TEXT  # one HTML page for both: the mark in both languages
    ctx["draft_text"] = draft_text
    ctx["person_language"] = lang
    ctx["language_note"] = language_note(lang.tag, [*untranslated, *lang.missing]) if clinician else None
    return ctx


def _created_day(plan: Plan) -> dt.date:
    """The day the plan was made (its ``created`` stamp's date)."""
    return dt.date.fromisoformat(plan.created[:10])


def _limits_and_why(plan: Plan) -> dict:
    """The clinician's pages: the plan's limits with their reasons, and each exercise's reasons,
    the sources numbered once (prescribe.planning.why prints the same rows for `prescribe why`)."""
    from ..planning.why import limit_rows, why_by_exercise
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
                clinic: Clinic | None = None, sensor_summary: dict | None = None, large_print: bool = False,
                language: str = SOURCE_LANGUAGE) -> str:
    """The handout as one self-contained HTML page (print CSS and inline SVG charts).

    ``audience`` is person, clinician or both; ``paper`` is a4 or letter; ``language`` one of
    :data:`prescribe.languages.LANGUAGES` (the person's pages; the clinician's stay in English).  The
    clinic's name and contact come from :func:`prescribe.settings.clinic` unless given.
    ``large_print`` sets the person's pages in the large-print edition (body text 15 pt,
    headings larger, the same content reflowed); the clinician's pages stay as they are.
    """
    return _render_html(plan, audience, paper, clinic, sensor_summary, large_print, language)[0]


def _render_html(plan, audience, paper, clinic, sensor_summary, large_print, language,
                 untranslated: tuple[str, ...] = ()) -> tuple[str, list[str]]:
    """The HTML and the texts of the person's pages that had no translation (printed in English)."""
    check_options(audience, paper, language=language)
    plan = as_plan(plan)
    clinic = clinic if clinic is not None else clinic_from_settings()
    ctx = handout_context(plan, audience, paper, clinic, sensor_summary, large_print, language, untranslated)
    lang = ctx["person_language"]
    with i18n.using(lang):
        html = _environment().get_template("handout.html.j2").render(**ctx)
    return html, list(lang.missing)


def render_pdf(plan: Plan | dict, audience: str = "both", paper: str = "a4",
               clinic: Clinic | None = None, parallel: bool | None = None,
               sensor_summary: dict | None = None, large_print: bool = False,
               language: str = SOURCE_LANGUAGE) -> bytes:
    """The handout as PDF bytes (WeasyPrint), with page numbers and the short caution on every page.

    For both audiences the person's pages and the clinician's pages are two documents,
    each numbered on its own, joined into one file; they are laid out side by side
    when the machine allows (``parallel`` None decides; see :mod:`prescribe.handout.pdf`).
    The person's pages are in ``language``; the clinician's part is told which of their texts
    had no translation.
    """
    check_options(audience, paper, language=language)
    plan = as_plan(plan)
    clinic = clinic if clinic is not None else clinic_from_settings()
    audiences = ("person", "clinician") if audience == "both" else (audience,)
    htmls, missing = [], []
    for part in audiences:
        html, missed = _render_html(plan, part, paper, clinic, sensor_summary, large_print, language, tuple(missing))
        htmls.append(html)
        missing += [text for text in missed if text not in missing]
    return pdf.join_pdfs(pdf.render_parts(htmls, base_url=str(TEMPLATES), parallel=parallel))


def write_handout(plan: Plan | dict, out_path: str | os.PathLike, audience: str = "both",
                  paper: str = "a4", clinic: Clinic | None = None, sensor_summary: dict | None = None,
                  large_print: bool = False, language: str = SOURCE_LANGUAGE) -> Path:
    """Write the handout as HTML or PDF, chosen by the suffix of ``out_path``; the person's pages in
    ``language``.

    The file is written to a temporary name first and then renamed, so an existing
    file is never left half written.
    """
    out = check_out_path(out_path)
    suffix = out.suffix.lower()
    check_options(audience, paper, ("--audience", "--paper", "--language"), language)
    if suffix == ".pdf":
        data = render_pdf(plan, audience=audience, paper=paper, clinic=clinic, sensor_summary=sensor_summary,
                          large_print=large_print, language=language)
    else:
        data = render_html(plan, audience=audience, paper=paper, clinic=clinic,
                           sensor_summary=sensor_summary, large_print=large_print, language=language).encode("utf-8")
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
