"""``prescribe screen``: screen one person (JSON record) or a caseload (CSV)."""

from __future__ import annotations

import os
import sys
from collections import Counter
from contextlib import contextmanager
from pathlib import Path

from ..cautions import with_standard
from ..errors import InputError
from ..records import load_record
from .output import emit_json, emit_table

_CATEGORIES = ("normal", "osteopenia", "osteoporosis", "severe_osteoporosis", "unknown")


def register(sub) -> None:
    p = sub.add_parser(
        "screen", help="screen a patient record (or a caseload CSV) against the rule library",
        description="Screen a patient record against the rule library and print the result as JSON. "
                    "With --batch, screen every row of a caseload CSV and write one result row a person. "
                    "Decision support only: a licensed clinician reviews every result.")
    p.add_argument("patient", nargs="?", metavar="PATIENT.json", help="the patient record (JSON)")
    p.add_argument("--table", action="store_true", help="print a readable table of the flags instead of JSON")
    p.add_argument("--batch", metavar="IN.csv", help="caseload CSV, one person a row (see docs/rules.md)")
    p.add_argument("--out", metavar="OUT.csv", help="where --batch writes the results CSV")
    p.add_argument("--rules", metavar="DIR", help="screen with the rule files in DIR instead of the shipped "
                                                  "library (for example a draft, to see how a change re-screens "
                                                  "a caseload)")
    p.set_defaults(func=run)


def run(args) -> int:
    if args.batch:
        if args.patient:
            raise InputError.single("PATIENT.json", args.patient, "no patient file together with --batch")
        if not args.out:
            raise InputError.single("--out", None, "a path for the results CSV (required with --batch)")
        _refuse_same_file(args.batch, args.out)
        return _run_batch(args.batch, args.out, _rules(args), args.table)
    if args.out:
        raise InputError.single("--out", args.out, "used only together with --batch")
    if not args.patient:
        raise InputError.single("PATIENT.json", None, "a patient record file, or --batch IN.csv --out OUT.csv")
    from ..screening import screen

    record = load_record(args.patient)
    result = screen(record, _rules(args))
    if args.table:
        _print_table(result)
    else:
        emit_json(result)
    return 0


def _refuse_same_file(in_path: str, out_path: str) -> None:
    """Refuse an --out that names the input caseload, by any path (a link, ``./X``, ``dir/../X``).

    Writing the results over the caseload would destroy the only copy of the people's records.
    """
    src, dst = Path(in_path), Path(out_path)
    same = src.resolve() == dst.resolve()
    if not same and src.exists() and dst.exists():
        try:
            same = os.path.samefile(src, dst)
        except OSError:
            same = False
    if same:
        raise InputError.single("--out", out_path, f"a file other than the input caseload {in_path} "
                                "(the results would overwrite the records)")


def _rules(args):
    """The rule set named by --rules (validated; RuleFileError names file, rule and problem), or None."""
    if not args.rules:
        return None
    from ..errors import RuleFileError
    from ..screening.rules import load_rules

    try:
        return load_rules(args.rules)
    except RuleFileError as exc:
        # Rule files named on the command line are input: exit 2, naming the option and the problem.
        raise InputError.single("--rules", args.rules, f"a folder of valid rule files ({exc})") from exc


def _print_table(result) -> None:
    out = sys.stdout
    out.write(f"Patient {result.patient_id}  (rule set {result.ruleset_version})\n")
    lowest = "not measured" if result.lowest_t_score is None else \
        f"{result.lowest_t_score:g} at {result.lowest_t_score_site.replace('_', ' ')}"
    out.write(f"Bone density: {result.bone_density_category.replace('_', ' ')}  (lowest T-score: {lowest})\n")
    out.write(f"Highest impact level allowed: {result.max_impact_level}\n")
    out.write(f"Falls risk: {'yes' if result.falls_risk else 'no'}   "
              f"Balance first: {'yes' if result.balance_first else 'no'}   "
              f"Supervision: {'yes' if result.supervision else 'no'}   "
              f"Clearance/referral before loading: {'YES' if result.refer else 'no'}\n")
    out.write(f"Avoid: {', '.join(result.avoid) if result.avoid else 'nothing listed'}\n\n")
    if result.flags:
        emit_table([{"severity": f.severity, "rule": f.rule, "cap": f.max_impact_level, "title": f.title}
                    for f in result.flags], ["severity", "rule", "cap", "title"], out)
        out.write("\n")
        for f in result.flags:
            out.write(f"- {f.rule}: {f.message}\n  Source: {f.source}\n")
    else:
        out.write("No rule fired.\n")
    out.write("\nCautions:\n")
    for c in result.cautions:
        out.write(f"- {c}\n")


