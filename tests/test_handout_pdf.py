"""Handout PDFs: text, page counts, pages not blank, escaping (poppler's pdftotext/pdftoppm)."""

from __future__ import annotations

import re
import subprocess
from functools import lru_cache
from pathlib import Path

import pytest
from PIL import Image

from handout_fixtures import make_plan, planner_plan
from prescribe.cautions import PERSON_SHORT_CAUTION, SHORT_CAUTION, STANDARD_CAUTIONS
from prescribe.handout import render_pdf
from prescribe.handout.content import dose_text
from prescribe.settings import Clinic

DEMO_CLINIC = Clinic("Riverside Bone Health Clinic (demo)", "555-0100")

#: Pages for both audiences: the person pages (cover, charts, routine and week-by-week
#: tables, one guide per exercise with its drawing, safety) and the clinician pages
#: (flags, dose table, evidence, versions, sign-off).  Grouped weeks keep a year's plan
#: about as long as two months' (15 pages for 8 weeks and 16 for 26 when this bound was
#: set, with every row of the week tables naming its exercises and a drawing per guide).
#: (fewest, most) pages: the person's pages, then the clinician's (which print the limits and
#: each exercise's reasons with sources, one line per dose, so they grow with the program's stages).
PAGE_BOUNDS = {8: ((6, 12), (3, 9)), 26: ((6, 13), (3, 10)), 52: ((6, 13), (3, 10))}


@lru_cache(maxsize=None)
def _pdf(weeks: int, paper: str = "a4") -> bytes:
    return render_pdf(planner_plan(weeks), audience="both", paper=paper, clinic=DEMO_CLINIC)


def _write(tmp_path: Path, data: bytes, name: str = "h.pdf") -> Path:
    path = tmp_path / name
    path.write_bytes(data)
    return path


def _text(path: Path) -> str:
    out = subprocess.run(["pdftotext", "-enc", "UTF-8", str(path), "-"], capture_output=True, text=True, check=True)
    return out.stdout


def _flat(text: str) -> str:
    return " ".join(text.split())


def _pages(path: Path) -> int:
    info = subprocess.run(["pdfinfo", str(path)], capture_output=True, text=True, check=True).stdout
    return int(re.search(r"^Pages:\s+(\d+)", info, re.M).group(1))


@pytest.mark.parametrize("weeks", [8, 26, 52])
def test_page_count_is_sane(tmp_path, weeks):
    path = _write(tmp_path, _pdf(weeks))
    pages = _text(path).split("\f")[:_pages(path)]
    clinician = sum("Clinician pages: program for" in page for page in pages)
    (low, high), (c_low, c_high) = PAGE_BOUNDS[weeks]
    assert low <= len(pages) - clinician <= high, f"{weeks}-week plan gave {len(pages) - clinician} person's pages"
    assert c_low <= clinician <= c_high, f"{weeks}-week plan gave {clinician} clinician's pages"


def test_pdf_text_holds_cautions_every_exercise_and_the_counts(tmp_path):
    plan = planner_plan(26)
    path = _write(tmp_path, _pdf(26))
    text = _flat(_text(path))
    for caution in STANDARD_CAUTIONS:
        assert _flat(caution) in text
    pages = _text(path).split("\f")[:_pages(path)]
    # The person's pages and the clinician's pages are each numbered on their own.
    clinician = [i for i, page in enumerate(pages) if "Clinician pages: program for" in page]
    assert clinician and clinician == list(range(clinician[0], len(pages)))
    # The footer of every page: the person's pages say the caution in plain words. The footer's
    # page number sits beside the caution; text extraction may read it between the caution's two
    # lines, so it is taken out before the caution is sought.
    for section, caution in ((pages[:clinician[0]], PERSON_SHORT_CAUTION), (pages[clinician[0]:], SHORT_CAUTION)):
        for number, page in enumerate(section, start=1):
            footer = re.sub(r"page \d+ of \d+", " ", page)
            assert _flat(caution) in _flat(footer), f"page {number} has no caution"
            assert f"page {number} of {len(section)}" in _flat(page)
    names = {e.name for w in plan.weeks for s in w.sessions for e in s.exercises}
    for name in names:
        assert name in text, name
    for count in {w.impacts_per_session for w in plan.weeks if w.impacts_per_session}:
        assert f"{count} landings a session" in text
    # Each exercise's own count (landings, bouts, sets, minutes) as the week table words it.
    for week in plan.weeks:
        for ex in (e for sess in week.sessions for e in sess.exercises):
            assert dose_text(ex) in text, (week.week, ex.exercise_id, dose_text(ex))
    assert "Riverside Bone Health Clinic (demo)" in text and "555-0100" in text
    assert "Clinician page" in text and "Clinician's name" in text
    assert f"week {next(w.week for w in plan.weeks if w.reassessment)}" in text.lower()


