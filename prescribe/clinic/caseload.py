"""The stored caseload as a batch file, and what a rule or template change would do to it.

- :func:`record_row` / :func:`write_caseload_csv`: the store's people as the batch CSV
  that ``prescribe screen --batch`` reads (``docs/rules.md``), version-2 fields included; the
  name each person's handout uses only when asked (``--with-display-name``).
- :func:`whatif`: re-screen everyone under a draft rule library and/or re-plan them
  under a template, and list only the people whose screening or program would change,
  with the before and after of each changed field.  The rule-set version, the template
  name and version and the time stamps are what a change is made *with*, so they are
  never a change by themselves.

"Before" is today's shipped rule library and, for programs, the template each person's
latest stored program was built from (the default choice when none is recorded or it
is no longer in the store); "after" is the draft.  Both sides are computed now, from
the same stored records, so a difference is the draft's doing and nothing else's.

Decision support only: a what-if lists candidates for review; every change to a
person's program is a clinician's decision.
"""

from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Iterable

import numpy as np
import pandas as pd

from ..screening.batch_io import _atomic_write, _fmt, dict_to_row, dicts_to_frame, spreadsheet_text, write_dicts_csv
from ..cautions import with_standard

#: Screening fields a what-if compares (list fields as sorted lists); ``flags`` are rule ids.
SCREENING_FIELDS = ("bone_density_category", "falls_risk", "max_impact_level", "avoid", "refer",
                    "balance_first", "supervision", "flags", "max_pct_1rm", "carer_led", "hold_volume")
#: Program fields a what-if compares (see :func:`prescribe.planning.templates.review.plan_figures`).
PROGRAM_FIELDS = ("top_impact_level", "weeks_to_full_volume", "peak_impacts", "peak_intensity_pct_1rm",
                  "total_osteogenic_index", "spine_sparing", "refusals")

Progress = Callable[[int, int], None]


# =========================================================================================
# Records as batch rows and frames (from the stored, already validated dicts)
# =========================================================================================

def record_row(d: dict) -> dict[str, str]:
    """One batch-CSV row for a stored record dict (the cells of :func:`batch_io.record_to_row`)."""
    return dict_to_row(d)


def write_caseload_csv(dicts: Iterable[dict], path: str | Path, *, with_display_name: bool = False) -> int:
    """Write stored records as a batch CSV (whole file or nothing); returns the number of rows.

    The name each person's handout uses (``display_name``) is left out unless ``with_display_name``.
    """
    return write_dicts_csv(dicts, path, with_display_name=with_display_name)


def frame_from_dicts(dicts: list[dict]) -> pd.DataFrame:
    """The batch frame (:func:`batch_io.records_to_frame`'s columns and types) from stored record dicts."""
    return dicts_to_frame(dicts)


# =========================================================================================
# What-if
# =========================================================================================

@dataclass
class WhatIf:
    """The people a draft would change: ``changes`` is ``[{patient_id, changes: [{field, before, after}]}]``."""

    people_checked: int
    changes: list[dict]
    rules: str | None
    template: str | None
    before_ruleset_version: str
    after_ruleset_version: str
    notes: list[str] = field(default_factory=list)

    def as_dict(self) -> dict:
        return {"people_checked": self.people_checked, "people_changed": len(self.changes),
                "rules": self.rules, "template": self.template,
                "ruleset_version": {"before": self.before_ruleset_version, "after": self.after_ruleset_version},
                "changes": self.changes, "notes": self.notes,
                "cautions": with_standard(["A what-if lists people whose screening or program would change under "
                                           "a draft; each change to a person's program is a clinician's decision."])}

    def rows(self) -> list[dict]:
        """One row a changed field: patient_id, field, before, after (the ``--out`` CSV)."""
        return [{"patient_id": p["patient_id"], "field": c["field"], "before": _cell(c["before"]),
                 "after": _cell(c["after"])} for p in self.changes for c in p["changes"]]


def _cell(v: Any) -> str:
    if isinstance(v, list):
        return ";".join(str(x) for x in v)
    return _fmt(v)


