"""The worn-sensor section in a real browser: a saved person, a recording uploaded through the
file chooser, the progress bar, the planned-against-delivered charts and the stored summary.

The person and the recording are invented (made here with known impacts).
"""

from __future__ import annotations

from datetime import datetime, timedelta, timezone

import numpy as np
import pytest

from prescribe.sensor.readers import write_csv
from prescribe.store import open_store

from .conftest import axis_ticks, choose, open_app, shot, type_into

pytestmark = pytest.mark.browser

PERSON = "DEMO-E2E-SENSOR"


def _wait_text(page, css: str, needle: str, timeout: int = 60_000) -> str:
    page.wait_for_function(
        "([css, needle]) => { const e = document.querySelector(css); return e && e.innerText.includes(needle); }",
        arg=[css, needle], timeout=timeout)
    return page.locator(css).first.inner_text()


def _recording(path, first_day) -> None:
    import sys
    from pathlib import Path
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    from sensor_signals import recording
    ts, accs = [], []
    for i, n in enumerate((14, 0, 6)):
        start = datetime.combine(first_day + timedelta(days=i), datetime.min.time(),
                                 tzinfo=timezone.utc).timestamp() + 9 * 3600
        # 30 minutes a day at 50 Hz: a file of about 12 MB, over the 10 MiB a websocket message
        # may carry by default, so the app server's upload limit is tested too.
        t, acc = recording(1800, [2.0] * n, [5.0 + k for k in range(n)], rate_hz=50, start_s=start,
                           noise_g=0.02, seed=i)
        ts.append(t)
        accs.append(acc)
    write_csv(path, np.concatenate(ts), np.concatenate(accs))


def test_upload_a_recording_and_see_planned_against_delivered(app_page, app_server, tmp_path):
    page = app_page
    open_app(page, app_server)
    type_into(page, "pr-intake-patient_id", PERSON)
    type_into(page, "pr-intake-age_years", "64")
    choose(page, "pr-intake-sex", "female")
    type_into(page, "pr-intake-body_mass_kg", "66")
    type_into(page, "pr-intake-height_cm", "161")
    type_into(page, "pr-intake-t_scores-femoral_neck", "-2.0")
    page.locator(".pr-intake-submit").click()
    _wait_text(page, ".pr-week-table", "impacts per session")
    type_into(page, "pr-store-clinician", "AB")
    page.locator(".pr-store-save").click()
    _wait_text(page, ".pr-store-status", "Saved")

    today = datetime.now(timezone.utc).date()
    path = tmp_path / "three_days.csv"
    _recording(path, today)
    assert path.stat().st_size > 10 * 1024 * 1024
    # The upload button opens the browser's file chooser (its file input is not in the page).
    with page.expect_file_chooser() as chooser:
        page.locator(".pr-sensor-upload").click()
    chooser.value.set_files(str(path))
    page.wait_for_function("() => document.querySelector('.pr-sensor-upload').innerText.includes('(1)')")
    page.locator(".pr-sensor-count").click()
    page.locator(".pr-sensor-progress").wait_for(state="visible")
    status = _wait_text(page, ".pr-sensor-status", "Counted")
    assert "20 impacts over 3 day(s)" in status and "Stored with the person" in status
    # The two bqplot charts are drawn with one planned and one delivered bar per day / week.
    page.wait_for_function("() => document.querySelectorAll('.pr-sensor-chart-days rect.bar').length >= 6")
    # A count axis reads whole numbers, each once (the week chart's used to read "0 0 0 0 0 1 1 1").
    for chart in (".pr-sensor-chart-weeks", ".pr-sensor-chart-days"):
        ticks = axis_ticks(page, chart, "impacts (2 BW or more)")
        assert ticks and len(ticks) == len(set(ticks)) and all(t.isdigit() for t in ticks), (chart, ticks)
    table = page.locator(".pr-sensor-table").inner_text()
    assert "three_days.csv" in table and "delivered" in table
    # The standard cautions stay in view at the top of the page (the sections add their own).
    assert "does not replace clinical judgment" in page.locator(".pr-cautions-always").inner_text()
    shot(page, "60-sensor-planned-delivered", of=".pr-section-sensor")
    with open_store(str(app_server.db_path)) as store:
        saved = store.sensor_summaries(PERSON)
    assert len(saved) == 1 and saved[0]["summary"]["impacts"] == 20
