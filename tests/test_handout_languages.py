"""The person's pages in the person's language (PRODUCT.md, third stage, "The person's language").

`prescribe handout PLAN.json --language en|es|zh-Hans` writes the person's pages in that
language, dates and numbers in its conventions; the clinician's pages stay in English and say
whether a qualified translator has reviewed that language's text.  A sentence without a
translation fails these tests and is never passed off as translated.

Dates and numbers are checked against the Unicode CLDR conventions as Babel ships them
(Spanish: "2 de marzo de 2026", decimal comma, "80 %"; Chinese: "2026年3月2日").  Plural forms:
Spanish two (n != 1), Chinese one (the usual gettext Plural-Forms of each language, common
practice).  Invented people and an invented clinic.
"""

from __future__ import annotations

import html as html_lib
import re
import subprocess
from pathlib import Path

import pytest
from babel.messages import checkers
from babel.messages.extract import DEFAULT_KEYWORDS, extract_from_dir
from babel.messages.frontend import parse_mapping_cfg
from babel.messages.pofile import read_po

from handout_fixtures import DEMO_RECORD, make_plan, planner_plan, whole_catalogue_plan
from prescribe.errors import InputError
from prescribe.handout import i18n, render_html, render_pdf
from prescribe.handout.render import css_string
from prescribe.planning import PlanOptions, build_plan
from prescribe.plan_schema import parse_plan
from prescribe.records import parse_record
from prescribe.settings import Clinic, translation_review
from test_handout_readable import MAN_78, WOMAN_68

ROOT = Path(__file__).resolve().parents[1]
CLINIC = Clinic("Riverside Bone Health Clinic (demo)", "555-0100")
TRANSLATED = ("es", "zh-Hans")

#: Invented people whose plans reach the planner's cautions and notes and the screening
#: rules' notes for the person: falls risk and a spine-sparing program, a new hip (capped,
#: 70% 1RM at most), a blood thinner and an overdue injection (a draft), a carer-led
#: program, low body mass (held at the starting dose), weak legs and a short tandem stance.
_V2 = {**DEMO_RECORD, "record_version": 2}
PEOPLE = {
    "woman-68": WOMAN_68,
    "man-78-vertebral": MAN_78,
    "rosa-new-hip-blood-thinner": {**_V2, "patient_id": "NTC-0301", "display_name": "Rosa Delgado",
                                   "medications": [{"class": "anticoagulant", "months_on": 12}],
                                   "surgeries": [{"procedure": "hip_replacement", "side": "left", "months_ago": 6,
                                                  "surgeon_cleared_impact": False}]},
    "overdue-injection": {**_V2, "patient_id": "NTC-0302", "display_name": "Wei Lin",
                          "medications": [{"class": "denosumab", "months_on": 24, "months_since_last_dose": 9}]},
    "carer-led": {**_V2, "patient_id": "NTC-0303", "display_name": "Ana", "cognition": "moderate",
                  "tandem_stance_s": 6, "chair_stand_30s": 4, "age_years": 81},
    "alone-underweight-new-knee": {**_V2, "patient_id": "NTC-0304", "lives_alone": True, "falls_past_year": 2,
                                   "body_mass_kg": 44,
                                   "surgeries": [{"procedure": "knee_replacement", "side": "right", "months_ago": 20,
                                                  "surgeon_cleared_impact": True},
                                                 {"procedure": "spinal_fusion", "side": "none", "months_ago": 30}]},
}


def _plan(record: dict, weeks: int = 26, **options):
    return build_plan(parse_record(record), options=PlanOptions(weeks=weeks, **options),
                      created="2026-03-02T09:00:00+00:00")


def _person_section(html: str) -> str:
    """The person's section, from just after its opening tag."""
    return html.split('<section class="person', 1)[1].split(">", 1)[1].split('<section class="clinician', 1)[0]