def test_letter_and_a4_page_sizes(tmp_path):
    a4 = subprocess.run(["pdfinfo", str(_write(tmp_path, _pdf(8), "a4.pdf"))], capture_output=True, text=True).stdout
    letter = subprocess.run(["pdfinfo", str(_write(tmp_path, _pdf(8, "letter"), "l.pdf"))],
                            capture_output=True, text=True).stdout
    assert re.search(r"Page size:\s+595\.\d* x 841\.\d* pts", a4)  # ISO 216 A4, 210 x 297 mm
    assert re.search(r"Page size:\s+612 x 792 pts", letter)  # US Letter, 8.5 x 11 in


def test_every_page_has_ink_and_one_is_kept_for_review(tmp_path, artifacts_dir):
    path = _write(tmp_path, _pdf(26))
    subprocess.run(["pdftoppm", "-r", "24", "-gray", "-png", str(path), str(tmp_path / "page")], check=True)
    pngs = sorted(tmp_path.glob("page-*.png"))
    assert len(pngs) == _pages(path)
    for png in pngs:
        img = Image.open(png).convert("L")
        dark = sum(img.histogram()[:200])
        share = dark / (img.width * img.height)
        assert share > 0.01, f"{png.name} is nearly blank ({share:.2%} ink)"
    keep = artifacts_dir / "handout-26-weeks-page-2.png"
    subprocess.run(["pdftoppm", "-r", "80", "-png", "-f", "2", "-l", "2", "-singlefile", str(path),
                    str(keep.with_suffix(""))], check=True)
    assert keep.exists() and keep.stat().st_size > 10_000
    print(f"handout page 2 (charts) rendered to {keep}")


def test_markup_in_id_and_notes_is_printed_literally(tmp_path):
    data = make_plan(weeks=8, patient_id="<script>alert(1)</script>", note="<b>bold</b>")
    path = _write(tmp_path, render_pdf(data, audience="both", clinic=DEMO_CLINIC))
    text = _text(path)
    assert "<script>alert(1)</script>" in text
    assert "<b>bold</b>" in text


@pytest.mark.parametrize("paper", ["a4", "letter"])
def test_both_charts_share_one_page_on_either_paper(tmp_path, paper):
    # Common practice in patient handouts: a figure and its key are read together, on one page.
    path = _write(tmp_path, _pdf(26, paper))
    pages = _text(path).split("\f")
    first = [i for i, page in enumerate(pages) if "Landings (impacts) per session, week by week" in page]
    second = [i for i, page in enumerate(pages) if "Strength exercise load, week by week" in page]
    plan = planner_plan(26)
    loaded = any(x.intensity and "1RM" in x.intensity for w in plan.weeks for s in w.sessions for x in s.exercises)
    assert len(first) == 1 and second == (first if loaded else [])   # no chart without a load to draw
    assert "hold" in pages[first[0]] and "step-up in impact level" in pages[first[0]]
