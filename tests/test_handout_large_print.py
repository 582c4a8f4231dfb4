"""The large-print edition of the person's pages, and text contrast in both editions.

Font sizes are read from the PDF itself (pypdf's text visitor: the size each run of text
is drawn at); words from pdftotext.  Contrast is computed from the colours the print CSS
uses for text and backgrounds (WCAG 2.1, success criterion 1.4.3 AA: at least 4.5:1).
"""

from __future__ import annotations

import io
import re
import subprocess
from collections import Counter
from functools import lru_cache

import pytest
from pypdf import PdfReader

from handout_fixtures import planner_plan
from prescribe.cautions import PERSON_SHORT_CAUTION
from prescribe.handout import charts, render_html, render_pdf
from prescribe.settings import Clinic

DEMO_CLINIC = Clinic("Riverside Bone Health Clinic (demo)", "555-0100")
#: Body text of the large-print edition: at least 14 pt (issue 19; common practice for
#: large print is 14-18 pt).  A run drawn 0.05 pt under is rounding, not smaller type.
LARGE_MIN_PT = 14.0
WCAG_AA_TEXT = 4.5  # WCAG 2.1 SC 1.4.3 (AA), normal text


@lru_cache(maxsize=None)
def _pdf(large_print: bool, audience: str = "person") -> bytes:
    return render_pdf(planner_plan(26), audience=audience, clinic=DEMO_CLINIC, large_print=large_print)


def _chart_strings() -> set[str]:
    """The text inside the charts' SVG (axis numbers, "hold", "level 2"): figure labels, not body text."""
    plan = planner_plan(26)
    out = set()
    for svg in (charts.impacts_chart_svg(plan), charts.intensity_chart_svg(plan)):
        out |= {t.strip() for t in re.findall(r"<text[^>]*>([^<]*)</text>", svg)}
    return out


def _runs(data: bytes) -> list[tuple[int, float, str]]:
    """(page index, size in pt, text) of every non-blank run of text the PDF draws."""
    out = []
    for index, page in enumerate(PdfReader(io.BytesIO(data)).pages):
        def visit(text, cm, tm, _font, size, index=index):
            if text.strip():
                scale = (tm[2] ** 2 + tm[3] ** 2) ** 0.5 * (cm[2] ** 2 + cm[3] ** 2) ** 0.5
                out.append((index, size * scale, text.strip()))
        page.extract_text(visitor_text=visit)
    return out


def _body_size(runs) -> float:
    """The size most characters are set in."""
    weights = Counter()
    for _, size, text in runs:
        weights[round(size, 1)] += len(text)
    return weights.most_common(1)[0][0]


def test_large_print_sets_every_word_of_the_persons_pages_at_14_pt_or_more():
    # Every run of text: body, tables, guides, page headers and footers, and the charts'
    # axis numbers and labels.
    runs = _runs(_pdf(True))
    assert len(runs) > 300
    chart_text = _chart_strings()
    assert sum(1 for r in runs if r[2] in chart_text) >= 10  # the charts' own text is in
    small = [(page + 1, round(size, 2), text[:40]) for page, size, text in runs if size < LARGE_MIN_PT - 0.05]
    assert not small, f"text under {LARGE_MIN_PT} pt in the large-print edition: {small[:10]}"
    body = _body_size(runs)
    assert body >= 15.0
    headings = [size for _, size, text in runs if text.startswith(("Your exercises", "Week by week", "Safety"))]
    assert headings and min(headings) >= body + 4  # headings clearly larger than the body


def test_the_regular_edition_is_smaller_so_the_measure_can_tell_them_apart():
    runs = _runs(_pdf(False))
    assert _body_size(runs) < LARGE_MIN_PT
    assert any(size < 12 for _, size, _ in runs)


TABLE_HEADINGS = {"When", "What and how many", "Which exercises, on which days"}


def _words(data: bytes) -> Counter:
    """The PDF's words, counted, without the page headers and footers (repeated on every page).

    Line breaks and spacing change when text reflows; the words do not.  A line ending in
    a hyphen ("Heel-" then "to-toe") is joined back.
    """
    text = subprocess.run(["pdftotext", "-enc", "UTF-8", "-", "-"], input=data, capture_output=True,
                          check=True).stdout.decode("utf-8")
    # Table headings repeat on every page a table runs onto: their lines are left out.
    text = "\n".join(line for line in text.splitlines() if line.strip() not in TABLE_HEADINGS)
    text = re.sub(r"-\s*\n\s*", "-", text)
    text = re.sub(r"page \d+ of \d+", " ", text)
    words = Counter(w.replace("-", "") for w in text.split())  # pdftotext drops a line-end hyphen
    pages = len(PdfReader(io.BytesIO(data)).pages)
    for repeated in (PERSON_SHORT_CAUTION, DEMO_CLINIC.name, "Program for " + planner_plan(26).patient_id):
        words.subtract({w.replace("-", ""): n * pages for w, n in Counter(repeated.split()).items()})
    return +words


