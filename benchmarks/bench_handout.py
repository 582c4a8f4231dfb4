"""Benchmark: rendering the handout of a 26-week plan, as HTML and as PDF.

In one run this script builds a 26-week plan with the planner for an invented person,
then times (a) ``render_html``; (b) ``render_pdf`` for both audiences as the product
runs it (the person's and the clinician's parts laid out side by side when the
machine has a second processor); (c) the same PDF with the parts rendered one after
the other (``parallel=False``, what a one-processor machine or a notebook kernel
gets); (d) the large-print edition (``large_print=True``: the person's pages in large
print, the clinician's as usual), both audiences; and (e) a baseline: WeasyPrint turning
a trivial one-paragraph HTML page into PDF; (f) the same PDF as (b) with the person's
pages in Spanish and (g) in Simplified Chinese (``language="es"``, ``"zh-Hans"``).  Every
exercise guide carries its drawing.  Runs alternate so machine load hits all of them alike.  It prints best and
median wall times, CPU time (this process plus its children: wall time on a shared
machine includes other processes' work, and the side-by-side PDF spends CPU in a
child), the PDF's page count, the ratio of the handout PDF to the baseline, and the
goals: the PDF in under 1.5 s (issue 6, drawings included since issue 19) and the
large-print PDF in under 2.5 s (issue 19), a Spanish or Chinese PDF within 1.2 x the English
one's time, medians of the same run (issue 30).  Exits 0 either way (a benchmark, not a
test).  Run: ``.venv/bin/python benchmarks/bench_handout.py [--runs 7] [--weeks 26]``.
"""

from __future__ import annotations

import argparse
import io
import os
import statistics
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from prescribe.handout import render_html, render_pdf  # noqa: E402
from prescribe.handout.pdf import side_by_side  # noqa: E402
from prescribe.planning import PlanOptions, build_plan  # noqa: E402
from prescribe.records import parse_record  # noqa: E402
from prescribe.settings import Clinic  # noqa: E402

GOAL_PDF_S = 1.5
GOAL_LARGE_PRINT_S = 2.5
#: Another language's PDF against the English PDF of the same plan, same run (issue 30).
GOAL_LANGUAGE_RATIO = 1.2
LANGUAGES = (("pdf_es", "es", "render_pdf, Spanish"), ("pdf_zh", "zh-Hans", "render_pdf, Chinese"))
CLINIC = Clinic("Riverside Bone Health Clinic (demo)", "555-0100")
#: An invented person; no real record.
RECORD = {"patient_id": "NTC-0042", "age_years": 67, "sex": "female", "body_mass_kg": 61, "height_cm": 162,
          "t_scores": {"lumbar_spine": -2.7, "femoral_neck": -2.2}, "fractures": [], "falls_past_year": 0,
          "timed_up_and_go_s": 9.5, "conditions": [], "pain_score": 1}
TRIVIAL = "<!DOCTYPE html><html><body><p>One paragraph of plain text for the baseline.</p></body></html>"