def _visible(fragment: str) -> str:
    body = re.sub(r"<style.*?</style>", " ", fragment, flags=re.S)
    return " ".join(html_lib.unescape(re.sub(r"<[^>]+>", " ", body)).split())


def _render(plan, language, audience="person"):
    """The HTML and the texts the person's pages could not translate."""
    from prescribe.handout.render import _render_html

    return _render_html(plan, audience, "a4", CLINIC, None, False, language)


@pytest.fixture(scope="module")
def english_sentences() -> list[str]:
    """Every English text of the person's pages with four words or more (the catalogue's msgids,
    placeholders cut out: each fixed stretch of four words or more)."""
    with (ROOT / "prescribe/handout/locale/person.pot").open("rb") as fp:
        template = read_po(fp)
    out = set()
    for message in template:
        ids = message.id if isinstance(message.id, tuple) else (message.id,)
        for msgid in ids:
            for piece in re.split(r"%\(\w+\)s|<[^>]+>|&\w+;", msgid or ""):
                piece = piece.strip(" .,:;()")
                if len(piece.split()) >= 4:
                    out.add(piece)
    assert len(out) > 200
    return sorted(out)


# -- the catalogues ---------------------------------------------------------------------------------

def _extracted() -> set:
    """The texts of the person's pages as `make translations-update` extracts them now (babel.cfg)."""
    with (ROOT / "babel.cfg").open(encoding="utf-8") as fp:
        method_map, options_map = parse_mapping_cfg(fp)
    return {(ctx, msg if isinstance(msg, str) else msg[0])
            for _file, _line, msg, _comments, ctx in
            extract_from_dir(str(ROOT), method_map, options_map, keywords=DEFAULT_KEYWORDS)}


def test_the_template_holds_every_text_of_the_persons_pages_and_each_language_translates_it():
    # A text added to the code, the template or the data files without running
    # `make translations-update` (and translating it) fails here.
    with (ROOT / "prescribe/handout/locale/person.pot").open("rb") as fp:
        template = read_po(fp)
    in_template = {(m.context, m.id if isinstance(m.id, str) else m.id[0]) for m in template if m.id}
    extracted = _extracted()
    assert extracted - in_template == set(), "texts missing from person.pot: run make translations-update"
    assert in_template - extracted == set(), "person.pot holds texts no longer used"
    assert len(extracted) > 350
    for tag in TRANSLATED:
        with i18n.catalogue_path(tag).open("rb") as fp:
            catalogue = read_po(fp)
        messages = {(m.context, m.id if isinstance(m.id, str) else m.id[0]): m for m in catalogue if m.id}
        assert set(messages) == in_template, tag
        for key, message in messages.items():
            strings = message.string if isinstance(message.string, tuple) else (message.string,)
            assert all(s.strip() for s in strings), f"{tag}: no translation for {key}"
            assert not message.fuzzy, f"{tag}: fuzzy translation of {key}"
            # The same placeholders as the English (Babel's python-format checker).
            checkers.python_format(catalogue, message)
        assert catalogue.num_plurals == {"es": 2, "zh-Hans": 1}[tag]


def test_the_catalogues_compile_as_make_compiles_them(tmp_path):
    # `make translations` compiles with pybabel; a checkout without .mo files compiles the .po in
    # memory.  Both give the same messages.
    import gettext
    import io
    import shutil

    pybabel = shutil.which("pybabel") or str(Path(__import__("sys").executable).with_name("pybabel"))
    for tag in TRANSLATED:
        out = tmp_path / f"{tag}.mo"
        subprocess.run([pybabel, "compile", "-D", "person", "-i", str(i18n.catalogue_path(tag)), "-o", str(out)],
                       check=True, capture_output=True)
        made = gettext.GNUTranslations(out.open("rb"))._catalog
        in_memory = gettext.GNUTranslations(io.BytesIO(i18n.compile_po(i18n.catalogue_path(tag))))._catalog
        assert made == in_memory and len(made) > 350


