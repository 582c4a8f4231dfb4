"""Reviewing a program template before a clinic uses it: checks, a reference panel, comparison.

Domain code only (no store, no widgets): the clinic lead's tools in
:mod:`prescribe.clinic.template_library`, the command line and the app call these.

- :data:`REFERENCE_PANEL`: twenty invented people covering the usual kinds of people a
  bone-health exercise service sees (osteopenia, osteoporosis, vertebral fracture,
  falls risk, glucocorticoids, joint problems, a person to be cleared first...).
  Nobody here is real.
- :func:`random_records`: more invented people drawn at random (seeded, repeatable),
  so a template is also tried on combinations nobody thought of.
- :func:`panel_outcomes`: the program each person would get under a template and the
  figures a reviewer compares (weeks to full volume, peak impacts, peak intensity,
  total osteogenic index) with every safety-rule refusal (rule, person, week).
- :func:`compare_templates` and :func:`field_differences`: two templates side by side.
- :func:`dump_toml`: a template document as TOML text (the format of the shipped files).

Decision support only: a template that passes these checks still needs a clinician's
review and approval, and every program built from it a licensed clinician's judgment.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from datetime import date
from typing import Any, Iterable

import numpy as np

from ...cautions import with_standard
from ...errors import PlanRequestRefused, PrescribeError
from ...records import CONDITIONS, PatientRecord, ScreeningResult, parse_record
from ...stimulus import weekly_osteogenic_index
from ..dosing import prescribed_pct_1rm
from .document import Template

# =========================================================================================
# The reference panel: invented people
# =========================================================================================

_F = "female"
_M = "male"


def _person(pid, age, sex, mass, height, ls=None, fn=None, th=None, fractures=(), falls=0, tug=None,
            chair=None, tandem=None, gc=None, conditions=(), pain=0) -> dict:
    t = {k: v for k, v in (("lumbar_spine", ls), ("femoral_neck", fn), ("total_hip", th)) if v is not None}
    out = {"patient_id": pid, "age_years": age, "sex": sex, "body_mass_kg": mass, "height_cm": height,
           "t_scores": t, "fractures": [{"site": s, "months_ago": m, "low_trauma": lt} for s, m, lt in fractures],
           "falls_past_year": falls, "conditions": list(conditions), "pain_score": pain}
    for key, value in (("timed_up_and_go_s", tug), ("chair_stand_30s", chair), ("tandem_stance_s", tandem)):
        if value is not None:
            out[key] = value
    if gc is not None:
        out["glucocorticoids"] = {"mg_per_day": gc[0], "months": gc[1]}
    return out


#: Twenty invented people (ids PANEL-01 to PANEL-20); every value is made up.
REFERENCE_PANEL: tuple[dict, ...] = (
    _person("PANEL-01", 52, _F, 64, 166, ls=-0.6, fn=-0.8, tug=6.8, chair=17, tandem=10),
    _person("PANEL-02", 58, _F, 66, 165, ls=-1.6, fn=-1.9, th=-1.4, tug=7.8, chair=14, tandem=10, pain=1),
    _person("PANEL-03", 63, _F, 59, 160, ls=-2.7, fn=-2.3, tug=8.5, chair=12, tandem=10),
    _person("PANEL-04", 71, _F, 54, 156, ls=-3.1, fn=-2.6, th=-2.4, fractures=[("vertebra", 14, True)],
            tug=10.5, chair=10, tandem=10, conditions=["thoracic_kyphosis"], pain=2),
    _person("PANEL-05", 79, _M, 74, 172, fn=-2.2, th=-1.9, falls=2, tug=14.0, chair=8, tandem=4.5, pain=1),
    _person("PANEL-06", 64, _F, 70, 162, ls=-2.3, fn=-2.0, fractures=[("wrist", 40, True)], tug=8.9, chair=12,
            tandem=10, gc=(7.5, 18)),
    _person("PANEL-07", 67, _F, 82, 160, ls=-1.8, th=-2.0, tug=9.6, chair=11, tandem=10,
            conditions=["knee_osteoarthritis", "pelvic_floor_dysfunction"], pain=3),
    _person("PANEL-08", 75, _F, 51, 154, ls=-3.6, fn=-3.2, th=-3.0, fractures=[("hip", 20, True), ("wrist", 70, True)],
            tug=11.0, chair=9, tandem=8),
    _person("PANEL-09", 69, _M, 80, 175, ls=-2.6, fn=-2.5, tug=8.0, chair=13, tandem=10),
    _person("PANEL-10", 56, _F, 60, 168, ls=-1.2, fn=-1.5, tug=6.5, chair=18, tandem=10,
            conditions=["hip_replacement"]),
    _person("PANEL-11", 61, _F, 68, 163, ls=-2.1, fn=-1.7, tug=7.4, chair=15, tandem=10,
            conditions=["uncontrolled_hypertension"]),
    _person("PANEL-12", 66, _F, 62, 161, ls=-2.0, fn=-2.2, fractures=[("rib", 2, True)], tug=8.2, chair=13,
            tandem=10, pain=6),
    _person("PANEL-13", 84, _F, 48, 150, fn=-2.9, th=-2.7, falls=1, tug=16.5, chair=6, tandem=2.0,
            conditions=["peripheral_neuropathy"], pain=2),
    _person("PANEL-14", 59, _M, 88, 180, ls=-1.1, fn=-1.3, tug=6.9, chair=16, tandem=10,
            gc=(10.0, 6)),
    _person("PANEL-15", 73, _F, 57, 158, ls=-2.8, fn=-2.4, fractures=[("vertebra", 30, True), ("vertebra", 8, True)],
            tug=9.9, chair=10, tandem=9, conditions=["thoracic_kyphosis"], pain=3),
    _person("PANEL-16", 48, _F, 72, 170, ls=-1.4, fn=-0.9, tug=6.0, chair=20, tandem=10,
            conditions=["recent_surgery"]),
    _person("PANEL-17", 70, _F, 65, 162, ls=-2.4, fn=-2.1, th=-2.0, falls=1, tug=12.5, chair=10, tandem=7,
            conditions=["hip_osteoarthritis"], pain=4),
    _person("PANEL-18", 62, _M, 77, 178, ls=-3.0, fn=-2.7, fractures=[("humerus", 16, True)], tug=7.9, chair=14,
            tandem=10),
    _person("PANEL-19", 90, _F, 46, 149, fn=-3.4, th=-3.1, falls=3, tug=22.0, chair=4, tandem=1.0, pain=3),
    _person("PANEL-20", 55, _F, 58, 164, ls=-2.5, fn=-2.2, tug=7.0, chair=16, tandem=10, pain=0),
)


def reference_records() -> list[PatientRecord]:
    """The reference panel as validated records."""
    return [parse_record(p, source=f"reference panel {p['patient_id']}") for p in REFERENCE_PANEL]


def random_records(n: int, seed: int = 2026) -> list[PatientRecord]:
    """``n`` invented people drawn at random (repeatable for a seed), ids RAND-0001 on.

    Values are spread over the ranges a clinic sees (ages 40-95, T-scores -4.5 to
    +1, up to two fractures, 0-3 falls, the condition codes now and then), so the
    safety check meets combinations that the panel does not list.
    """
    if isinstance(n, bool) or not isinstance(n, int) or n < 0:
        from ...errors import InputError
        raise InputError.single("random people", n, "a whole number of 0 or more")
    rng = np.random.default_rng(seed)
    sites = ("vertebra", "hip", "wrist", "humerus", "pelvis", "rib", "other")
    out = []
    for i in range(n):
        sex = _F if rng.random() < 0.8 else _M
        height = float(round(rng.normal(162 if sex == _F else 175, 7), 1))
        mass = float(round(min(150.0, max(38.0, rng.normal(66 if sex == _F else 80, 12))), 1))
        t = {site: float(round(rng.uniform(-4.5, 1.0), 1)) for site in ("lumbar_spine", "femoral_neck", "total_hip")
             if rng.random() < 0.8}
        fractures = [{"site": str(rng.choice(sites)), "months_ago": int(rng.integers(1, 240)),
                      "low_trauma": bool(rng.random() < 0.8)} for _ in range(int(rng.choice([0, 0, 0, 1, 2])))]
        rec = {"patient_id": f"RAND-{i + 1:04d}", "age_years": int(rng.integers(40, 96)), "sex": sex,
               "body_mass_kg": mass, "height_cm": min(200.0, max(135.0, height)), "t_scores": t,
               "fractures": fractures, "falls_past_year": int(rng.choice([0, 0, 0, 1, 2, 3])),
               "timed_up_and_go_s": float(round(rng.uniform(5.5, 20.0), 1)),
               "chair_stand_30s": int(rng.integers(3, 22)),
               "tandem_stance_s": float(round(min(10.0, rng.uniform(0.5, 14.0)), 1)),
               "conditions": sorted({str(c) for c in rng.choice(sorted(CONDITIONS), size=int(rng.choice([0, 0, 1, 2])),
                                                                  replace=False)}),
               "pain_score": int(rng.choice([0, 0, 1, 2, 3, 5, 7]))}
        if rng.random() < 0.12:
            rec["glucocorticoids"] = {"mg_per_day": float(rng.choice([2.5, 5.0, 7.5, 10.0])),
                                      "months": float(rng.integers(1, 36))}
        out.append(parse_record(rec, source=f"random person {rec['patient_id']}"))
    return out


# =========================================================================================
# Safety check and the figures of one program
# =========================================================================================

def safety_violations(plan, screening: ScreeningResult | None = None) -> list[dict]:
    """The safety rules a program breaks, each ``{rule, week, exercise_id, message, allowed, source}``.

    One function, so the shared safety check (:func:`prescribe.safety.check_program`)
    is used wherever a template is reviewed.
    """
    from ...safety import check_program

    return [{"rule": str(v.rule), "week": v.week, "exercise_id": v.exercise_id, "message": str(v.message),
             "allowed": str(getattr(v, "allowed", "") or ""), "source": str(getattr(v, "source", "") or "")}
            for v in check_program(plan, screening)]


def _full_volume(tpl: Template, level: int) -> float:
    if level >= 2:
        return tpl.impacts_target(level)
    if level == 1:
        return tpl.impact["level1_minutes_full"]
    return tpl.impact["level0_reps_full"]


def plan_figures(plan, tpl: Template) -> dict:
    """The figures a reviewer compares for one program.

    ``weeks_to_full_volume`` is the first week the program's highest impact level is
    done at that level's full volume under the template (None when it never is);
    ``peak_impacts`` the most landings in one session; ``peak_intensity_pct_1rm`` the
    highest main-lift intensity (None when effort is given as RPE only);
    ``total_osteogenic_index`` the sum of the sessions' Turner indices [BW] (Turner &
    Robling 2003, Exerc Sport Sci Rev 31(1):45-50).
    """
    weeks = plan.weeks
    top = max(w.impact_level for w in weeks)
    full = _full_volume(tpl, top)
    to_full = None
    for w in weeks:
        vol = w.impact_volume
        if w.impact_level == top and vol is not None and vol >= full:
            to_full = w.week
            break
    # The load read from the exercises (as the tables and the handout read it), never a week's summary field.
    pcts = [p for w in weeks if (p := prescribed_pct_1rm(x for s in w.sessions for x in s.exercises)) is not None]
    total = sum(weekly_osteogenic_index(w) for w in weeks)
    return {"weeks": len(weeks), "top_impact_level": int(top), "weeks_to_full_volume": to_full,
            "peak_impacts": int(max(w.impacts_per_session for w in weeks)),
            "peak_intensity_pct_1rm": float(max(pcts)) if pcts else None,
            "total_osteogenic_index": round(float(total), 1)}


@dataclass
class PanelOutcome:
    """What one template does for one person: the figures and the refusals."""

    patient_id: str
    figures: dict | None
    refusals: list[dict] = field(default_factory=list)
    plan: Any = None

    def as_dict(self) -> dict:
        return {"patient_id": self.patient_id, **(self.figures or {}), "refusals": self.refusals}


def panel_outcomes(tpl: Template, records: Iterable[PatientRecord], screenings: dict | None = None, *,
                   weeks: int = 26, keep_plans: bool = False, catalogue=None) -> list[PanelOutcome]:
    """Build each person's program under ``tpl`` and run the safety check on it.

    A program the planner refuses, or one that breaks a safety rule, gives refusals
    naming the rule, the person and the week; nothing raises for a clinical reason.
    """
    from ..builder import PlanOptions, build_plan
    from ...screening import screen

    if catalogue is None:
        from ...catalogue import default_catalogue
        catalogue = default_catalogue()
    screenings = {} if screenings is None else screenings
    options = PlanOptions(weeks=weeks)
    out = []
    for rec in records:
        pid = rec.patient_id
        scr = screenings.get(pid)
        if scr is None:
            scr = screenings[pid] = screen(rec)
        try:
            plan = build_plan(rec, scr, options, catalogue, created="2026-01-05T09:00:00+00:00", template=tpl)
        except PlanRequestRefused as exc:
            out.append(PanelOutcome(pid, None, [{"rule": exc.rule, "patient_id": pid, "week": None,
                                                 "exercise_id": None, "message": exc.reason}]))
            continue
        except PrescribeError as exc:
            out.append(PanelOutcome(pid, None, [{"rule": "planner", "patient_id": pid, "week": None,
                                                 "exercise_id": None, "message": str(exc)}]))
            continue
        refusals = [{**v, "patient_id": pid} for v in safety_violations(plan, scr)]
        out.append(PanelOutcome(pid, plan_figures(plan, tpl), refusals, plan if keep_plans else None))
    return out


# =========================================================================================
# Comparing two templates
# =========================================================================================

COMPARED_FIGURES = ("weeks_to_full_volume", "peak_impacts", "peak_intensity_pct_1rm", "total_osteogenic_index",
                    "top_impact_level")


def flatten(doc: Any, prefix: str = "") -> dict[str, Any]:
    """A nested template document as ``{"impact.impacts_step": 10, "resistance.phases[0].sets": 2, ...}``."""
    out: dict[str, Any] = {}
    if isinstance(doc, dict):
        for k, v in doc.items():
            out.update(flatten(v, f"{prefix}.{k}" if prefix else str(k)))
    elif isinstance(doc, list) and any(isinstance(v, (dict, list)) for v in doc):
        for i, v in enumerate(doc):
            out.update(flatten(v, f"{prefix}[{i}]"))
    else:
        out[prefix] = doc
    return out


#: Keys that say which document this is rather than what it prescribes.
DOCUMENT_KEYS = ("version", "change_note", "document")


def field_differences(a: dict, b: dict) -> list[dict]:
    """The fields whose values differ between two template documents: ``[{field, a, b}]``."""
    fa = {k: v for k, v in flatten(a).items() if k.split(".")[0].split("[")[0] not in DOCUMENT_KEYS}
    fb = {k: v for k, v in flatten(b).items() if k.split(".")[0].split("[")[0] not in DOCUMENT_KEYS}
    out = []
    for key in list(fa) + [k for k in fb if k not in fa]:
        if fa.get(key) != fb.get(key):
            out.append({"field": key, "a": fa.get(key), "b": fb.get(key)})
    return out


def compare_templates(a: Template, b: Template, body_a: dict, body_b: dict,
                      records: list[PatientRecord] | None = None, *, label_a: str = "A",
                      label_b: str = "B") -> dict:
    """Two templates side by side over a panel (the reference panel by default).

    Returns ``{a, b, people: [{patient_id, a: figures, b: figures, a_refusals,
    b_refusals, differs}], totals, fields_differ, cautions}``.
    """
    records = reference_records() if records is None else records
    screenings: dict = {}
    out_a = panel_outcomes(a, records, screenings)
    out_b = panel_outcomes(b, records, screenings)
    people = []
    for pa, pb in zip(out_a, out_b):
        fa, fb = pa.figures or {}, pb.figures or {}
        differs = [k for k in COMPARED_FIGURES if fa.get(k) != fb.get(k)]
        if len(pa.refusals) != len(pb.refusals):
            differs.append("refusals")
        people.append({"patient_id": pa.patient_id,
                       "a": {k: fa.get(k) for k in COMPARED_FIGURES}, "b": {k: fb.get(k) for k in COMPARED_FIGURES},
                       "a_refusals": pa.refusals, "b_refusals": pb.refusals, "differs": differs})
    def total(outs, key):
        vals = [o.figures[key] for o in outs if o.figures and o.figures.get(key) is not None]
        return round(sum(vals), 1) if vals else None
    return {
        "a": label_a, "b": label_b,
        "panel": [r.patient_id for r in records],
        "people": people,
        "totals": {"a": {"total_osteogenic_index": total(out_a, "total_osteogenic_index"),
                         "refusals": sum(len(o.refusals) for o in out_a),
                         "people_differing": sum(1 for p in people if p["differs"])},
                   "b": {"total_osteogenic_index": total(out_b, "total_osteogenic_index"),
                         "refusals": sum(len(o.refusals) for o in out_b)}},
        "fields_differ": field_differences(body_a, body_b),
        "cautions": with_standard(["Figures over invented people: a review aid, not a prediction for a person."]),
    }


# =========================================================================================
# TOML text
# =========================================================================================

_BARE_KEY = re.compile(r"^[A-Za-z0-9_-]+$")


def _key(k: str) -> str:
    return k if _BARE_KEY.match(k) else _str(k)


def _str(s: str) -> str:
    out = s.replace("\\", "\\\\").replace('"', '\\"').replace("\n", "\\n").replace("\t", "\\t")
    out = "".join(ch if ord(ch) >= 0x20 or ch in "\\" else f"\\u{ord(ch):04x}" for ch in out)
    return f'"{out}"'


def _value(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if not math.isfinite(v):
            raise ValueError(f"TOML cannot hold {v!r}")
        return repr(v)
    if isinstance(v, str):
        return _str(v)
    if isinstance(v, date):
        return v.isoformat()
    if isinstance(v, dict):
        return "{ " + ", ".join(f"{_key(k)} = {_value(x)}" for k, x in v.items()) + " }"
    if isinstance(v, (list, tuple)):
        if v and all(isinstance(x, dict) for x in v):
            return "[\n" + "".join(f"  {_value(x)},\n" for x in v) + "]"
        return "[" + ", ".join(_value(x) for x in v) + "]"
    if v is None:
        raise ValueError("TOML has no null: leave the key out")
    raise ValueError(f"TOML cannot hold {type(v).__name__}")


def dump_toml(doc: dict, header: str = "") -> str:
    """A template document as TOML: top-level keys first, then one ``[table]`` each.

    Keys whose value is None are left out (TOML has no null).
    """
    lines = [f"# {line}".rstrip() for line in header.splitlines()] + ([""] if header else [])
    plain = {k: v for k, v in doc.items() if not isinstance(v, dict) and v is not None}
    tables = {k: v for k, v in doc.items() if isinstance(v, dict)}
    for k, v in plain.items():
        lines.append(f"{_key(k)} = {_value(v)}")
    for name, table in tables.items():
        lines.append("")
        lines.append(f"[{_key(name)}]")
        for k, v in table.items():
            if v is not None:
                lines.append(f"{_key(k)} = {_value(v)}")
    return "\n".join(lines) + "\n"
