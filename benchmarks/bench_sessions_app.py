"""Benchmark: in the app, logging a session until its advice is on screen, against a bare
widget round trip.

In one run this script serves a bare one-widget Voila page (a button and a label, the same
as benchmarks/bench_app.py) and the clinic app over a store holding an invented person
with a saved program and a year of sessions, both with the same Voila options, and
measures in Debian's chromium:

* bare: a button click until its label changes;
* app: "Log session and advise" clicked (the form already filled) until the advice of
  that session is on screen (the session stored durably, the rules run on a year of
  sessions, the adjusted program composed, the charts redrawn).

Goal (issue 13): the app at most 2 x the bare round trip.  Prints the medians and the
ratio; exits 0 either way (a benchmark, not a test).  Each logged session is stored,
so the store grows by one session a click (as in real use).
Run: ``.venv/bin/python benchmarks/bench_sessions_app.py [--clicks 10]``.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import sys
import tempfile
import time
from datetime import date, timedelta
from pathlib import Path

from playwright.sync_api import sync_playwright

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))
sys.path.insert(0, str(ROOT / "benchmarks"))

from bench_app import ARGS, BARE_CELL, CHROMIUM, bare_round_trips, guard, serve  # noqa: E402
from prescribe.cli.app_cmd import notebook_path, voila_environment  # noqa: E402
from prescribe.sessions.records import parse_session  # noqa: E402
from prescribe.store import open_store  # noqa: E402
from session_support import person, plan_dict  # noqa: E402

GOAL = 2.0
PID = "BENCH-LIVE-1"


def seed(db: str) -> None:
    start = date.today() - timedelta(days=7 * 51)
    with open_store(db) as store:
        store.save_patient(person(PID), None, "EP Bench", plan=plan_dict(PID, weeks=52, start=start))
        for week in range(1, 52):
            for offset in (0, 1, 2, 4):
                day = start + timedelta(days=7 * (week - 1) + offset)
                if day <= date.today():
                    store.add_session(parse_session({
                        "patient_id": PID, "session_date": day.isoformat(), "pain_during": 1, "session_rpe": 6,
                        "exercises": [{"exercise_id": "brisk_walking", "minutes_done": 20}]}), "EP Bench")


def app_log_round_trips(context, url: str, n: int) -> list[float]:
    page = context.new_page()
    page.goto(url, timeout=120_000)
    page.locator(".pr-load-select select").wait_for(state="visible", timeout=120_000)
    page.wait_for_function(f"() => Array.from(document.querySelectorAll('.pr-load-select option'))"
                           f".some(o => o.textContent.includes('{PID}'))", timeout=120_000)
    page.locator(".pr-load-select select").select_option(PID)
    page.locator(".pr-load-button").click()
    page.locator(".pr-live-row").first.wait_for(state="visible", timeout=120_000)
    box = page.locator(".pr-live-clinician input")
    box.fill("EP Bench")
    box.press("Tab")
    out = []
    for i in range(n):
        t0 = time.perf_counter()
        page.locator(".pr-live-log").click()
        page.wait_for_function("(n) => ((document.querySelector('.pr-live-log-status') || {}).innerText || '')"
                               ".includes('Session ' + n + ' logged') && "
                               "((document.querySelector('.pr-live-advice') || {}).innerText || '')"
                               ".includes('Next step for week')", arg=_first_id + i, timeout=60_000)
        out.append(time.perf_counter() - t0)
    page.close()
    return out


_first_id = 0


def main(argv: list[str] | None = None) -> int:
    global _first_id
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--clicks", type=int, default=10, help="round trips each (default 10)")
    args = parser.parse_args(argv)
    if not os.path.exists(CHROMIUM):
        raise SystemExit(f"{CHROMIUM} is needed (apt-get install --no-install-recommends chromium)")
    with tempfile.TemporaryDirectory(prefix="bench-live-") as tmp:
        db = str(Path(tmp) / "bench.db")
        seed(db)
        with open_store(db) as store:
            _first_id = len(store.sessions(PID)) + 1
        bare_nb = Path(tmp) / "bare.ipynb"
        bare_nb.write_text(json.dumps({
            "cells": [{"cell_type": "code", "execution_count": None, "id": "bare", "metadata": {}, "outputs": [],
                       "source": BARE_CELL}],
            "metadata": {"kernelspec": {"display_name": "Python 3", "language": "python", "name": "python3"}},
            "nbformat": 4, "nbformat_minor": 5}))
        env = voila_environment(db)
        bare_proc, bare_url = serve(bare_nb, env)
        app_proc, app_url = serve(notebook_path(), env)
        outside: list[str] = []
        try:
            with sync_playwright() as p:
                browser = p.chromium.launch(executable_path=CHROMIUM, args=ARGS, headless=True)
                context = browser.new_context()
                guard(context, outside)
                bare = bare_round_trips(context, bare_url, args.clicks)
                app = app_log_round_trips(context, app_url, args.clicks)
                browser.close()
        finally:
            for proc in (bare_proc, app_proc):
                proc.terminate()
                proc.wait(timeout=20)
    b, a = statistics.median(bare), statistics.median(app)
    print(f"bare widget round trip            {b * 1000:6.0f} ms")
    print(f"log a session -> advice on screen {a * 1000:6.0f} ms   (a year of sessions in the store)")
    print(f"ratio {a / b:.2f} (goal <= {GOAL}) {'MET' if a / b <= GOAL else 'NOT MET'}; medians of {args.clicks} "
          f"clicks each; requests off 127.0.0.1: {len(outside)}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