# -- no English left, and none passed off ----------------------------------------------------------

@pytest.mark.parametrize("language", TRANSLATED)
@pytest.mark.parametrize("who", PEOPLE)
def test_no_english_sentence_is_left_on_the_persons_pages(who, language, english_sentences):
    plan = _plan(PEOPLE[who])
    html, missing = _render(plan, language)
    assert missing == []
    text = _visible(_person_section(html))
    assert i18n.Language(language).gettext(i18n.IN_ENGLISH) not in text
    left = [s for s in english_sentences if s in text]
    assert left == [], f"English left on the {language} pages: {left[:5]}"
    names = [CLINIC.name, CLINIC.contact, plan.patient_id, PEOPLE[who].get("display_name") or ""]
    for name in names:
        text = text.replace(name, " ") if name else text
    words = set(re.findall(r"[A-Za-z]+", text.lower()))
    if language == "zh-Hans":
        assert words == set(), f"Latin words on the Chinese pages: {sorted(words)[:20]}"
    else:
        english_only = {"the", "you", "your", "and", "with", "of", "to", "this", "for", "when", "is", "week",
                        "weeks", "each", "same", "above", "landings", "effort", "hold", "review", "stop"}
        assert words & english_only == set()


@pytest.mark.parametrize("language", TRANSLATED)
def test_every_exercise_of_the_catalogue_is_translated(language):
    from prescribe.catalogue import default_catalogue

    # (the fixture's own caution is a hand-written one, not the planner's: left out here)
    html, missing = _render(whole_catalogue_plan().model_copy(update={"cautions": []}), language)
    assert missing == []
    text = _visible(_person_section(html))
    lang = i18n.Language(language)
    for entry in default_catalogue():  # each has its guide: name, how to do it, how it should feel
        for english in (entry.name, entry.instructions, entry.should_feel):
            translated = lang.translate(english)
            assert translated != english and translated in text, english
            assert len(english.split()) < 4 or english not in text
    assert lang.missing == []


@pytest.mark.parametrize("language", TRANSLATED)
def test_the_charts_week_tables_and_drawing_labels_are_translated(language):
    plan = planner_plan(26, WOMAN_68)
    html, missing = _render(plan, language)
    assert missing == []
    person = _person_section(html)
    lang = i18n.Language(language)
    svg_text = " ".join(re.findall(r"<text[^>]*>([^<]*)</text>", person))
    assert lang.gettext("hold") in svg_text and "hold" not in svg_text  # the weak window's label
    assert re.findall(r'<svg[^>]*class="pose"[^>]*><title>([^<]*)</title>', person)
    for label in re.findall(r'<svg[^>]*class="pose"[^>]*><title>([^<]*)</title>', person):
        assert "start and end position" not in label
    assert lang.gettext("Hold: add nothing") in person  # the week table's note
    assert lang.gettext("Start &rarr; End") in person  # the drawings' caption


def test_a_text_without_a_translation_is_printed_in_english_marked_and_listed_for_the_clinician():
    # A clinician's own note has no translation: the person's pages print it in English after
    # the language's mark, and the clinician's page lists it; never silently.
    note = "Keep your shoulders relaxed and your chin level."
    plan = parse_plan(make_plan(weeks=8, note=note, cautions=[]))
    html, missing = _render(plan, "es", audience="both")
    assert missing == [note]
    person, clinician = _person_section(html), html.split('<section class="clinician', 1)[1]
    assert f"(en inglés) {note}" in html_lib.unescape(person)
    assert "Printed in English on the person" in clinician and note in html_lib.unescape(clinician)
    english, missing = _render(plan, "en", audience="both")
    assert missing == [] and "(in English)" not in english and "Printed in English" not in english
    # The PDF: the clinician's part (laid out on its own) is told what the person's part missed.
    text = subprocess.run(["pdftotext", "-", "-"], input=render_pdf(plan, clinic=CLINIC, language="es"),
                          capture_output=True, check=True).stdout.decode("utf-8")
    assert "Printed in English on the person" in text and "(en inglés)" in text


