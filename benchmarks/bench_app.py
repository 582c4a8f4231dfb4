"""Benchmark: how quickly the clinic app becomes usable and redraws, against bare Voila baselines.

In one run this script serves (a) a bare one-widget Voila page (a button and a label) and
(b) the clinic app, both with the same Voila options, and measures in Debian's chromium:

* page open -> usable: from ``goto`` until the bare button, or the app's "Check and screen"
  button, is visible; and, since the app's engines load in the background after the button
  shows, page open -> first screening on screen (the form filled and submitted at once) (N fresh pages each, alternating so machine load hits both alike, with
  a pause after each page so a closed page's leftover work does not land in the next);
* round trip: a bare button click until its label changes, against a start-level change
  until the program chart is redrawn (N each, on one page).

Goals (issue 7): app open at most 1.3 x the bare page; start-level redraw at most 2 x the
bare round trip.  Prints the medians and the ratios; exits 0 either way (a benchmark,
not a test).  Run: ``.venv/bin/python benchmarks/bench_app.py [--runs 5]``.
"""

from __future__ import annotations

import argparse
import json
import os
import socket
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from playwright.sync_api import sync_playwright

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from prescribe.cli.app_cmd import notebook_path, voila_command, voila_environment  # noqa: E402

CHROMIUM = "/usr/bin/chromium"
ARGS = ["--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage", "--disable-background-networking",
        "--disable-component-update", "--disable-sync", "--no-first-run",
        "--host-resolver-rules=MAP * ~NOTFOUND, EXCLUDE 127.0.0.1"]
GOAL_OPEN, GOAL_ROUND_TRIP = 1.3, 2.0
#: Pause after each page [s], so work a closed page's kernel still does (the app's
#: background loading, culling) does not land in the next measurement of either server.
SETTLE_S = 6.0

BARE_CELL = """import ipywidgets as w
button = w.Button(description="Go")
button.add_class("bench-button")
label = w.Label("0")
label.add_class("bench-label")
def bump(_b):
    label.value = str(int(label.value) + 1)
button.on_click(bump)
w.VBox([button, label])"""

LEVEL_LINE_JS = """() => Array.from(document.querySelectorAll('.pr-chart-level path'))
  .map(p => p.getAttribute('d') || '').join('|')"""


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def serve(notebook: Path, env: dict) -> tuple[subprocess.Popen, str]:
    port = free_port()
    cmd = voila_command(port, notebook)
    # Cull closed pages' kernels quickly so N pages do not pile up (same for both servers).
    cmd = [a for a in cmd if "cull_idle_timeout" not in a and "cull_interval" not in a]
    cmd += ["--MappingKernelManager.cull_idle_timeout=5", "--MappingKernelManager.cull_interval=2"]
    proc = subprocess.Popen(cmd, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                            start_new_session=True)
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        try:
            socket.create_connection(("127.0.0.1", port), timeout=1).close()
            return proc, f"http://127.0.0.1:{port}/"
        except OSError:
            time.sleep(0.2)
    proc.kill()
    raise SystemExit(f"voila did not start for {notebook}")


def guard(context, outside: list) -> None:
    def handler(route):
        url = route.request.url
        if url.startswith(("data:", "blob:")) or url.startswith("http://127.0.0.1"):
            route.continue_()
        else:
            outside.append(url)
            route.abort()
    context.route("**/*", handler)


def open_time(context, url: str, selector: str) -> float:
    page = context.new_page()
    t0 = time.perf_counter()
    page.goto(url, timeout=120_000)
    page.locator(selector).wait_for(state="visible", timeout=120_000)
    elapsed = time.perf_counter() - t0
    page.close()
    time.sleep(SETTLE_S)
    return elapsed


def fill_intake(page) -> None:
    for css, text in (("pr-intake-patient_id", "DEMO-BENCH-1"), ("pr-intake-age_years", "62"),
                      ("pr-intake-body_mass_kg", "64"), ("pr-intake-height_cm", "163"),
                      ("pr-intake-t_scores-femoral_neck", "-2.6")):
        page.locator(f".{css} input").fill(text)
    page.locator(".pr-intake-sex select").select_option(label="female")


def first_screening_time(context, url: str) -> float:
    """From ``goto`` until a first screening is on screen: the button shows early while the
    engines still load in the background, so this is when the app is usable for its job."""
    page = context.new_page()
    t0 = time.perf_counter()
    page.goto(url, timeout=120_000)
    page.locator(".pr-intake-submit").wait_for(state="visible", timeout=120_000)
    fill_intake(page)
    page.locator(".pr-intake-submit").click()
    page.wait_for_function("() => /osteopenia|osteoporosis/i.test("
                           "(document.querySelector('.pr-screening') || {}).innerText || '')", timeout=120_000)
    elapsed = time.perf_counter() - t0
    page.close()
    time.sleep(SETTLE_S)
    return elapsed


def bare_round_trips(context, url: str, n: int) -> list[float]:
    page = context.new_page()
    page.goto(url, timeout=120_000)
    page.locator(".bench-button").wait_for(state="visible", timeout=120_000)
    out = []
    for i in range(n):
        t0 = time.perf_counter()
        page.locator(".bench-button").click()
        page.wait_for_function("(n) => document.querySelector('.bench-label').innerText.trim() === String(n)",
                               arg=i + 1)
        out.append(time.perf_counter() - t0)
    page.close()
    return out


