"""The handout of a paused program, page by page (PRODUCT.md, third stage: "the person's
handout says PAUSED, first, on every page").

After a fall the program is paused: stop loading and refer for assessment before more
exercise (Riebe D et al. 2015, Med Sci Sports Exerc 47(11):2473-2479).  The person's pages
say so first on every page, before the DRAFT mark, in the person's own words (never the
clinician's reason); the clinician's pages give the date, the week and the reason.
Invented people and an invented clinic.
"""

from __future__ import annotations

import shutil
import subprocess

import pytest

from prescribe.handout import render_html, render_pdf
from prescribe.plan_schema import PlanResume
from prescribe.sessions.engine import assess
from prescribe.settings import Clinic
from session_support import day_of, full_weeks, logged, program

CLINIC = Clinic(name="Riverside Bone Health (invented)", contact="555-0142")
PERSON_WORDS = "Do not do these exercises until your clinician tells you to start again"

needs_poppler = pytest.mark.skipif(shutil.which("pdftotext") is None and not __import__("os").environ.get("CI"),
                                   reason="pdftotext (poppler-utils) is not installed")


def _paused_plan(draft: bool = False):
    plan = program()
    sessions = full_weeks([6], plan)
    sessions[-1] = logged(6, 5, sid=9, fell_since_last=True)
    paused = assess(plan, sessions, today=day_of(7), program_version=1).program
    assert paused.paused.from_week == 7
    if draft:
        paused = paused.model_copy(update={"draft": True})  # a referred person not yet cleared: DRAFT too
    return paused


def _sizes_of(data: bytes, starts: tuple[str, ...]) -> list[float]:
    """The sizes [pt] of the runs of text that start with any of ``starts``, on every page."""
    import io

    from pypdf import PdfReader
    out = []
    for page in PdfReader(io.BytesIO(data)).pages:
        def visit(text, cm, tm, _font, size):
            if text.strip().startswith(starts):
                out.append(size * (tm[2] ** 2 + tm[3] ** 2) ** 0.5 * (cm[2] ** 2 + cm[3] ** 2) ** 0.5)
        page.extract_text(visitor_text=visit)
    return out


def _pages(path) -> list[str]:
    count = int(next(line.split()[-1] for line in subprocess.run(
        ["pdfinfo", str(path)], capture_output=True, text=True, check=True).stdout.splitlines()
        if line.startswith("Pages:")))
    return [" ".join(subprocess.run(["pdftotext", "-f", str(i), "-l", str(i), str(path), "-"],
                                    capture_output=True, text=True, check=True).stdout.split())
            for i in range(1, count + 1)]


@needs_poppler
@pytest.mark.parametrize("draft, large_print", [(False, False), (True, True)])
def test_riebe_2015_every_person_page_says_paused_first_in_plain_words(tmp_path, draft, large_print):
    plan = _paused_plan(draft)
    out = tmp_path / "person.pdf"
    data = render_pdf(plan, audience="person", clinic=CLINIC, large_print=large_print)
    out.write_bytes(data)
    if large_print:  # the pause is set like the large-print body, at 14 pt or more (issue 19)
        sizes = _sizes_of(data, ("PAUSED", "Do not do these exercises"))
        assert sizes and min(sizes) >= 14.0 - 0.05
    pages = _pages(out)
    assert len(pages) >= 3
    for number, text in enumerate(pages, start=1):
        # The first text pdftotext reads from the page is the word PAUSED (the running header).
        assert text.split()[0] == "PAUSED", (number, text[:120])
        assert PERSON_WORDS in text and "Call the clinic: 555-0142" in text, number
        # Before anything else on the page: the DRAFT mark comes after the pause.
        if draft:
            assert "DRAFT" in text and text.index("PAUSED") < text.index("DRAFT"), number
        # The person's words, never the clinician's reason.
        assert "check for injury or fracture" not in text, number


@needs_poppler
def test_the_clinician_pages_state_the_pause_with_its_date_and_reason(tmp_path):
    plan = _paused_plan()
    out = tmp_path / "clinician.pdf"
    out.write_bytes(render_pdf(plan, audience="clinician", clinic=CLINIC))
    pages = _pages(out)
    first = pages[0]
    since = plan.paused.since
    assert "Program paused" in first and f"Paused since {since}, from week 7" in first
    assert "A fall since the last session: check for injury or fracture" in first and "prescribe resume" in first
    assert all(f"paused since {since}" in text for text in pages)
    assert all(PERSON_WORDS not in text for text in pages)


def test_paused_comes_before_everything_in_the_html_and_goes_once_resumed():
    plan = _paused_plan(draft=True)
    html = render_html(plan, audience="both", clinic=CLINIC)
    body = html[html.index("<body"):]
    assert body.index("pause-mark") < body.index("draft-mark") < body.index("masthead")
    assert "PAUSED: Do not do these exercises" in body
    resumed = plan.model_copy(update={"paused": None, "draft": False, "resumed": PlanResume(
        by="Dr I. Vale (invented)", at="2026-07-20T09:00:00+00:00", reason="Assessed: no injury (invented)",
        paused_version=2, paused_since=plan.paused.since, from_week=7)})
    html = render_html(resumed, audience="both", clinic=CLINIC)
    assert "PAUSED" not in html and "pause-mark" not in html
    assert "Program resumed" in html and "Assessed: no injury (invented)" in html
