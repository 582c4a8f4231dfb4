"""The app under load: never a blank page (docs/app.md, "Under load").

Each test starts its own small server with `prescribe app`, so it can set the limits:
a kernel limit reached shows "the clinic's server is busy, retrying" and the page gets in by
itself once a page is closed; a kernel that does not answer in time shows a message with
"Try again", never an empty page; the server log says why in both cases.
"""

from __future__ import annotations

import json
import os
import subprocess
import time
from contextlib import contextmanager
from pathlib import Path

from .conftest import PAGE_TIMEOUT_MS, free_port, prescribe_exe, shot, stop, wait_for_port

#: Opening the app executes this notebook's cells: the slow one never answers in time.
SLOW_NOTEBOOK = {
    "cells": [{"cell_type": "code", "execution_count": None, "id": "slow", "metadata": {}, "outputs": [],
               "source": "import time\ntime.sleep(60)  # a kernel made slow on purpose"}],
    "metadata": {"kernelspec": {"display_name": "Python 3", "language": "python", "name": "python3"}},
    "nbformat": 4, "nbformat_minor": 5}


@contextmanager
def server(tmp_path: Path, *args: str):
    db = tmp_path / "load.db"
    env = {**os.environ, "PRESCRIBE_DB": str(db)}
    subprocess.run([*prescribe_exe(), "db", "init"], env=env, check=True, capture_output=True, timeout=120)
    port = free_port()
    log = tmp_path / "server.log"
    with open(log, "w") as out:
        proc = subprocess.Popen([*prescribe_exe(), "app", "--port", str(port), *args], env=env, stdout=out,
                                stderr=subprocess.STDOUT, start_new_session=True)
    try:
        wait_for_port("127.0.0.1", port, proc)
        yield f"http://127.0.0.1:{port}/", log
    finally:
        stop(proc)


def test_past_the_page_limit_a_page_says_busy_and_gets_in_by_itself(tmp_path, context):
    with server(tmp_path, "--max-pages", "2", "--pool", "1") as (url, log):
        first, second, third = (context.new_page() for _ in range(3))
        for page in (first, second):
            page.goto(url, timeout=PAGE_TIMEOUT_MS)
            page.locator(".pr-intake-submit").wait_for(state="visible", timeout=PAGE_TIMEOUT_MS)
        third.goto(url, timeout=PAGE_TIMEOUT_MS)
        busy = third.locator(".pr-busy")
        busy.wait_for(state="visible", timeout=30_000)
        assert "The clinic's server is busy, retrying" in busy.inner_text()
        assert "Nothing was saved or changed" in busy.inner_text()
        shot(third, "load-busy")
        # A page closed in the browser stops its kernel (Voila's unload beacon); the busy page
        # retries by itself and gets the app.
        first.close(run_before_unload=True)
        third.locator(".pr-intake-submit").wait_for(state="visible", timeout=PAGE_TIMEOUT_MS)
        assert third.locator(".pr-page-notice").is_hidden()
        text = log.read_text()
        assert "the limit is 2: a page is told the server is busy (503)" in text


def test_a_kernel_that_does_not_answer_shows_a_message_and_a_way_to_try_again(tmp_path, context):
    notebook = tmp_path / "slow.ipynb"
    notebook.write_text(json.dumps(SLOW_NOTEBOOK))
    # The served notebook is the checkout's apps/clinic.ipynb; this test serves a slow one by
    # pointing Voila at it through the same command line and template.
    from prescribe.cli import app_cmd

    port = free_port()
    env = app_cmd.voila_environment(str(tmp_path / "slow.db"))
    cmd = app_cmd.voila_command(port, notebook, max_pages=4, pool=0, cell_timeout_s=3)
    assert "--VoilaExecutor.timeout=3" in cmd
    log = tmp_path / "slow.log"
    with open(log, "w") as out:
        proc = subprocess.Popen(cmd, env=env, stdout=out, stderr=subprocess.STDOUT, start_new_session=True)
    try:
        wait_for_port("127.0.0.1", port, proc)
        page = context.new_page()
        started = time.monotonic()
        page.goto(f"http://127.0.0.1:{port}/", timeout=PAGE_TIMEOUT_MS)
        notice = page.locator(".pr-page-notice[data-kind='failed']")
        notice.wait_for(state="visible", timeout=PAGE_TIMEOUT_MS)
        assert time.monotonic() - started < 55  # the timeout, not the 60 s sleep, ended it
        assert "did not finish loading" in notice.inner_text()
        assert page.locator(".pr-page-retry").is_visible()
        shot(page, "load-kernel-timeout")
        assert "timed out" in log.read_text().lower()
    finally:
        stop(proc)
