"""Benchmark: the clinic lead's tools, each as a ratio to a baseline measured alike in the same run.

1. ``template compare`` over the 20-person reference panel (goal: under 0.5 s) against
   building the same 40 plans in a plain loop (the work it cannot avoid).
2. ``caseload whatif`` on rules alone for N stored people (default 100,000) against the
   batch screen of the same people as a CSV (read the CSV, screen, write the results, as
   ``prescribe screen --batch`` does); goal: within 3x.
3. ``caseload whatif`` with a template change for M stored people (default 10,000; goal
   under 30 s) against building the same plans (before and after, per person) in a plain
   loop; the loop runs on a sample and is scaled.

Each side: one warm-up call, then REPEATS timed calls; medians are compared.  The
people are invented (seeded).  The store is seeded with a bulk insert of validated
records (seeding is not what is measured).

Run: ``.venv/bin/python benchmarks/bench_templates.py [N] [M]``
"""

from __future__ import annotations

import os
import shutil
import statistics
import sys
import tempfile
import time
import tomllib
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_screening import frame_to_record_dicts, invented_caseload  # noqa: E402

from prescribe.screening.batch_io import read_batch_csv, write_results_csv  # noqa: E402
from prescribe.clinic.caseload import whatif, write_caseload_csv  # noqa: E402
from prescribe.planning import PlanOptions, build_plan  # noqa: E402
from prescribe.planning.templates import TEMPLATE_DIR, load_template  # noqa: E402
from prescribe.records import parse_record  # noqa: E402
from prescribe.screening.rules import DEFAULT_RULES_DIR, load_rules  # noqa: E402
from prescribe.screening import screen, screen_batch  # noqa: E402
from prescribe.store import now_utc, open_store  # noqa: E402
from prescribe.store import models as m  # noqa: E402
from prescribe.clinic.template_library import add_document, resolve  # noqa: E402
from prescribe.planning.templates.review import compare_templates, reference_records  # noqa: E402

N = int(sys.argv[1]) if len(sys.argv) > 1 else 100_000
M = int(sys.argv[2]) if len(sys.argv) > 2 else 10_000
REPEATS = 3
LOOP_SAMPLE = 1_000
med = statistics.median


def _timed(fn, repeats: int = REPEATS):
    out = fn()  # warm-up
    walls = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = fn()
        walls.append(time.perf_counter() - t0)
    return walls, out


def _span(xs, k=1.0) -> str:
    return f"median {med(xs) * k:.3f} s (min {min(xs) * k:.3f}, max {max(xs) * k:.3f})"


def _seed(path: Path, n: int, seed: int) -> list[dict]:
    dicts = frame_to_record_dicts(invented_caseload(n, seed))
    # Validated once here, stored as the store stores them (model_dump in JSON mode).
    import json
    at = now_utc()
    rows = [{"patient_id": d["patient_id"], "record_json": json.dumps(parse_record(d).model_dump(mode="json")),
             "created": at, "updated": at} for d in dicts]
    with open_store(str(path)) as store, store.engine.begin() as conn:
        conn.execute(m.people.insert(), rows)
    return dicts


def _draft_rules(folder: Path) -> Path:
    shutil.copytree(DEFAULT_RULES_DIR, folder)
    f = folder / "bone_density.toml"
    f.write_text(f.read_text().replace('{ feature = "lowest_t_score", op = ">", value = -2.5 }',
                                       '{ feature = "lowest_t_score", op = ">", value = -2.0 }', 1))
    return folder


def main() -> int:
    tmp = Path(tempfile.mkdtemp(prefix="bench-templates-"))
    try:
        print(f"load average at start: {os.getloadavg()[0]:.1f}")
        # 1. compare over the panel.
        a, b = load_template("standard"), load_template("gentle")
        body_a = tomllib.loads((TEMPLATE_DIR / "standard.toml").read_text())
        body_b = tomllib.loads((TEMPLATE_DIR / "gentle.toml").read_text())
        panel = reference_records()
        c_wall, _ = _timed(lambda: compare_templates(a, b, body_a, body_b, panel))
        opts = PlanOptions()
        l_wall, _ = _timed(lambda: [build_plan(r, screen(r), opts, template=t) for t in (a, b) for r in panel])
        print(f"1. template compare, 20-person panel: {_span(c_wall)}; goal < 0.5 s: "
              f"{'met' if med(c_wall) < 0.5 else 'NOT met'}")
        print(f"   baseline, the same 40 plans in a loop: {_span(l_wall)}; ratio compare/loop "
              f"{med(c_wall) / med(l_wall):.2f}x")

        # 2. what-if on rules alone vs the batch screen of the same people as CSV.
        db = tmp / "n.db"
        t0 = time.perf_counter()
        _seed(db, N, 20261202)
        print(f"2. seeded {N:,} invented people in {time.perf_counter() - t0:.1f} s (bulk insert; not measured)")
        rules = load_rules(_draft_rules(tmp / "rules"))
        csv_in, csv_out = tmp / "caseload.csv", tmp / "results.csv"
        with open_store(str(db)) as store:
            write_caseload_csv((d for _, d in store.caseload()), csv_in)
            w_wall, result = _timed(lambda: whatif(store, rules=rules))
        s_wall, _ = _timed(lambda: write_results_csv(screen_batch(read_batch_csv(csv_in), rules), csv_out))
        ratio = med(w_wall) / med(s_wall)
        print(f"   caseload whatif --rules, {N:,} stored: {_span(w_wall)}; {len(result.changes):,} people change")
        print(f"   batch screen of the same people as CSV (read, screen, write): {_span(s_wall)}")
        print(f"   ratio whatif/batch screen: {ratio:.2f}x; goal within 3x: {'met' if ratio <= 3 else 'NOT met'}")

        # 3. what-if with a template change vs building the same plans in a loop.
        db2 = tmp / "m.db"
        dicts = _seed(db2, M, 20261203)
        doc = dict(body_a, name="bench_standard")
        doc["impact"] = dict(body_a["impact"], impacts_target_level2=40)
        with open_store(str(db2)) as store:
            add_document(store, doc, "Bench Lead (invented)")
            tv = resolve("bench_standard@1", store, purpose="read")
            t_wall, res = _timed(lambda: whatif(store, template=tv), repeats=1)
        after = tv.template()
        sample = [parse_record(d) for d in dicts[:LOOP_SAMPLE]]
        k = M / len(sample)

        def loop():
            for r in sample:
                s = screen(r)
                before = load_template("post_vertebral_fracture" if any(f.site == "vertebra" for f in r.fractures)
                                       else "standard")
                build_plan(r, s, opts, template=before)
                build_plan(r, s, opts, template=after)
        p_wall, _ = _timed(loop, repeats=1)
        print(f"3. caseload whatif --template, {M:,} stored: {_span(t_wall)}; {len(res.changes):,} people change; "
              f"goal < 30 s: {'met' if med(t_wall) < 30 else 'NOT met'}")
        print(f"   baseline, the same {2 * M:,} plans (before and after) in a loop (measured on "
              f"{len(sample):,} people, scaled x{k:g}): {_span(p_wall, k)}")
        print(f"   ratio whatif/loop: {med(t_wall) / (med(p_wall) * k):.3f}x (the what-if builds one plan per "
              "distinct planning input and reuses it)")
        print(f"load average at end: {os.getloadavg()[0]:.1f}")
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