def _screen_lists(frame: pd.DataFrame) -> dict[str, np.ndarray]:
    """The compared screening fields of a results frame as arrays (lists as ';'-joined sorted text)."""
    out = {}
    for f in SCREENING_FIELDS:
        col = frame[f].to_numpy()
        if f == "max_pct_1rm":                # NaN: no cap (None, as the per-record result says)
            col = np.array([None if np.isnan(v) else int(v) for v in col.tolist()], dtype=object)
        if f in ("avoid", "flags"):
            col = np.array([";".join(sorted(x for x in str(v).split(";") if x)) if isinstance(v, str) else ""
                            for v in col], dtype=object)
        out[f] = col
    return out


def _diff_screenings(before: pd.DataFrame, after: pd.DataFrame) -> dict[str, list[dict]]:
    """Per person, the screening fields that differ (vectorised over the caseload)."""
    b, a = _screen_lists(before), _screen_lists(after)
    ids = before["patient_id"].to_numpy()
    changed: dict[str, list[dict]] = {}
    for f in SCREENING_FIELDS:
        bf, af = b[f], a[f]
        mask = bf != af
        for i in np.flatnonzero(mask):
            bv, av = bf[i], af[i]
            if f in ("avoid", "flags"):
                bv, av = [x for x in bv.split(";") if x], [x for x in av.split(";") if x]
            else:
                bv, av = _plain(bv), _plain(av)
            changed.setdefault(str(ids[i]), []).append({"field": f"screening.{f}", "before": bv, "after": av})
    return changed


def _plain(v: Any) -> Any:
    if isinstance(v, np.generic):
        return v.item()
    return v


def plan_key(record, screening) -> tuple:
    """Everything of a person that a program's compared figures depend on (besides the id):
    two people with the same key get the same figures under the same template and options.

    The planner reads the screening's category, impact cap, avoid list, falls-risk,
    balance-first, referral and supervision marks (and its cautions, which are text and
    change no figure), and from the record whether there is a vertebral fracture, whether
    there are two or more low-trauma fractures, and marked thoracic kyphosis
    (``prescribe/planning/``); the safety check reads the same screening marks
    (``prescribe/safety/``); version 2 adds the heaviest load, carer-led sessions and
    the held volume from the screening, and from the record the frailty the planner reads (the
    chair stand) and the tandem stance held.  A test checks that cached and uncached what-ifs agree.
    """
    from ..planning.selection import _frail

    s = screening
    return (s.bone_density_category, s.max_impact_level, tuple(sorted(s.avoid)), bool(s.falls_risk),
            bool(s.balance_first), bool(s.refer), bool(s.supervision),
            # The version-2 limits the planner reads (heaviest load, carer-led, volume held), whether
            # it takes the person for frail, and the tandem stance held (balance starts within it).
            s.max_pct_1rm, bool(s.carer_led), bool(s.hold_volume), _frail(record, s), record.tandem_stance_s,
            any(f.site == "vertebra" for f in record.fractures),
            sum(1 for f in record.fractures if f.low_trauma) >= 2,
            "thoracic_kyphosis" in record.conditions)


def _program_figures(record, screening, tpl, catalogue, cache: dict | None) -> dict:
    from ..errors import PlanRequestRefused, PrescribeError
    from ..planning import PlanOptions, build_plan
    from ..planning.templates.review import plan_figures, safety_violations

    key = None
    if cache is not None:
        key = (tpl.name, tpl.version, tpl.origin, plan_key(record, screening))
        got = cache.get(key)
        if got is not None:
            return got
    try:
        plan = build_plan(record, screening, PlanOptions(), catalogue, created="2026-01-05T09:00:00+00:00",
                          template=tpl)
    except PlanRequestRefused as exc:
        figures = {k: None for k in PROGRAM_FIELDS}
        figures["refusals"] = [f"{exc.rule}: {exc.reason}"]
    except PrescribeError as exc:
        figures = {k: None for k in PROGRAM_FIELDS}
        figures["refusals"] = [f"planner: {exc}"]
    else:
        figures = plan_figures(plan, tpl)
        figures["spine_sparing"] = bool(plan.spine_sparing)
        figures["refusals"] = sorted(f"{v['rule']} week {v['week']}" for v in safety_violations(plan, screening))
        figures = {k: figures.get(k) for k in PROGRAM_FIELDS}
    if cache is not None:
        cache[key] = figures
    return figures


