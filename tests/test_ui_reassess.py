"""The app's retest panel and the lead's outcomes view without a browser: the form comes from the
retest's own field metadata, Compare stores nothing, Store applies the next block, the charts
show the measures over time, the letter downloads.  Invented people only."""

from __future__ import annotations

import base64
from datetime import date, timedelta

from prescribe.outcomes.retest import RETEST_FIELD_META
from prescribe.store import open_store
from prescribe.ui import ClinicApp, ClinicSession
from session_support import person, plan_dict

PID = "RT-UI-1"


def make_app(db):
    start = date.today() - timedelta(days=7 * 14)
    with open_store(db) as s:
        s.save_patient(person(PID), None, "EP Ui", plan=plan_dict(PID, weeks=26, start=start))
    app = ClinicApp(ClinicSession(store_url=db))
    app.session.load(PID)
    app.refresh()
    app.retest_panel.open()
    return app


def test_the_form_is_the_retests_own_fields(tmp_db):
    app = make_app(tmp_db)
    panel = app.retest_panel
    own = [k for k in RETEST_FIELD_META if k not in ("patient_id", "t_scores", "z_scores")]
    assert [k for k in panel.inputs if "." not in k] == own
    assert panel.inputs["falls_since_last"].description.endswith("*")          # required in the record
    assert "0 to 100" in panel.inputs["chair_stand_30s"].tooltip               # the record's own bound
    assert {"t_scores.femoral_neck", "z_scores.total_hip"} <= set(panel.inputs)


def test_compare_then_store_applies_the_next_block_and_draws_the_charts(tmp_db):
    app = make_app(tmp_db)
    panel = app.retest_panel
    panel.inputs["falls_since_last"].value = "0"
    panel.inputs["timed_up_and_go_s"].value = "6.0"
    panel.inputs["chair_stand_30s"].value = "19"
    panel.compare_button.click()
    assert app.errors.last == "", app.errors.last
    assert "Decision: continue" in panel.view.value and "pr-verdict-improved" in panel.view.value
    with open_store(tmp_db) as s:
        assert s.retests(PID) == [] and s.latest_program_version(PID) == 1     # compare stores nothing
    panel.clinician.value = "EP Ui"
    panel.apply_button.click()
    assert app.errors.last == "", app.errors.last
    assert "next block stored as program version 2" in panel.view.value
    assert app.session.saved_version == 2                                      # the page shows the new block
    assert len(panel.charts.box.children) >= 1
    figures = [f for row in panel.charts.box.children for f in row.children]
    assert {f.title.split(" (")[0] for f in figures} == {"Timed Up and Go", "30-s chair stand"}  # no empty charts
    assert list(figures[0].marks[0].y) == [7.5, 6.0]
    panel.letter_button.click()
    assert app.errors.last == "", app.errors.last
    href = panel.download.value.split('href="data:application/pdf;base64,')[1].split('"')[0]
    assert base64.b64decode(href)[:5] == b"%PDF-"


def test_bad_values_show_in_the_page_and_store_nothing(tmp_db):
    app = make_app(tmp_db)
    panel = app.retest_panel
    panel.inputs["falls_since_last"].value = "0"
    panel.inputs["tandem_stance_s"].value = "14"
    panel.clinician.value = "EP Ui"
    panel.apply_button.click()
    assert "tandem_stance_s must be a number from 0 to 10 (s)" in app.errors.last
    with open_store(tmp_db) as s:
        assert s.retests(PID) == []


def test_the_leads_outcomes_chart_counts_people_by_verdict(tmp_db):
    app = make_app(tmp_db)
    panel = app.retest_panel
    panel.inputs["falls_since_last"].value = "0"
    panel.inputs["timed_up_and_go_s"].value = "9.0"      # 7.5 -> 9.0 s: worse (MDC 1.14 s, Alghadir et al. 2015)
    panel.clinician.value = "EP Ui"
    panel.apply_button.click()
    assert app.errors.last == "", app.errors.last
    app.outcomes_panel.open()
    view = app.outcomes_panel
    assert app.errors.last == "", app.errors.last
    labels = list(view.bars.x)
    i = labels.index("Timed Up and Go")
    assert [list(s)[i] for s in view.bars.y] == [0, 0, 1]
    view.template.value = "standard"
    assert "1 person with a stored retest" in view.table.value