def _timed(fn):
    before, wall = os.times(), time.perf_counter()
    result = fn()
    wall, after = time.perf_counter() - wall, os.times()
    cpu = sum(getattr(after, f) - getattr(before, f)
              for f in ("user", "system", "children_user", "children_system"))
    return result, wall, cpu


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=7)
    parser.add_argument("--weeks", type=int, default=26)
    args = parser.parse_args()

    from weasyprint import HTML

    plan = build_plan(parse_record(RECORD), options=PlanOptions(weeks=args.weeks),
                      created="2026-03-02T09:00:00+00:00")
    # Warm-up: imports, fonts, template compilation and the catalogue load once per process.
    pdf = render_pdf(plan, clinic=CLINIC)
    HTML(string=TRIVIAL).write_pdf()

    render_pdf(plan, clinic=CLINIC, large_print=True)
    for _key, language, _label in LANGUAGES:  # the catalogue and the language's fonts, once
        render_pdf(plan, clinic=CLINIC, language=language)
    names = ("html", "pdf", "sequential", "large", "baseline", *(key for key, _, _ in LANGUAGES))
    times: dict[str, list[float]] = {name: [] for name in names}
    cpu: dict[str, list[float]] = {name: [] for name in names}
    for _ in range(args.runs):
        for name, fn in (("html", lambda: render_html(plan, clinic=CLINIC)),
                         ("pdf", lambda: render_pdf(plan, clinic=CLINIC)),
                         ("sequential", lambda: render_pdf(plan, clinic=CLINIC, parallel=False)),
                         ("large", lambda: render_pdf(plan, clinic=CLINIC, large_print=True)),
                         ("baseline", lambda: HTML(string=TRIVIAL).write_pdf()),
                         *((key, lambda language=language: render_pdf(plan, clinic=CLINIC, language=language))
                           for key, language, _ in LANGUAGES)):
            _, wall, used = _timed(fn)
            times[name].append(wall)
            cpu[name].append(used)

    from pypdf import PdfReader

    pages = len(PdfReader(io.BytesIO(pdf)).pages)
    print(f"handout of a {args.weeks}-week plan, both audiences, A4 ({pages} pages, {len(pdf) / 1024:.0f} KiB); "
          f"{args.runs} runs each; {os.cpu_count()} processors; parts side by side here: {'yes' if side_by_side() else 'no, in turn'}")
    for name, label in (("html", "render_html"), ("pdf", "render_pdf"),
                        ("sequential", "render_pdf, in turn"), ("large", "large print PDF"),
                        ("baseline", "trivial HTML -> PDF"), *((key, label) for key, _, label in LANGUAGES)):
        print(f"  {label:22s} best {min(times[name]):6.3f} s   median {statistics.median(times[name]):6.3f} s"
              f"   (CPU median {statistics.median(cpu[name]):6.3f} s)")
    large = render_pdf(plan, clinic=CLINIC, large_print=True)
    print(f"  large-print edition: {len(PdfReader(io.BytesIO(large)).pages)} pages")
    pdf_median = statistics.median(times["pdf"])
    ratio = pdf_median / statistics.median(times["baseline"])
    print(f"  handout PDF / baseline (medians): {ratio:.1f} x")
    seq_median = statistics.median(times["sequential"])
    print(f"  parts in turn: median {seq_median:.3f} s "
          f"({'meets' if seq_median < GOAL_PDF_S else 'misses'} the goal on its own)")
    verdict = "meets" if pdf_median < GOAL_PDF_S else "misses"
    print(f"  goal: PDF under {GOAL_PDF_S} s -> median {pdf_median:.3f} s {verdict} it "
          f"(best {min(times['pdf']):.3f} s, CPU median {statistics.median(cpu['pdf']):.3f} s)")
    large_median = statistics.median(times["large"])
    verdict = "meets" if large_median < GOAL_LARGE_PRINT_S else "misses"
    print(f"  goal: large-print PDF under {GOAL_LARGE_PRINT_S} s -> median {large_median:.3f} s {verdict} it "
          f"(best {min(times['large']):.3f} s, CPU median {statistics.median(cpu['large']):.3f} s; "
          f"{large_median / statistics.median(times['baseline']):.1f} x the baseline)")
    for key, language, label in LANGUAGES:
        data = render_pdf(plan, clinic=CLINIC, language=language)
        ratio = statistics.median(times[key]) / pdf_median
        verdict = "meets" if ratio <= GOAL_LANGUAGE_RATIO else "misses"
        print(f"  goal: {label} within {GOAL_LANGUAGE_RATIO} x the English PDF -> {ratio:.2f} x {verdict} it "
              f"(median {statistics.median(times[key]):.3f} s, CPU median {statistics.median(cpu[key]):.3f} s, "
              f"{len(PdfReader(io.BytesIO(data)).pages)} pages; CPU ratio "
              f"{statistics.median(cpu[key]) / statistics.median(cpu['pdf']):.2f} x)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
