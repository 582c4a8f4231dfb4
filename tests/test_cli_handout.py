"""`prescribe handout PLAN.json --out FILE.pdf|FILE.html [--paper] [--audience]` end to end."""

from __future__ import annotations

import json
import subprocess

import pytest

from handout_fixtures import make_plan, planner_plan

DEMO_ENV = {"PRESCRIBE_CLINIC_NAME": "Riverside Bone Health Clinic (demo)", "PRESCRIBE_CLINIC_CONTACT": "555-0100"}


@pytest.fixture
def plan_file(tmp_path):
    path = tmp_path / "plan.json"
    path.write_text(json.dumps(planner_plan(8).model_dump(mode="json")), encoding="utf-8")
    return path


def _no_traceback(result):
    assert "Traceback" not in result.stderr


def test_pdf_handout(cli, plan_file, tmp_path):
    out = tmp_path / "handout.pdf"
    result = cli("handout", str(plan_file), "--out", str(out), "--paper", "letter", env=DEMO_ENV)
    assert result.returncode == 0, result.stderr
    report = json.loads(result.stdout)
    assert report["out"] == str(out) and report["format"] == "pdf" and report["paper"] == "letter"
    assert report["patient_id"] == "NTC-0042" and report["weeks"] == 8 and report["cautions"]
    assert out.read_bytes().startswith(b"%PDF-") and report["bytes"] == out.stat().st_size


def test_html_handout_for_the_person_only(cli, plan_file, tmp_path):
    out = tmp_path / "handout.html"
    result = cli("handout", str(plan_file), "--out", str(out), "--audience", "person", env=DEMO_ENV)
    assert result.returncode == 0, result.stderr
    html = out.read_text(encoding="utf-8")
    assert "Riverside Bone Health Clinic (demo)" in html and "555-0100" in html
    assert "Your goals" in html and "Clinician page" not in html


@pytest.mark.parametrize("args, message", [
    (["--out", "{tmp}/h.docx"], "--out must be a file name ending in .html or .pdf, not '{tmp}/h.docx'."),
    (["--out", "{tmp}/h.pdf", "--paper", "a5"], "--paper must be one of a4, letter, not 'a5'."),
    (["--out", "{tmp}/h.pdf", "--audience", "family"],
     "--audience must be one of person, clinician, both, not 'family'."),
    (["--out", "{tmp}/h.pdf", "--language", "fr"], "--language must be one of en, es, zh-Hans, not 'fr'."),
    (["--out", "{tmp}/h.html", "--language", "zh-CN"], "--language must be one of en, es, zh-Hans, not 'zh-CN'."),
])
def test_bad_options_exit_2_naming_the_option(cli, plan_file, tmp_path, args, message):
    result = cli("handout", str(plan_file), *[a.format(tmp=tmp_path) for a in args])
    assert result.returncode == 2
    assert message.format(tmp=tmp_path) in result.stderr
    _no_traceback(result)
    assert not list(tmp_path.glob("h.*"))


def test_plan_from_another_major_version_exits_2(cli, tmp_path):
    data = make_plan(weeks=4)
    data["plan_format_version"] = "2.0"
    path = tmp_path / "future.json"
    path.write_text(json.dumps(data))
    result = cli("handout", str(path), "--out", str(tmp_path / "h.html"))
    assert result.returncode == 2
    assert "plan_format_version must be a plan of format version 1.x" in result.stderr
    assert "not '2.0'" in result.stderr
    _no_traceback(result)


def test_malformed_plan_files_exit_2_and_keep_an_existing_handout(cli, tmp_path):
    out = tmp_path / "h.html"
    out.write_text("the handout printed last week")
    broken = tmp_path / "broken.json"
    broken.write_text('{"patient_id": ')
    result = cli("handout", str(broken), "--out", str(out))
    assert result.returncode == 2 and "PLAN.json must be well-formed JSON" in result.stderr
    bad = make_plan(weeks=4)
    bad["weeks"][0]["impacts_per_session"] = -5
    wrong = tmp_path / "wrong.json"
    wrong.write_text(json.dumps(bad))
    result = cli("handout", str(wrong), "--out", str(out))
    assert result.returncode == 2 and "impacts_per_session" in result.stderr
    result = cli("handout", str(tmp_path / "missing.json"), "--out", str(out))
    assert result.returncode == 2 and "an existing, readable file" in result.stderr
    _no_traceback(result)
    assert out.read_text() == "the handout printed last week"


def test_large_print_pdf_for_the_person(cli, plan_file, tmp_path):
    # `prescribe handout PLAN.json --out FILE --large-print` (PRODUCT.md, the person's handout,
    # readable): body text at least 14 pt, read back from the PDF's own text runs.
    import io
    from collections import Counter

    from pypdf import PdfReader

    out = tmp_path / "large.pdf"
    # Without --audience, the large-print edition holds the person's pages only.
    result = cli("handout", str(plan_file), "--out", str(out), "--large-print", env=DEMO_ENV)
    assert result.returncode == 0, result.stderr
    report = json.loads(result.stdout)
    assert report["large_print"] is True and report["audience"] == "person"
    sizes: Counter = Counter()
    for page in PdfReader(io.BytesIO(out.read_bytes())).pages:
        def visit(text, cm, tm, _font, size):
            if text.strip():
                sizes[round(size * (tm[2] ** 2 + tm[3] ** 2) ** 0.5 * (cm[2] ** 2 + cm[3] ** 2) ** 0.5, 1)] += len(text)
        page.extract_text(visitor_text=visit)
    assert sizes.most_common(1)[0][0] >= 14.0
    assert "Clinician pages" not in subprocess.run(["pdftotext", str(out), "-"], capture_output=True,
                                                    text=True, check=True).stdout
    html = tmp_path / "large.html"
    result = cli("handout", str(plan_file), "--out", str(html), "--large-print", "--audience", "both")
    assert result.returncode == 0 and json.loads(result.stdout)["audience"] == "both"
    assert 'class="paper-a4 audience-both large-print"' in html.read_text(encoding="utf-8")


@pytest.mark.parametrize("language, person_words, page_words", [
    ("es", "Su plan de ejercicio para tener huesos fuertes", "página 1 de"),
    ("zh-Hans", "您的强健骨骼锻炼计划", "第1页，共"),
])
def test_the_persons_pages_in_another_language(cli, plan_file, tmp_path, language, person_words, page_words):
    # `prescribe handout PLAN.json --language es|zh-Hans` (PRODUCT.md, "The person's language"):
    # the person's pages in that language, the clinician's in English with the translator line.
    out = tmp_path / "handout.pdf"
    result = cli("handout", str(plan_file), "--out", str(out), "--language", language, env=DEMO_ENV)
    assert result.returncode == 0, result.stderr
    assert json.loads(result.stdout)["language"] == language
    text = subprocess.run(["pdftotext", "-enc", "UTF-8", str(out), "-"], capture_output=True, check=True).stdout
    person, clinician = text.decode("utf-8").split("Clinician page", 1)
    assert person_words in person and page_words in person and "Your exercise plan" not in person
    assert "No qualified translator has reviewed the" in " ".join(clinician.split())
    english = tmp_path / "english.html"
    result = cli("handout", str(plan_file), "--out", str(english), env=DEMO_ENV)
    assert json.loads(result.stdout)["language"] == "en" and "Your exercise plan" in english.read_text()
