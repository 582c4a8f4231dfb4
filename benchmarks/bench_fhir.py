"""Benchmark: a bulk FHIR R4 export (NDJSON) of N invented people -> the caseload CSV, against a bare
JSON-lines parse plus a pandas write of the same rows, measured alike in the same run.

- measured: :func:`prescribe.fhir.bulk.bulk_to_caseload` (parse each line, R4 checks, code mapping,
  facts spilled to a temporary SQLite table, people read back in order and assembled, each chunk
  validated a column at a time with the caseload's checks, the caseload CSV written a chunk at a time);
- baseline: ``json.loads`` of every line, the same rows built from the same values in a plain loop
  (no mapping, no checks), ``pandas.DataFrame(rows).to_csv``.

Each side: one warm-up run, then REPEATS timed runs, the two sides taking turns (a change of the
machine's load falls on both); median, min and max shown.  Goal: the measured
path within 3x the baseline.  Peak memory: each side in a fresh interpreter (``resource.getrusage``
maximum resident set size), beside an interpreter that only imports.

Run: ``.venv/bin/python benchmarks/bench_fhir.py [N]`` (default 100,000 people, about 5 lines each).
"""

from __future__ import annotations

import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from datetime import date
from pathlib import Path

REPEATS = 3
AS_OF = date(2026, 12, 5)


def write_export(n: int, path: Path) -> int:
    """An NDJSON export of ``n`` invented people (Patient, weight, height, a DXA hip T-score, and a
    fracture for every fifth person); returns the number of lines."""
    lines = 0
    with open(path, "w", encoding="utf-8") as fh:
        for i in range(n):
            ref = {"reference": f"Patient/p{i}"}
            res = [{"resourceType": "Patient", "id": f"p{i}", "identifier": [{"value": f"INV-{i:06d}"}],
                    "birthDate": f"{1935 + i % 40}-{1 + i % 12:02d}-{1 + i % 28:02d}",
                    "gender": "female" if i % 3 else "male"},
                   {"resourceType": "Observation", "id": f"w{i}", "status": "final", "subject": ref,
                    "code": {"coding": [{"system": "http://loinc.org", "code": "29463-7"}]},
                    "effectiveDateTime": "2026-09-01", "valueQuantity": {"value": 50 + i % 45, "code": "kg"}},
                   {"resourceType": "Observation", "id": f"h{i}", "status": "final", "subject": ref,
                    "code": {"coding": [{"system": "http://loinc.org", "code": "8302-2"}]},
                    "effectiveDateTime": "2026-09-01", "valueQuantity": {"value": 150 + i % 40, "code": "cm"}},
                   {"resourceType": "Observation", "id": f"t{i}", "status": "final", "subject": ref,
                    "code": {"coding": [{"system": "http://loinc.org", "code": "38264-8"}]},
                    "effectiveDateTime": "2026-09-01", "valueQuantity": {"value": round(-3.5 + (i % 40) / 10, 1)}}]
            if i % 5 == 0:
                res.append({"resourceType": "Condition", "id": f"c{i}", "subject": ref,
                            "code": {"coding": [{"system": "http://hl7.org/fhir/sid/icd-10", "code": "S52.5"}]},
                            "onsetDateTime": "2025-06-01",
                            "extension": [{"url": "http://prescribe.invalid/fhir/StructureDefinition/low-trauma",
                                           "valueBoolean": True}]})
            for r in res:
                fh.write(json.dumps(r) + "\n")
                lines += 1
    return lines


def measured(src: Path, out: Path) -> None:
    from prescribe.fhir.bulk import bulk_to_caseload
    summary = bulk_to_caseload(src, out, as_of=AS_OF)
    assert summary.broken_count == 0 and summary.written == summary.people


def baseline(src: Path, out: Path) -> None:
    import pandas as pd
    people: dict[str, dict] = {}
    with open(src, "rb") as fh:
        for line in fh:
            r = json.loads(line)
            if r["resourceType"] == "Patient":
                p = people.setdefault(f"Patient/{r['id']}", {})
                p["patient_id"] = r["identifier"][0]["value"]
                p["sex"] = r["gender"]
                p["age_years"] = AS_OF.year - int(r["birthDate"][:4])
            else:
                p = people.setdefault(r["subject"]["reference"], {})
                if r["resourceType"] == "Observation":
                    p[r["code"]["coding"][0]["code"]] = r["valueQuantity"]["value"]
                else:
                    p["fractures"] = "wrist:18:y"
    pd.DataFrame(list(people.values())).to_csv(out, index=False)


def _time_both(src: Path, out: Path) -> dict[str, list[float]]:
    """Each side warmed up once, then REPEATS timed runs taking turns (baseline, measured, baseline
    ...), so that a change of the machine's load falls on both sides alike."""
    sides = {"baseline": baseline, "measured": measured}
    for name, fn in sides.items():
        fn(src, out.with_name(f"{name}.csv"))  # warm-up
    times: dict[str, list[float]] = {name: [] for name in sides}
    for _ in range(REPEATS):
        for name, fn in sides.items():
            t = time.perf_counter()
            fn(src, out.with_name(f"{name}.csv"))
            times[name].append(time.perf_counter() - t)
    return times


def peak_mb(which: str, src: Path, out: Path) -> float:
    code = ("import resource, sys; sys.path.insert(0, %r)\n"
            "from bench_fhir import measured, baseline\nfrom pathlib import Path\n"
            "%s\nprint(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024)") % (
        str(Path(__file__).parent),
        "" if which == "import" else f"{which}(Path({str(src)!r}), Path({str(out)!r}))")
    if which == "import":
        code = code.replace("from bench_fhir import measured, baseline\n",
                            "import pandas, prescribe.fhir.bulk, prescribe.screening.batch_io\n")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                          env={**os.environ, "PYTHONPATH": os.pathsep.join(sys.path)})
    return float(proc.stdout.strip().splitlines()[-1])


def main() -> None:
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 100_000
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        src = tmp / "export.ndjson"
        lines = write_export(n, src)
        print(f"{n:,} invented people, {lines:,} NDJSON lines, {src.stat().st_size / 1e6:.1f} MB; "
              f"load average {os.getloadavg()[0]:.2f}, {os.cpu_count()} CPUs")
        # Memory first, while this process is small: Linux carries the peak resident size of a
        # process across fork and exec, so a child of a grown parent would report the parent's.
        memory = {which: peak_mb(which, src, tmp / "m.csv") for which in ("import", "baseline", "measured")}
        times = _time_both(src, tmp / "out.csv")
        for key, name in (("baseline", "baseline: json.loads + pandas to_csv"),
                          ("measured", "measured: prescribe fhir import (bulk)")):
            t = times[key]
            print(f"{name:42s} median {statistics.median(t):7.2f} s  (min {min(t):.2f}, max {max(t):.2f}, "
                  f"{REPEATS} runs after 1 warm-up, taking turns)")
        ratio = statistics.median(times["measured"]) / statistics.median(times["baseline"])
        print(f"ratio measured / baseline: {ratio:.2f}x (goal: within 3x) -> {'MET' if ratio <= 3 else 'NOT MET'}; "
              f"load average now {os.getloadavg()[0]:.2f}")
        for which, mb in memory.items():
            print(f"peak resident memory, {which:8s}: {mb:7.0f} MB (fresh interpreter)")


if __name__ == "__main__":
    main()