def test_free_text_is_never_half_translated():
    # "Careful: jogging" has the shape of "%(level)s: %(label)s", but such a bare pattern is not
    # used to recognise texts; a sentence made of catalogue words is still not in the catalogue.
    with i18n.using("es") as lang:
        assert lang.translate("Careful: jogging") == "(en inglés) Careful: jogging"
        assert lang.translate("Walking: brisk.") == "(en inglés) Walking: brisk."
        assert lang.translate("Walking") == "Caminar"
    assert lang.missing == ["Careful: jogging", "Walking: brisk."]


def test_figures_in_a_planner_caution_are_carried_into_the_translation():
    es, zh = i18n.Language("es"), i18n.Language("zh-Hans")
    cap = ("No resistance load above 70% 1RM until a clinician records that the reason for this limit has gone "
           "(see the screening flags).")
    assert "70 %" in es.translate(cap) and "70%" in zh.translate(cap) and not es.missing
    stance = ("Tandem stance was held for 6.5 s of 10: balance work starts with feet together and stepping, holds "
              "no longer than the person held, and heel-to-toe or one-leg stance waits for the review (from week 9).")
    assert es.translate(stance).startswith("Aguantó 6,5 de 10 segundos") and "semana 9" in es.translate(stance)
    # A value that is itself a catalogue text is translated too.
    spine = ("Spine-sparing program (a vertebral fracture is on record): keep the spine long and neutral; no loaded or "
             "repeated forward bending or twisting of the spine, and moderate loads only.")
    assert "(hay una fractura de vértebra registrada)" in es.translate(spine)
    assert "（有椎骨骨折记录）" in zh.translate(spine)
    assert not es.missing and not zh.missing


# -- dates, numbers, plural forms -----------------------------------------------------------------------

def test_dates_and_numbers_follow_the_languages_conventions():
    # Unicode CLDR (through Babel): Spanish "2 de marzo de 2026", decimal comma, "80 %";
    # Chinese "2026年3月2日", "80%".
    import datetime as dt

    day = dt.date(2026, 3, 2)
    assert i18n.Language("en").long_date(day) == "2 March 2026"
    assert i18n.Language("es").long_date(day) == "2 de marzo de 2026"
    assert i18n.Language("zh-Hans").long_date(day) == "2026年3月2日"
    assert i18n.Language("es").number(2.5) == "2,5" and i18n.Language("en").number(2.5) == "2.5"
    assert i18n.Language("es").percent(80).replace("\xa0", " ") == "80 %"
    assert i18n.Language("zh-Hans").percent(80) == "80%"
    assert i18n.Language("es").percent(72.5).replace("\xa0", " ") == "72,5 %"  # never rounded away
    plan = planner_plan(8)
    for language, made in (("en", "made on 2 March 2026"), ("es", "hecho el 2 de marzo de 2026"),
                           ("zh-Hans", "制定于2026年3月2日")):
        assert made in _visible(_render(plan, language)[0])


def test_a_working_load_is_printed_with_the_languages_decimal_sign():
    data = make_plan(weeks=8)
    for week in data["weeks"]:
        for session in week["sessions"]:
            for ex in session["exercises"]:
                if ex["exercise_id"] == "goblet_box_squat":
                    ex["load_kg"] = 7.5
    plan = parse_plan(data)
    assert "about 7.5 kg" in _visible(_render(plan, "en")[0])
    assert "unos 7,5 kg" in _visible(_render(plan, "es")[0])
    assert "大约7.5公斤" in _visible(_render(plan, "zh-Hans")[0])