def app_round_trips(context, url: str, n: int) -> list[float]:
    page = context.new_page()
    page.goto(url, timeout=120_000)
    page.locator(".pr-intake-submit").wait_for(state="visible", timeout=120_000)
    fill_intake(page)
    page.locator(".pr-intake-submit").click()
    page.wait_for_function(f"({LEVEL_LINE_JS})().length > 20", timeout=120_000)
    out = []
    labels = ["2 - moderate impact", "1 - low impact"]
    for i in range(n):
        before = page.evaluate(LEVEL_LINE_JS)
        t0 = time.perf_counter()
        page.locator(".pr-option-start_level select").select_option(label=labels[i % 2])
        page.wait_for_function(f"(before) => ({LEVEL_LINE_JS})() !== before", arg=before, timeout=60_000)
        out.append(time.perf_counter() - t0)
    page.close()
    return out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=5, help="fresh pages per server (default 5)")
    parser.add_argument("--clicks", type=int, default=10, help="round trips each (default 10)")
    parser.add_argument("--json", type=Path, help="also write the figures here")
    args = parser.parse_args(argv)
    if not os.path.exists(CHROMIUM):
        raise SystemExit(f"{CHROMIUM} is needed (apt-get install --no-install-recommends chromium)")

    with tempfile.TemporaryDirectory(prefix="bench-app-") as tmp:
        bare_nb = Path(tmp) / "bare.ipynb"
        bare_nb.write_text(json.dumps({
            "cells": [{"cell_type": "code", "execution_count": None, "id": "bare", "metadata": {}, "outputs": [],
                       "source": BARE_CELL}],
            "metadata": {"kernelspec": {"display_name": "Python 3", "language": "python", "name": "python3"}},
            "nbformat": 4, "nbformat_minor": 5}))
        env = voila_environment(str(Path(tmp) / "bench.db"))
        bare_proc, bare_url = serve(bare_nb, env)
        app_proc, app_url = serve(notebook_path(), env)
        outside: list[str] = []
        try:
            with sync_playwright() as p:
                browser = p.chromium.launch(executable_path=CHROMIUM, args=ARGS, headless=True)
                context = browser.new_context()
                guard(context, outside)
                # One warm-up page each (first-ever imports fill the OS file cache).
                open_time(context, bare_url, ".bench-button")
                open_time(context, app_url, ".pr-intake-submit")
                bare_open, app_open = [], []
                for _ in range(args.runs):
                    bare_open.append(open_time(context, bare_url, ".bench-button"))
                    app_open.append(open_time(context, app_url, ".pr-intake-submit"))
                first_screen = [first_screening_time(context, app_url) for _ in range(args.runs)]
                bare_rt = bare_round_trips(context, bare_url, args.clicks)
                app_rt = app_round_trips(context, app_url, args.clicks)
                browser.close()
        finally:
            for proc in (bare_proc, app_proc):
                proc.terminate()
                proc.wait(timeout=20)

    med = statistics.median
    figures = {
        "bare_open_s": med(bare_open), "app_open_s": med(app_open),
        "open_ratio": med(app_open) / med(bare_open), "open_goal": GOAL_OPEN,
        "bare_round_trip_s": med(bare_rt), "app_redraw_s": med(app_rt),
        "round_trip_ratio": med(app_rt) / med(bare_rt), "round_trip_goal": GOAL_ROUND_TRIP,
        "app_first_screening_s": med(first_screen),
        "first_screening_vs_bare_open": med(first_screen) / med(bare_open),
        "runs": args.runs, "clicks": args.clicks, "outside_requests": len(outside),
    }
    print(f"page open -> usable   bare {figures['bare_open_s']:.2f} s   app {figures['app_open_s']:.2f} s   "
          f"ratio {figures['open_ratio']:.2f} (goal <= {GOAL_OPEN}) "
          f"{'MET' if figures['open_ratio'] <= GOAL_OPEN else 'NOT MET'}")
    print(f"page open -> first screening on screen (form filled by script at once): app "
          f"{figures['app_first_screening_s']:.2f} s = {figures['first_screening_vs_bare_open']:.2f} x the bare "
          "page open (no goal: the button shows before the engines finish loading; this is when the "
          "page does its job)")
    print(f"round trip            bare {figures['bare_round_trip_s'] * 1000:.0f} ms   "
          f"app start-level redraw {figures['app_redraw_s'] * 1000:.0f} ms   "
          f"ratio {figures['round_trip_ratio']:.2f} (goal <= {GOAL_ROUND_TRIP}) "
          f"{'MET' if figures['round_trip_ratio'] <= GOAL_ROUND_TRIP else 'NOT MET'}")
    print(f"medians of {args.runs} fresh pages and {args.clicks} round trips each; "
          f"requests off 127.0.0.1: {len(outside)}")
    if args.json:
        args.json.write_text(json.dumps(figures, indent=2))
    return 0


if __name__ == "__main__":
    sys.exit(main())
