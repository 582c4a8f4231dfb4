"""A drawing of every exercise's start and end position in the handout, HTML and PDF."""

from __future__ import annotations

import io
import re
import subprocess

from pypdf import PdfReader

from handout_fixtures import whole_catalogue_plan
from prescribe.catalogue import default_catalogue
from prescribe.catalogue.drawings import PROP
from prescribe.handout import render_html, render_pdf
from prescribe.handout.content import short_name
from prescribe.settings import Clinic

DEMO_CLINIC = Clinic("Riverside Bone Health Clinic (demo)", "555-0100")


def test_every_exercise_guide_in_the_html_has_its_drawing():
    html = render_html(whole_catalogue_plan(), audience="person", clinic=DEMO_CLINIC)
    guides = re.findall(r'<div class="guide">(.*?)</div>\s*(?=<div class="guide">|</div>)', html, re.S)
    assert len(guides) == len(default_catalogue())
    for ex in default_catalogue():
        assert f"<title>{short_name(ex.name)}: start and end position</title>" in html, ex.exercise_id
    assert html.count('<svg xmlns="http://www.w3.org/2000/svg" class="pose"') == len(default_catalogue())
    assert html.count('class="pose-caption">Start &rarr; End</p>') == len(default_catalogue())


def _rgb(hex_colour: str) -> str:
    return " ".join(f"{int(hex_colour[i:i + 2], 16) / 255:.6f}".rstrip("0").rstrip(".") for i in (1, 3, 5))


def test_every_exercise_guide_in_the_pdf_has_its_drawing():
    # Each drawing strokes its floor and props in a grey used nowhere else in the handout,
    # so the drawings on a page are counted from the PDF's own drawing operators.
    data = render_pdf(whole_catalogue_plan(), audience="person", clinic=DEMO_CLINIC)
    reader = PdfReader(io.BytesIO(data))
    marker = f"{_rgb(PROP)} RG"
    total = 0
    for number, page in enumerate(reader.pages, start=1):
        drawn = page.get_contents().get_data().decode("latin-1").count(marker)
        text = subprocess.run(["pdftotext", "-f", str(number), "-l", str(number), "-enc", "UTF-8", "-", "-"],
                              input=data, capture_output=True, check=True).stdout.decode("utf-8")
        captions = text.count("Start → End")
        assert drawn == captions, f"page {number}: {drawn} drawings, {captions} captions"
        total += drawn
    assert total == len(default_catalogue())