def test_plural_forms():
    # Spanish: one form for 1, another for the rest; Chinese: one form.
    with i18n.using("es"):
        assert i18n.ngettext("%(num)s set", "%(num)s sets", 1) % {"num": 1} == "1 serie"
        assert i18n.ngettext("%(num)s set", "%(num)s sets", 3) % {"num": 3} == "3 series"
    with i18n.using("zh-Hans"):
        assert i18n.ngettext("%(num)s set", "%(num)s sets", 1) % {"num": 1} == "1组"
        assert i18n.ngettext("%(num)s set", "%(num)s sets", 3) % {"num": 3} == "3组"
    one_week = parse_plan(make_plan(weeks=1, step_ups=[]))
    assert "· 1 semana" in _visible(_render(one_week, "es")[0])
    assert "· 26 semanas" in _visible(_render(planner_plan(26), "es")[0])


# -- the person, named; the marks on every page ------------------------------------------------------

@pytest.mark.parametrize("language", ["en", *TRANSLATED])
def test_the_person_is_addressed_by_the_display_name_in_every_language(language):
    plan = _plan(PEOPLE["rosa-new-hip-blood-thinner"])
    html, _ = _render(plan, language)
    person = _person_section(html)
    assert '<strong class="pid">Rosa Delgado</strong>' in person
    assert plan.patient_id not in person  # never the id on the person's pages
    header = i18n.Language(language).gettext("Program for %(name)s") % {"name": "Rosa Delgado"}
    assert str(css_string(header)) in html  # the running header of every page
    assert "Rosa Delgado" in header


@pytest.mark.parametrize("language, paused, draft", [("es", "EN PAUSA", "BORRADOR"), ("zh-Hans", "暂停", "草稿")])
def test_the_pause_and_draft_marks_are_in_the_persons_language(language, paused, draft):
    from test_handout_pause import _paused_plan

    plan = _paused_plan(draft=True)   # a Plan already
    html, missing = _render(plan, language)
    assert missing == []
    marks = _visible(html.split('<section class="person', 1)[0].split("<body", 1)[1])
    assert marks.index(paused) < marks.index(draft)  # PAUSED first, then the DRAFT mark
    assert "PAUSED" not in marks and "DRAFT" not in marks


def test_a_carer_led_program_speaks_to_the_helper_in_the_persons_language():
    plan = _plan(PEOPLE["carer-led"])
    assert plan.screening.carer_led
    assert "para la persona que ayuda a Ana" in _visible(_render(plan, "es")[0])
    assert "给帮助Ana的人" in _visible(_render(plan, "zh-Hans")[0])


# -- the clinician's pages ----------------------------------------------------------------------------

def _clinician_text(plan, language) -> str:
    html, _ = _render(plan, language, audience="both")
    return _visible(html.split('<section class="clinician', 1)[1])


def test_the_clinicians_pages_stay_in_english_and_say_no_translator_has_reviewed_the_text(monkeypatch, tmp_path):
    (tmp_path / "settings.toml").write_text('[clinic]\nname = "Riverside Bone Health Clinic (demo)"\n')
    monkeypatch.setenv("PRESCRIBE_SETTINGS", str(tmp_path / "settings.toml"))
    plan = planner_plan(26)
    text = _clinician_text(plan, "es")
    assert "Person's pages: Spanish (es)." in text
    assert "No qualified translator has reviewed the Spanish text yet." in text
    assert "Clinician page" in text and "Screening" in text and "Evidence" in text
    assert "Semana" not in text and "ejercicio" not in text
    assert "Chinese (Simplified) (zh-Hans)" in _clinician_text(plan, "zh-Hans")
    english = _clinician_text(plan, "en")
    assert "Person's pages: English." in english and "translator" not in english


