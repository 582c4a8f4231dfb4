"""The Spanish person's pages read easily, as the English ones read at grade 6.5 (issue 30).

Measured with textstat 0.7.3 in Spanish (``set_lang("es")``: syllables counted with pyphen's
bundled Spanish dictionary, offline), on the same text as the English tests: the prose lines
of the HTML (tests/readability.py) and every printed line of six words or more of the PDF.

* **Szigriszt-Pazos perspicuity** (Szigriszt Pazos F 1993, "Sistemas predictivos de
  legibilidad del mensaje escrito: fórmula de perspicuidad", doctoral thesis, Universidad
  Complutense de Madrid): 206.835 - 62.3 syllables/words - words/sentences.  Its scale calls
  76-85 "fácil" (easy; 86-100 "muy fácil").  The INFLESZ reading of the same score, validated
  on texts for patients (Barrio-Cantalejo IM et al. 2008, An Sist Sanit Navar 31(2):135-152),
  calls 65-80 "bastante fácil" and 80 or more "muy fácil".  Required: at least 76.
* **Fernández Huerta** (Fernández Huerta J 1959, "Medidas sencillas de lecturabilidad",
  Consigna 214:29-32; citation from memory), as textstat computes it (206.84 - 60 syllables/word - 1.02
  words/sentence): 80-90 is "fácil" (easy).  Required: at least 80.

The band edges are those of the two scales as commonly tabulated (from memory, checked
against a published table of both scales).
"""

from __future__ import annotations

import pytest
import textstat

from handout_fixtures import planner_plan, whole_catalogue_plan
from prescribe.handout import render_html, render_pdf
from readability import as_sentences, prose_lines
from test_handout_readable import DEMO_CLINIC, PEOPLE, _pdf_prose

SZIGRISZT_EASY = 76.0  # "fácil" on Szigriszt-Pazos's perspicuity scale (Szigriszt Pazos 1993)
FERNANDEZ_HUERTA_EASY = 80.0  # "fácil" on Fernández Huerta's scale (Fernández Huerta 1959)


@pytest.fixture
def spanish():
    """textstat counting Spanish syllables; English again afterwards (textstat's language is global)."""
    textstat.set_lang("es")
    yield textstat
    textstat.set_lang("en_US")


def _scores(ts, text: str) -> tuple[float, float]:
    return ts.szigriszt_pazos(text), ts.fernandez_huerta(text)


@pytest.mark.parametrize("weeks", [8, 26, 52])
@pytest.mark.parametrize("who", PEOPLE)
def test_the_spanish_persons_pages_read_in_the_easy_band(spanish, who, weeks):
    plan = planner_plan(weeks, PEOPLE[who])
    text = as_sentences(prose_lines(render_html(plan, audience="person", clinic=DEMO_CLINIC, language="es")))
    assert len(text.split()) > 1000  # the whole of the person's pages
    perspicuity, huerta = _scores(spanish, text)
    assert perspicuity >= SZIGRISZT_EASY, f"Szigriszt-Pazos {perspicuity:.1f} below {SZIGRISZT_EASY}"
    assert huerta >= FERNANDEZ_HUERTA_EASY, f"Fernández Huerta {huerta:.1f} below {FERNANDEZ_HUERTA_EASY}"


@pytest.mark.parametrize("who", ["woman-68-osteopenia", "man-78-vertebral-fracture"])
def test_the_printed_spanish_pages_read_in_the_easy_band(spanish, who):
    data = render_pdf(planner_plan(26, PEOPLE[who]), audience="person", clinic=DEMO_CLINIC, language="es")
    text = _pdf_prose(data)
    assert len(text.split()) > 2500
    perspicuity, huerta = _scores(spanish, text)
    assert perspicuity >= SZIGRISZT_EASY and huerta >= FERNANDEZ_HUERTA_EASY, (perspicuity, huerta)


def test_every_exercise_of_the_catalogue_reads_easily_in_spanish(spanish):
    plan = whole_catalogue_plan()
    text = as_sentences(prose_lines(render_html(plan, audience="person", clinic=DEMO_CLINIC, language="es")))
    perspicuity, huerta = _scores(spanish, text)
    assert perspicuity >= SZIGRISZT_EASY and huerta >= FERNANDEZ_HUERTA_EASY, (perspicuity, huerta)


def test_the_spanish_measures_can_tell_hard_text_from_plain(spanish):
    # A clinician's sentence scores below the band, a plain one in it.
    hard = as_sentences(["La prescripción de entrenamiento progresivo de resistencia al ochenta y cinco por ciento "
                         "de la repetición máxima requiere supervisión profesional cualificada, particularmente "
                         "tras fracturas vertebrales osteoporóticas."] * 30)
    plain = as_sentences(["Levante el peso despacio. Pare si le duele. Llame a la clínica si se marea."] * 30)
    assert all(score < band for score, band in zip(_scores(spanish, hard), (SZIGRISZT_EASY, FERNANDEZ_HUERTA_EASY)))
    assert all(score >= band for score, band in zip(_scores(spanish, plain), (SZIGRISZT_EASY, FERNANDEZ_HUERTA_EASY)))