def whatif(store, *, rules=None, rules_label: str | None = None, template=None, template_label: str | None = None,
           progress: Progress | None = None, use_cache: bool = True) -> WhatIf:
    """Who in the store would change under a draft rule library (``rules``, a RuleSet)
    and/or a template (``template``, a :class:`~prescribe.clinic.template_library.TemplateVersion`).

    Returns a :class:`WhatIf` listing only the people with at least one changed field.
    ``progress(done, total)`` is called as people are done.
    """
    from ..screening import RULESET_VERSION, results_from_frame, screen_batch

    people = store.caseload()
    dicts = [d for _, d in people]
    total = len(dicts)
    if progress:
        progress(0, total)
    frame = frame_from_dicts(dicts)
    before = screen_batch(frame)
    after = screen_batch(frame, rules) if rules is not None else before
    changes = _diff_screenings(before, after) if rules is not None else {}
    notes: list[str] = []
    if template is None:
        if progress:
            progress(total, total)
    else:
        from ..catalogue import default_catalogue
        from ..planning.templates import load_template
        from ..records import parse_record
        from .template_library import resolve

        catalogue = default_catalogue()
        scr_before = results_from_frame(before)
        scr_after = results_from_frame(after, rules) if rules is not None else scr_before
        after_tpl = template.template()
        current = store.latest_program_templates()
        before_tpls: dict = {}
        cache: dict | None = {} if use_cache else None
        step = max(1, total // 100)
        for i, d in enumerate(dicts):
            rec = parse_record(d, source=f"store record {d['patient_id']!r}")
            name, version = current.get(rec.patient_id, (None, None))
            ref = f"{name}@{version}" if name and version else None
            if ref not in before_tpls:
                try:
                    before_tpls[ref] = resolve(ref, store, purpose="read").template() if ref else None
                except Exception:  # noqa: BLE001 - a template no longer here: the default choice
                    before_tpls[ref] = None
                    notes.append(f"template {ref} of some stored programs is no longer available; their "
                                 "'before' uses the planner's default choice")
            tpl_b = before_tpls[ref] or load_template(
                "post_vertebral_fracture" if any(f.site == "vertebra" for f in rec.fractures) else "standard")
            fb = _program_figures(rec, scr_before[i], tpl_b, catalogue, cache)
            fa = _program_figures(rec, scr_after[i], after_tpl, catalogue, cache)
            diffs = [{"field": f"program.{k}", "before": fb.get(k), "after": fa.get(k)}
                     for k in PROGRAM_FIELDS if fb.get(k) != fa.get(k)]
            if diffs:
                changes.setdefault(rec.patient_id, []).extend(diffs)
            if progress and (i + 1) % step == 0:
                progress(i + 1, total)
        if progress:
            progress(total, total)
    ordered = [{"patient_id": pid, "changes": changes[pid]} for pid in sorted(changes)]
    after_version = rules.version if rules is not None else RULESET_VERSION
    return WhatIf(total, ordered, rules_label, template_label, str(RULESET_VERSION), str(after_version),
                  sorted(set(notes)))


def write_whatif_csv(result: WhatIf, path: str | Path) -> int:
    """The changed fields as CSV (patient_id, field, before, after); whole file or nothing."""
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=["patient_id", "field", "before", "after"], lineterminator="\n")
    writer.writeheader()
    rows = result.rows()
    writer.writerows({k: spreadsheet_text(v) for k, v in row.items()} for row in rows)
    _atomic_write(path, buf.getvalue())
    return len(rows)


