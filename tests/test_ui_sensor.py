"""The app's worn-sensor panel without a browser: upload a recording for the open person,
count it, see planned against delivered; errors show in the page and store nothing.

The person and the recordings are invented (recordings made here with known impacts).
"""

from __future__ import annotations

import html
import io
from datetime import date, datetime, timedelta, timezone

import numpy as np

from prescribe.sensor.readers import write_csv
from prescribe.ui import ClinicApp, ClinicSession
from sensor_signals import recording

PERSON = {"patient_id": "DEMO-SENSOR-1", "age_years": "63", "sex": "female", "body_mass_kg": "66",
          "height_cm": "162", "t_scores.femoral_neck": "-2.1"}


def make_app(db):
    app = ClinicApp(ClinicSession(store_url=db))
    for key, value in PERSON.items():
        app.intake.inputs[key].value = value
    app.submit_button.click()
    assert app.errors.last == "", app.errors.last
    app.sensor_panel.open()  # the section is built when opened (a saved program opens it by itself)
    return app


def csv_bytes(first_day: date, counts, peak_g=2.0) -> bytes:
    ts, accs = [], []
    for i, n in enumerate(counts):
        start = (datetime.combine(first_day + timedelta(days=i), datetime.min.time(), tzinfo=timezone.utc)
                 .timestamp() + 10 * 3600)
        t, acc = recording(300, [peak_g] * n, [5.0 + 1.0 * k for k in range(n)], rate_hz=50, start_s=start,
                           noise_g=0.02, seed=i)
        ts.append(t)
        accs.append(acc)
    import tempfile
    from pathlib import Path
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "r.csv"
        write_csv(path, np.concatenate(ts), np.concatenate(accs))
        return path.read_bytes()


def upload(app, name: str, data: bytes) -> None:
    app.sensor_panel.upload.value = ({"name": name, "type": "text/csv", "size": len(data),
                                      "content": memoryview(data),
                                      "last_modified": datetime(2026, 3, 2, tzinfo=timezone.utc)},)


def test_upload_counts_compares_stores_and_draws(tmp_db):
    app = make_app(tmp_db)
    app.clinician.value = "AB"
    app.save_button.click()
    assert app.errors.last == "", app.errors.last
    panel = app.sensor_panel
    saved = app.session.store.program_created("DEMO-SENSOR-1")
    first = datetime.fromisoformat(saved).date()
    upload(app, "week.csv", csv_bytes(first, (12, 0, 4)))
    panel.count_button.click()
    assert app.errors.last == "", app.errors.last
    s = panel.summary
    assert s["impacts"] == 16 and s["stored"] is True
    assert panel.progress.value == 1.0
    # Planned figures come from the saved program: week 1 from its start date (the app's default:
    # today, the day it was saved).
    assert app.session.plan.start_date == first.isoformat()
    plan = app.session.plan.model_dump(mode="json")
    week1 = {x["day"]: x["impacts"] for x in plan["weeks"][0]["sessions"]}
    days = s["plan"]["days"]
    for i, d in enumerate(days):
        weekday = (first + timedelta(days=i)).isoweekday()
        assert d["planned_impacts"] == week1.get(weekday, 0)
    assert [d["delivered_impacts"] for d in days] == [12, 0, 4]
    assert list(panel.day_chart.bars.y[1]) == [12, 0, 4]
    assert list(panel.day_chart.bars.y[0]) == [d["planned_impacts"] for d in days]
    assert list(panel.week_chart.bars.x) == ["week 1"]
    text = html.unescape(panel.table.value)
    assert "week.csv" in text and "no start_date" not in text
    assert app.session.store.sensor_summaries("DEMO-SENSOR-1")[0]["summary"]["impacts"] == 16
    # The clinician's handout page gains the same chart.
    doc = app.session.handout("html", "clinician").decode("utf-8")
    assert "Worn sensor: planned and delivered" in doc and "sensor-chart" in doc
    assert "planned {}, delivered 12".format(days[0]["planned_impacts"]) in doc
    # Opening the person again shows their newest recording.
    app.on_new()
    assert panel.summary is None
    app.load_select.value = "DEMO-SENSOR-1"
    app.load_button.click()
    assert panel.summary is not None and panel.summary["impacts"] == 16


def test_a_bad_file_shows_what_is_wrong_and_stores_nothing(tmp_db):
    app = make_app(tmp_db)
    app.clinician.value = "AB"
    app.save_button.click()
    upload(app, "bad.csv", b"seconds,x_g,y_g,z_g\n0,0,0,1\n")
    app.sensor_panel.count_button.click()
    assert "time_s" in app.errors.last
    assert app.session.store.sensor_summaries("DEMO-SENSOR-1") == []
    assert app.sensor_panel.summary is None


def test_counting_needs_a_person_and_a_file(tmp_db):
    app = ClinicApp(ClinicSession(store_url=tmp_db))
    app.sensor_panel.open()
    app.sensor_panel.count_button.click()
    assert "person" in app.errors.last
    app = make_app(tmp_db)
    app.sensor_panel.count_button.click()
    assert "Choose file" in app.errors.last


def test_an_unsaved_person_can_be_counted_without_storing(tmp_db):
    app = make_app(tmp_db)
    app.sensor_panel.keep.value = False
    upload(app, "r.csv", csv_bytes(date(2026, 3, 2), (3,)))
    app.sensor_panel.count_button.click()
    assert app.errors.last == "", app.errors.last
    assert app.sensor_panel.summary["stored"] is False and app.sensor_panel.summary["impacts"] == 3


def test_a_count_axis_reads_whole_numbers_once_however_small_the_counts():
    # A week chart of 0 planned and 1 delivered impact used to read "0 0 0 0 0 1 1 1" (a
    # fractional scale printed as whole numbers): its ticks are now whole numbers, each once.
    from prescribe.ui.sensor_view import PlannedDeliveredChart
    chart = PlannedDeliveredChart("Impacts per program week", "pr-test-chart")
    for planned, delivered in (([0.0], [1.0]), ([0.0, 0.0], [0.0, 0.0]), ([3.0, 40.0], [7.0, 12.0])):
        chart.update([f"week {i + 1}" for i in range(len(planned))], planned, delivered)
        ticks = [int(t) for t in chart.y_axis.tick_values]
        assert ticks == sorted(set(ticks)) and ticks[0] == 0 and ticks[-1] >= max(planned + delivered)
        assert chart.y.max >= ticks[-1]