def test_large_print_has_the_same_content_reflowed_onto_more_pages():
    large, regular = _pdf(True), _pdf(False)
    assert len(PdfReader(io.BytesIO(large)).pages) > len(PdfReader(io.BytesIO(regular)).pages)
    assert _words(large) == _words(regular)
    assert sum(_words(large).values()) > 2000


def test_large_print_leaves_the_clinicians_pages_as_they_are():
    runs = _runs(_pdf(True, "clinician"))
    regular = _runs(_pdf(False, "clinician"))
    assert _body_size(runs) == _body_size(regular) < LARGE_MIN_PT


# --- contrast -------------------------------------------------------------------------

def _luminance(hex_colour: str) -> float:
    """Relative luminance (WCAG 2.1 definition, sRGB)."""
    h = hex_colour.lstrip("#")
    if len(h) == 3:
        h = "".join(c * 2 for c in h)
    channels = [int(h[i:i + 2], 16) / 255 for i in (0, 2, 4)]
    linear = [c / 12.92 if c <= 0.03928 else ((c + 0.055) / 1.055) ** 2.4 for c in channels]
    return 0.2126 * linear[0] + 0.7152 * linear[1] + 0.0722 * linear[2]


def contrast(a: str, b: str) -> float:
    """WCAG 2.1 contrast ratio (L1 + 0.05) / (L2 + 0.05), lighter over darker."""
    la, lb = sorted((_luminance(a), _luminance(b)), reverse=True)
    return (la + 0.05) / (lb + 0.05)


NAMED = {"black": "#000000", "white": "#ffffff"}


def _colours(css: str, prop: str) -> set[str]:
    found = set()
    for value in re.findall(rf"(?<![-\w]){prop}\s*:\s*([^;}}]+)", css):
        for token in re.findall(r"#[0-9a-fA-F]{3,6}\b|\b(?:black|white)\b", value):
            found.add(NAMED.get(token.lower(), token.lower()))
    return found


def test_contrast_ratio_formula_matches_wcag_examples():
    # WCAG 2.1: black on white is 21:1; #777777 on white is about 4.48:1 (just under AA).
    assert contrast("#000", "#fff") == pytest.approx(21.0)
    assert contrast("#777777", "#ffffff") == pytest.approx(4.48, abs=0.01)
    assert contrast("#767676", "#ffffff") >= WCAG_AA_TEXT


@pytest.mark.parametrize("large_print", [False, True], ids=["regular", "large-print"])
def test_text_contrast_is_at_least_4_5_to_1_in_both_editions(large_print):
    html = render_html(planner_plan(26), audience="both", clinic=DEMO_CLINIC, large_print=large_print)
    css = html.split("<style>", 1)[1].split("</style>", 1)[0]
    text = _colours(css, "color") | {"#000000"}  # the default is black
    backgrounds = _colours(css, "background(?:-color)?") | {"#ffffff"}  # the paper
    # Text inside the figures: the SVG's own text colour on its white ground.
    for svg in re.findall(r"<svg.*?</svg>", html, re.S):
        for tag in re.findall(r"<(?:svg|text)\b[^>]*>", svg):
            fill = re.search(r'\bfill="(#[0-9a-fA-F]{3,6}|black|white)"', tag)
            if fill and ("<text" in tag or "font-size" in tag):
                text.add(NAMED.get(fill.group(1).lower(), fill.group(1).lower()))
    assert len(backgrounds) >= 2  # the paper and the table headings' grey, at least
    worst = min((contrast(t, b), t, b) for t in text for b in backgrounds)
    assert worst[0] >= WCAG_AA_TEXT, f"text {worst[1]} on {worst[2]}: {worst[0]:.2f}:1"


def test_large_print_charts_have_no_text_under_14_pt():
    # The charts print the full width of the page: 186 mm of A4 between 12 mm margins for
    # 760 SVG units, so a unit is 186 / 760 mm and 20.5 units about 14.2 pt (1 pt = 25.4/72 mm).
    html = render_html(planner_plan(26), audience="person", clinic=DEMO_CLINIC, large_print=True)
    sizes = [float(v) for svg in re.findall(r'<svg[^>]*class="chart".*?</svg>', html, re.S)
             for v in re.findall(r'font-size="([\d.]+)"', svg)]
    assert len(sizes) >= 3
    unit_pt = 186 / charts.WIDTH * 72 / 25.4
    assert min(sizes) * unit_pt >= LARGE_MIN_PT
    assert "margin: 14mm 12mm 34mm 12mm" in html and ".large-print .person .chart-box svg.chart { height: auto; }" in html
    regular = render_html(planner_plan(26), audience="person", clinic=DEMO_CLINIC)
    assert min(float(v) for v in re.findall(r'<svg[^>]*class="chart"[^>]*font-size="([\d.]+)"', regular)) < 20.5