def text_progress(stream) -> Progress:
    """A one-line progress bar on ``stream`` (a terminal): ``[#####.....]  52%  5,200 / 10,000 people``."""
    state = {"last": -1}

    def show(done: int, total: int) -> None:
        pct = 100 if total == 0 else math.floor(100 * done / total)
        if pct == state["last"]:
            return
        state["last"] = pct
        filled = pct // 5
        stream.write(f"\r[{'#' * filled}{'.' * (20 - filled)}] {pct:3d}%  {done:,} / {total:,} people")
        if done >= total:
            stream.write("\n")
        stream.flush()

    return show


# =========================================================================================
# Outcomes: each measure's change across the caseload (docs/reassess.md)
# =========================================================================================

#: Columns of ``prescribe caseload outcomes --out``.
OUTCOME_COLUMNS = ("template", "measure", "label", "improved", "no real change", "worse", "people")


def _read_verdicts(texts: list[str]) -> dict[str, tuple]:
    """Each verdicts JSON text as its (measure, verdict) pairs: read in one parse of the texts
    joined as one JSON array (one call instead of one a text), or one by one where the joined
    parse does not give one object a text."""
    import json as _json
    try:
        objects = _json.loads("[" + ",".join(texts) + "]")
    except ValueError:
        objects = None
    if objects is None or len(objects) != len(texts) or not all(isinstance(o, dict) for o in objects):
        objects = [_json.loads(t) for t in texts]
    return {t: tuple(o.items()) for t, o in zip(texts, objects)}


def outcomes(store) -> dict:
    """Per measure and template, how many people improved, did not change, or worsened.

    Each person counts once, by their latest retest's verdicts against their baseline
    (:mod:`prescribe.outcomes.measures`), under the template of the program they were on.
    Returns ``{people, rows: [{template, measure, label, improved, "no real change", worse,
    people}], cautions}``; rows in the data file's measure order, then by template, with an
    ``(all)`` row per measure over every template.
    """
    from collections import Counter, defaultdict

    from ..outcomes.measures import VERDICTS, measure_rules

    rules = measure_rules()
    order = {name: i for i, name in enumerate(rules)}
    rows = store.retest_verdicts()
    people = len(rows)
    # Many people share the same verdicts: each distinct (template, verdicts text) is counted once,
    # and each distinct verdicts text read once.
    groups = Counter((r[1], r[2]) for r in rows)
    texts = list({verdicts_json for _template, verdicts_json in groups})
    read = _read_verdicts(texts)
    tally: dict[tuple[str | None, str, str], int] = defaultdict(int)
    for (template, verdicts_json), n in groups.items():
        for measure, verdict in read[verdicts_json]:
            tally[(template, measure, verdict)] += n
    counts: dict[tuple[str, str], list[int]] = {}
    for (template, measure, verdict), n in tally.items():
        if measure not in order or verdict not in VERDICTS:
            continue
        tpl = template or "(none recorded)"
        k = VERDICTS.index(verdict)
        for key in ((tpl, measure), ("(all)", measure)):
            row = counts.get(key)
            if row is None:
                row = counts[key] = [0, 0, 0]
            row[k] += n
    rows = []
    for (tpl, measure), (imp, same, worse) in sorted(counts.items(),
                                                     key=lambda kv: (order[kv[0][1]], kv[0][0] != "(all)", kv[0][0])):
        rows.append({"template": tpl, "measure": measure, "label": rules[measure].label, "improved": imp,
                     "no real change": same, "worse": worse, "people": imp + same + worse})
    return {"people": people, "rows": rows,
            "cautions": with_standard(["Counts of people by their latest retest against their own baseline; a "
                                       "program is one influence among many (medicines, illness, season): "
                                       "read them as a prompt for review, not as proof that a template works."])}


def write_outcomes_csv(result: dict, path: str | Path) -> int:
    """The outcome rows as CSV (:data:`OUTCOME_COLUMNS`); returns the number of rows written."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(OUTCOME_COLUMNS)
    for r in result["rows"]:
        w.writerow([spreadsheet_text(str(r[c])) if isinstance(r[c], str) else r[c] for c in OUTCOME_COLUMNS])
    _atomic_write(Path(path), buf.getvalue())
    return len(result["rows"])
