"""A drawing of every exercise's start and end position in the handout, HTML and PDF."""

from __future__ import annotations

import io
import re
import subprocess
from functools import lru_cache

from pypdf import PdfReader

from handout_fixtures import make_plan
from prescribe.catalogue import default_catalogue
from prescribe.drawings import PROP
from prescribe.handout import render_html, render_pdf
from prescribe.handout.content import short_name
from prescribe.plan_schema import parse_plan
from prescribe.settings import Clinic

DEMO_CLINIC = Clinic("Riverside Bone Health Clinic (demo)", "555-0100")


@lru_cache(maxsize=1)
def whole_catalogue_plan():
    """A two-week plan whose first week uses every catalogue exercise once (an invented person)."""
    data = make_plan(weeks=2)
    everything = [{"exercise_id": ex.exercise_id, "name": ex.name, "category": ex.category, "sets": 1, "reps": 5,
                   "intensity": "RPE 3", "impact_level": ex.impact_level,
                   "peak_grf_bw": ex.peak_grf_bw, "directions": list(ex.directions), "patterns": []}
                  for ex in default_catalogue()]
    data["weeks"][0]["sessions"].append({"day": 7, "kind": "mixed", "exercises": everything, "impacts": 0,
                                         "osteogenic_index": 0.0})
    return parse_plan(data)


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