def _run_batch(in_path: str, out_path: str, rules=None, table: bool = False) -> int:
    """Screen the caseload a chunk at a time: read and validate a chunk, screen it, append its
    results to a temporary file that replaces OUT.csv only when the whole caseload was valid."""
    from ..screening.batch_io import ResultsWriter, iter_batch_csv
    from ..screening import RESULT_COLUMNS, engine_for

    engine = engine_for(rules)
    counts: Counter = Counter()
    levels: Counter = Counter()
    refer = falls = 0
    shown = []
    bar = _ProgressBar(sys.stderr) if sys.stderr.isatty() else None
    chunks = iter_batch_csv(in_path, progress=bar.update if bar else None)
    try:
        out = ResultsWriter(out_path, RESULT_COLUMNS)
    except InputError:
        with _finished_line(bar):
            for _ in chunks:                         # the caseload's own problems are reported first
                pass
        raise
    with out, _finished_line(bar):
        for chunk in chunks:
            results = engine.screen_frame(chunk.frame, chunk.fractures)
            out.write(results)                       # to the temporary file: whole file or nothing
            counts.update(results["bone_density_category"].tolist())
            levels.update(results["max_impact_level"].tolist())
            refer += int(results["refer"].sum())
            falls += int(results["falls_risk"].sum())
            if table:
                shown.append(results[["patient_id", "bone_density_category", "max_impact_level", "refer",
                                      "falls_risk", "flags"]])
    if bar:
        bar.done(out.rows)
    if table:
        rows = [r for part in shown for r in part.itertuples()]
        emit_table([{"patient_id": r.patient_id, "category": r.bone_density_category,
                     "max_level": r.max_impact_level, "refer": "YES" if r.refer else "no",
                     "falls_risk": "yes" if r.falls_risk else "no", "flags": r.flags.replace(";", ", ")}
                    for r in rows],
                   ["patient_id", "category", "max_level", "refer", "falls_risk", "flags"])
        sys.stdout.write(f"\n{out.rows} patients written to {out_path}\nCautions:\n")
        for c in with_standard():
            sys.stdout.write(f"- {c}\n")
        return 0
    emit_json({
        "input": in_path,
        "output": out_path,
        "patients": out.rows,
        "ruleset_version": engine.version,
        "by_category": {c: int(counts.get(c, 0)) for c in _CATEGORIES},
        "refer": refer,
        "falls_risk": falls,
        "by_max_impact_level": {str(k): int(levels.get(k, 0)) for k in range(4)},
        "cautions": with_standard(),
    })
    return 0


class _ProgressBar:
    """A one-line progress bar on a terminal (stderr), redrawn after each chunk."""

    WIDTH = 30

    def __init__(self, stream):
        self.stream = stream
        self.open = False                            # a bar is drawn and its line not ended

    def update(self, done_bytes: int, total_bytes: int) -> None:
        share = min(1.0, done_bytes / total_bytes) if total_bytes else 1.0
        filled = int(share * self.WIDTH)
        self.stream.write(f"\rscreening [{'#' * filled}{'.' * (self.WIDTH - filled)}] {share:4.0%}")
        self.stream.flush()
        self.open = True

    def done(self, rows: int) -> None:
        self.stream.write(f"\rscreening [{'#' * self.WIDTH}] {rows:,} people\n")
        self.stream.flush()
        self.open = False


@contextmanager
def _finished_line(bar: "_ProgressBar | None"):
    """On an error, end the progress bar's line so that the message starts on a line of its own."""
    try:
        yield
    except BaseException:
        if bar is not None and bar.open:
            bar.stream.write("\n")
            bar.open = False
        raise