def test_a_recorded_review_names_the_translator_and_a_later_revision_says_the_text_changed(monkeypatch, tmp_path):
    settings = tmp_path / "settings.toml"
    monkeypatch.setenv("PRESCRIBE_SETTINGS", str(settings))
    revised = i18n.revision_date("es")
    settings.write_text('[translations.es]\nreviewed_by = "M. Ortega, sworn medical translator (invented)"\n'
                        f'reviewed_on = {revised.isoformat()}\n', encoding="utf-8")
    review = translation_review("es")
    assert review.reviewed and review.reviewed_on == revised
    text = _clinician_text(planner_plan(8), "es")
    assert ("A qualified translator has reviewed the Spanish text: M. Ortega, sworn medical translator (invented), "
            f"on {revised.isoformat()}") in text
    assert "has changed since" not in text and "No qualified translator" not in text
    assert "No qualified translator has reviewed the Chinese" in _clinician_text(planner_plan(8), "zh-Hans")
    earlier = revised.replace(year=revised.year - 1)
    settings.write_text('[translations.es]\nreviewed_by = "M. Ortega"\n'
                        f'reviewed_on = "{earlier.isoformat()}"\n', encoding="utf-8")
    text = _clinician_text(planner_plan(8), "es")
    assert f"The translation has changed since (revised on {revised.isoformat()})" in text


@pytest.mark.parametrize("body, field, value", [
    ('[translations.es]\nreviewed_by = "M. Ortega"\n', "[translations.es] reviewed_on", "None"),
    ('[translations.es]\nreviewed_by = "M. Ortega"\nreviewed_on = "last May"\n', "[translations.es] reviewed_on",
     "'last May'"),
    ('[translations.es]\nreviewed_by = "M. Ortega"\nreviewed_on = 2999-01-01\n', "[translations.es] reviewed_on",
     "'2999-01-01'"),
    ('[translations.es]\nreviewed_by = " "\nreviewed_on = 2026-01-01\n', "[translations.es] reviewed_by", "' '"),
    ('[translations.fr]\nreviewed_by = "X"\nreviewed_on = 2026-01-01\n', "[translations] fr", "'fr'"),
    ('[translations.es]\nreviewed_by = "X"\nreviewed_on = 2026-01-01\nsigned = true\n', "[translations.es] signed",
     "True"),
])
def test_a_malformed_review_record_is_refused_naming_the_setting(monkeypatch, tmp_path, body, field, value):
    settings = tmp_path / "settings.toml"
    settings.write_text(body, encoding="utf-8")
    monkeypatch.setenv("PRESCRIBE_SETTINGS", str(settings))
    with pytest.raises(InputError) as err:
        translation_review("es")
    assert f"PRESCRIBE_SETTINGS {field} must be" in str(err.value) and value in str(err.value)


# -- options --------------------------------------------------------------------------------------------

def test_a_bad_language_is_refused_naming_the_field_the_value_and_the_languages(tmp_path):
    plan = planner_plan(8)
    with pytest.raises(InputError, match=r"language must be one of en, es, zh-Hans, not 'fr'"):
        render_html(plan, language="fr", clinic=CLINIC)
    from prescribe.handout import write_handout

    with pytest.raises(InputError, match=r"--language must be one of en, es, zh-Hans, not 'zh'"):
        write_handout(plan, tmp_path / "h.pdf", language="zh", clinic=CLINIC)
    assert not (tmp_path / "h.pdf").exists()


def test_english_is_the_default_and_prints_what_it_printed_before():
    plan = planner_plan(8)
    assert render_html(plan, clinic=CLINIC) == render_html(plan, clinic=CLINIC, language="en")
    person = _visible(_person_section(render_html(plan, clinic=CLINIC)))
    assert "Your exercise plan for strong bones" in person and "(in English)" not in person


# -- the PDF --------------------------------------------------------------------------------------------

