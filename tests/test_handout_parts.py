"""A handout for both audiences is two documents joined: side by side or in turn, the same pages."""

from __future__ import annotations

import io
import os
import subprocess
import threading

import pytest
from pypdf import PdfReader

from handout_fixtures import planner_plan
from prescribe.handout import pdf, render_html, render_pdf
from prescribe.settings import Clinic

DEMO_CLINIC = Clinic("Riverside Bone Health Clinic (demo)", "555-0100")


def _page_texts(data: bytes, tmp_path, name: str) -> list[str]:
    path = tmp_path / name
    path.write_bytes(data)
    out = subprocess.run(["pdftotext", "-layout", "-enc", "UTF-8", str(path), "-"],
                         capture_output=True, text=True, check=True).stdout
    return out.split("\f")[:len(PdfReader(io.BytesIO(data)).pages)]


@pytest.fixture(scope="module")
def plan():
    return planner_plan(26)


def test_side_by_side_and_in_turn_give_the_same_pages(plan, tmp_path, monkeypatch):
    started = []
    real_start = pdf._start_child
    monkeypatch.setattr(pdf, "side_by_side", lambda: True)
    monkeypatch.setattr(pdf, "_start_child", lambda *a: started.append(1) or real_start(*a))
    side = render_pdf(plan, clinic=DEMO_CLINIC)
    assert started == [1]  # the clinician's part was laid out in a child
    in_turn = render_pdf(plan, clinic=DEMO_CLINIC, parallel=False)
    assert len(started) == 1
    assert _page_texts(side, tmp_path, "side.pdf") == _page_texts(in_turn, tmp_path, "turn.pdf")


def test_both_is_the_person_pages_then_the_clinician_pages(plan, tmp_path):
    both = _page_texts(render_pdf(plan, clinic=DEMO_CLINIC), tmp_path, "both.pdf")
    person = _page_texts(render_pdf(plan, audience="person", clinic=DEMO_CLINIC), tmp_path, "p.pdf")
    clinician = _page_texts(render_pdf(plan, audience="clinician", clinic=DEMO_CLINIC), tmp_path, "c.pdf")
    assert both == person + clinician
    assert "Clinician pages: program for" in clinician[0] and not any("Clinician pages" in p for p in person)


def test_a_child_that_dies_is_not_trusted_and_its_part_is_rendered_here(plan, tmp_path, monkeypatch):
    def dies(html, base_url, conn):
        os._exit(3)  # no answer at all

    monkeypatch.setattr(pdf, "_child", dies)
    data = render_pdf(plan, clinic=DEMO_CLINIC, parallel=True)
    expected = render_pdf(plan, clinic=DEMO_CLINIC, parallel=False)
    assert _page_texts(data, tmp_path, "a.pdf") == _page_texts(expected, tmp_path, "b.pdf")


def test_a_child_that_reports_an_error_is_not_trusted(monkeypatch):
    def fails(html, base_url, conn):
        conn.send(("error", "Traceback: invented failure"))
        conn.close()

    monkeypatch.setattr(pdf, "_child", fails)
    htmls = ["<p>first part</p>", "<p>second part</p>"]
    parts = pdf.render_parts(htmls, parallel=True)
    assert [len(PdfReader(io.BytesIO(p)).pages) for p in parts] == [1, 1]
    assert "second part" in PdfReader(io.BytesIO(parts[1])).pages[0].extract_text()


def test_parts_are_not_forked_with_other_threads_running_or_when_switched_off(monkeypatch):
    monkeypatch.setattr(os, "cpu_count", lambda: 4)
    monkeypatch.delenv(pdf.PARALLEL_ENV, raising=False)
    # One thread (as in the command line): side by side. The test runner may run helper
    # threads of its own, so the count is fixed here rather than read.
    with monkeypatch.context() as one_thread:
        one_thread.setattr(threading, "active_count", lambda: 1)
        assert pdf.side_by_side()
    stop = threading.Event()
    worker = threading.Thread(target=stop.wait)
    worker.start()
    try:
        assert not pdf.side_by_side()  # a fork would copy locks the other thread may hold
    finally:
        stop.set()
        worker.join()
    monkeypatch.setenv(pdf.PARALLEL_ENV, "0")
    assert not pdf.side_by_side()
    monkeypatch.setenv(pdf.PARALLEL_ENV, "1")
    monkeypatch.setattr(os, "cpu_count", lambda: 1)
    assert not pdf.side_by_side()  # one processor: nothing to gain


def test_joined_file_keeps_the_title_and_both_parts_outlines(plan):
    data = render_pdf(plan, clinic=DEMO_CLINIC)
    reader = PdfReader(io.BytesIO(data))
    assert reader.metadata.title == f"Exercise program for {plan.patient_id}"
    titles = [item.title for item in reader.outline if not isinstance(item, list)]
    assert "Your bone-strengthening exercise program" in titles and "Clinician page" in titles


def test_html_for_both_audiences_stays_one_page_with_both_parts(plan):
    html = render_html(plan, clinic=DEMO_CLINIC)
    assert html.count("<html") == 1 and "Your goals" in html and "Clinician page" in html


def test_collection_is_paused_while_rendering_and_restored_after():
    import gc

    assert gc.isenabled() and gc.get_freeze_count() == 0
    seen = []
    with pdf.collections_paused():
        seen.append((gc.isenabled(), gc.get_freeze_count() > 0))
    assert seen == [(False, True)]
    assert gc.isenabled() and gc.get_freeze_count() == 0
    gc.disable()
    try:
        with pdf.collections_paused():
            pass
        assert not gc.isenabled()  # the host's choice is kept
    finally:
        gc.enable()
    gc.freeze()
    try:
        frozen = gc.get_freeze_count()
        with pdf.collections_paused():
            pass
        assert gc.get_freeze_count() == frozen  # objects the host froze stay frozen
    finally:
        gc.unfreeze()
    with pytest.raises(RuntimeError):
        with pdf.collections_paused():
            raise RuntimeError("a failed layout")
    assert gc.isenabled() and gc.get_freeze_count() == 0


def test_a_threaded_host_gets_its_pdf_laid_out_in_turn(plan, monkeypatch):
    def no_fork(*args):
        raise AssertionError("forked while another thread was running")

    monkeypatch.setattr(pdf, "_start_child", no_fork)
    stop = threading.Event()
    worker = threading.Thread(target=stop.wait)  # as in a notebook kernel
    worker.start()
    try:
        data = render_pdf(plan, clinic=DEMO_CLINIC)
    finally:
        stop.set()
        worker.join()
    assert data.startswith(b"%PDF") and len(PdfReader(io.BytesIO(data)).pages) >= 6


def test_a_child_that_hangs_is_stopped_and_its_part_rendered_here(monkeypatch):
    import time

    def hangs(html, base_url, conn):
        time.sleep(60)

    monkeypatch.setattr(pdf, "_child", hangs)
    monkeypatch.setattr(pdf, "CHILD_TIMEOUT_S", 0.5)
    started = time.monotonic()
    parts = pdf.render_parts(["<p>first part</p>", "<p>second part</p>"], parallel=True)
    assert time.monotonic() - started < 30
    assert "second part" in PdfReader(io.BytesIO(parts[1])).pages[0].extract_text()
