"""The progress letter (prescribe/handout/letter.py) as its reader gets it: a referring clinician
with the PDF.  Invented clinic and people only."""

from __future__ import annotations

import io
import re
from datetime import date, timedelta

import pytest
from pypdf import PdfReader

from prescribe.cautions import STANDARD_CAUTIONS
from prescribe.clinic.reassess import reassess_person
from prescribe.handout.letter import letter_context, render_letter_html
from prescribe.handout.pdf import html_to_pdf
from prescribe.outcomes.retest import parse_retest
from prescribe.settings import Clinic
from prescribe.store import open_store
from session_support import person, plan_dict

PID = "RT-LETTER-1"
CLINIC = Clinic(name="Larkfield Bone Clinic (invented)", contact="555-0142")
ISO_DAY = re.compile(r"\d{4}-\d{2}-\d{2}")


def _visible(html: str) -> str:
    """The letter's text as printed: no chart's hidden description, no tags."""
    html = re.sub(r"<(svg|style|title)\b.*?</\1>", " ", html, flags=re.S)
    return re.sub(r"\s+", " ", re.sub(r"<[^>]+>", " ", html))


@pytest.fixture
def fell_twice(tmp_db):
    """A person retested twice: better at the first review, then two falls and a slower Timed Up and Go."""
    start = date.today() - timedelta(days=7 * 14)
    with open_store(tmp_db) as s:
        s.save_patient(person(PID), None, "EP Letter (invented)", plan=plan_dict(PID, weeks=26, start=start))
        reassess_person(s, parse_retest({"patient_id": PID, "date": (date.today() - timedelta(days=28)).isoformat(),
                                         "falls_since_last": 0, "timed_up_and_go_s": 6.9, "chair_stand_30s": 17}),
                        clinician="EP Letter (invented)")
        out = reassess_person(s, parse_retest({"patient_id": PID, "date": date.today().isoformat(),
                                               "falls_since_last": 2, "timed_up_and_go_s": 9.4,
                                               "chair_stand_30s": 16, "pain_score": 1}),
                              clinician="EP Letter (invented)")
        ctx = letter_context(s, PID, clinic=CLINIC)
    return out, ctx


def test_a_referral_letter_names_rules_in_words_and_days_as_days(fell_twice):
    out, ctx = fell_twice
    # two falls since the last visit refer (AGS/BGS 2011 multifactorial falls assessment, from memory)
    assert out["decision"] == "refer"
    refers = next(r for r in out["reasons"] if r["rule"] == "reassess.screening_refers")
    assert "falls.recurrent" not in refers["message"]                  # the rule's title, not its id
    text = _visible(render_letter_html(ctx))
    assert "We are referring back before the program goes on." in text
    assert "2 falls since the last visit were reported." in text
    assert not ISO_DAY.search(text), ISO_DAY.search(text)                 # days as days, no stored timestamps
    assert f"{date.today().day} {date.today().strftime('%B %Y')}" in text
    # every reason printed has its source among the letter's sources (common practice: cite what you state)
    for r in ctx["reasons"]:
        assert r["source"] in ctx["sources"]
    # the cautions: the standard ones, the referral's and the program's own
    assert ctx["cautions"][:len(STANDARD_CAUTIONS)] == list(STANDARD_CAUTIONS)
    assert "Refer: do not continue loading until a clinician has assessed the person." in ctx["cautions"]
    assert set(out["cautions"]) <= set(ctx["cautions"])


def test_the_pdf_has_no_empty_chart_and_at_most_two_pages(fell_twice):
    _, ctx = fell_twice
    html = render_letter_html(ctx)
    charts = re.findall(r"<svg[^>]*measure-chart.*?</svg>", html, flags=re.S)
    # Timed Up and Go and the chair stand were measured three times; pain twice (the intake's and now)
    assert len(charts) == 3 and all(c.count("<circle") >= 2 for c in charts)
    assert len(charts) == sum(1 for m in ctx["measures"] if m["svg"])
    pdf = PdfReader(io.BytesIO(html_to_pdf(html)))
    assert 1 <= len(pdf.pages) <= 2
    printed = re.sub(r"\s+", " ", " ".join(p.extract_text() for p in pdf.pages))
    assert "Larkfield Bone Clinic (invented)" in printed and "Page 1 of" in printed
    assert "licensed" in printed and not ISO_DAY.search(printed)


def test_a_full_letter_still_fits_two_pages(tmp_db):
    """The longest letter the demo clinic writes: after a vertebral fracture (the most cautions), every
    DXA site as T- and Z-scores (twelve charts; the Z-scores first taken at the first retest), a worn
    sensor's summary and two retests."""
    from prescribe.demo import DEMO_RECORDS
    from prescribe.planning import build_plan
    from prescribe.records import parse_record

    data = dict(next(r for r in DEMO_RECORDS if r["patient_id"] == "DEMO-0002"))
    record = parse_record(data)
    plan = build_plan(record).model_dump(mode="json")
    plan["start_date"] = (date.today() - timedelta(days=7 * 9)).isoformat()
    pid = record.patient_id
    with open_store(tmp_db) as s:
        s.save_patient(record, None, "EP Letter (invented)", plan=plan)
        s.add_sensor_summary(pid, {"file": "hip.csv", "site": "hip", "impacts": 2310, "days": ["d"] * 7,
                                   "start": (date.today() - timedelta(days=9)).isoformat(),
                                   "end": (date.today() - timedelta(days=2)).isoformat()}, "EP Letter (invented)")
        for days_ago, shift in ((21, 0.0), (0, 0.1)):
            reassess_person(s, parse_retest({
                "patient_id": pid, "date": (date.today() - timedelta(days=days_ago)).isoformat(),
                "falls_since_last": 0, "timed_up_and_go_s": 10.2 - 5 * shift, "chair_stand_30s": 11,
                "tandem_stance_s": 10, "pain_score": 2, "body_mass_kg": 54.2, "height_cm": 156.0,
                "t_scores": {"lumbar_spine": -3.0 + shift, "femoral_neck": -2.6 + shift, "total_hip": -2.4},
                "z_scores": {"lumbar_spine": -1.2 + shift, "femoral_neck": -0.9 + shift, "total_hip": -0.8}}),
                clinician="EP Letter (invented)")
        ctx = letter_context(s, pid, clinic=CLINIC)
    html = render_letter_html(ctx)
    assert len(re.findall(r"<svg[^>]*measure-chart", html)) == 12 and ctx["sensor"]["impacts"] == 2310
    assert len(ctx["cautions"]) > len(STANDARD_CAUTIONS) + 3
    assert len(PdfReader(io.BytesIO(html_to_pdf(html))).pages) <= 2
    # the Z-scores were first taken at the first retest: the letter says from when their baseline counts
    z = next(m for m in ctx["measures"] if m["label"].startswith("Lumbar spine Z"))
    t = next(m for m in ctx["measures"] if m["label"].startswith("Lumbar spine T"))
    first = date.today() - timedelta(days=21)
    assert z["since"] == f"{first.day} {first.strftime('%B %Y')}" and t["since"] is None
    assert f"(first, {z['since']})" in _visible(html)