def test_the_chinese_pdf_embeds_a_cjk_font_that_has_every_character():
    # Debian's fonts-wqy-microhei (make system-deps): the PDF embeds it, and it holds a glyph for
    # every character of the Chinese catalogue and of the printed pages (no empty boxes).
    from fontTools.ttLib import TTCollection

    data = render_pdf(_plan(PEOPLE["rosa-new-hip-blood-thinner"]), clinic=CLINIC, language="zh-Hans")
    fonts = subprocess.run(["pdffonts", "-"], input=data, capture_output=True).stdout.decode()
    if not fonts:  # pdffonts reads a file, not a pipe, on some versions
        import tempfile
        with tempfile.NamedTemporaryFile(suffix=".pdf") as fp:
            fp.write(data)
            fp.flush()
            fonts = subprocess.run(["pdffonts", fp.name], capture_output=True, check=True).stdout.decode()
    embedded = [line for line in fonts.splitlines() if "WenQuanYi-Micro-Hei" in line]
    assert embedded and all(" yes " in line for line in embedded)
    cmap = TTCollection("/usr/share/fonts/truetype/wqy/wqy-microhei.ttc").fonts[0].getBestCmap()
    with i18n.catalogue_path("zh-Hans").open("rb") as fp:
        catalogue = read_po(fp)
    wanted = set()
    for message in catalogue:
        for string in (message.string if isinstance(message.string, tuple) else (message.string,)):
            wanted |= {ch for ch in re.sub(r"<[^>]+>|&\w+;", "", string or "") if ord(ch) > 0x2E7F}
    printed = subprocess.run(["pdftotext", "-enc", "UTF-8", "-", "-"], input=data, capture_output=True,
                             check=True).stdout.decode("utf-8")
    wanted |= {ch for ch in printed if ord(ch) > 0x2E7F}
    assert len(wanted) > 500
    assert [ch for ch in sorted(wanted) if ord(ch) not in cmap] == []
    assert "您的强健骨骼锻炼计划" in printed and "第1页，共" in printed


def test_the_spanish_pdf_reads_in_spanish_and_the_clinicians_part_in_english():
    data = render_pdf(planner_plan(26, WOMAN_68), clinic=CLINIC, language="es")
    text = subprocess.run(["pdftotext", "-enc", "UTF-8", "-", "-"], input=data, capture_output=True,
                          check=True).stdout.decode("utf-8")
    person, clinician = text.split("Clinician page", 1)
    assert "Su plan de ejercicio para tener huesos fuertes" in person and "página 1 de" in person
    assert "Your exercise plan" not in person and "page 1 of" not in person
    assert "Person's pages: Spanish (es)." in clinician and "page 1 of" in clinician


@pytest.mark.parametrize("paper", ["a4", "letter"])
@pytest.mark.parametrize("language", TRANSLATED)
@pytest.mark.parametrize("who", ["man-78-vertebral", "rosa-new-hip-blood-thinner", "overdue-injection"])
def test_both_charts_share_one_page_in_every_language(who, language, paper):
    # As in English (common practice: a figure and its key are read together, on one page), with
    # the longer Spanish words, a notes box or a two-line DRAFT mark above them.
    lang = i18n.Language(language)
    data = render_pdf(_plan(PEOPLE[who]), audience="person", paper=paper, clinic=CLINIC, language=language)
    pages = subprocess.run(["pdftotext", "-enc", "UTF-8", "-", "-"], input=data, capture_output=True,
                           check=True).stdout.decode("utf-8").split("\f")
    # The charts this program draws (each only where it has data: a level-1 program its minutes).
    from prescribe.handout.charts import person_charts
    english = {"impacts": "Landings (impacts) per session, week by week",
               "minutes": "Minutes of walking in one session, week by week",
               "intensity": "Strength exercise load, week by week"}
    titles = [lang.gettext(english[kind]) for kind, _chart in person_charts(_plan(PEOPLE[who]))]
    assert titles
    where = [[i for i, page in enumerate(pages) if title in page.replace("\n", "")] for title in titles]
    assert len(where[0]) == 1 and all(w == where[0] for w in where), where
