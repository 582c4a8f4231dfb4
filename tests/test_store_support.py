"""Helpers shared by the store's tests (this module holds no tests).

Every person here is invented; ids are pseudonymous.
"""

from __future__ import annotations

import hashlib
import os
import sys
from pathlib import Path

from prescribe.cautions import with_standard
from prescribe.plan_schema import PLAN_FORMAT_VERSION
from prescribe.records import ScreeningResult, parse_record

ROOT = Path(__file__).resolve().parents[1]


def record(pid: str = "TEST-0001", **changes) -> "PatientRecord":  # noqa: F821
    data = {"patient_id": pid, "age_years": 67, "sex": "female", "body_mass_kg": 61.5, "height_cm": 158.0,
            "t_scores": {"lumbar_spine": -2.1, "femoral_neck": -1.8}, "falls_past_year": 0}
    data.update(changes)
    return parse_record(data)


def screening(pid: str = "TEST-0001", category: str = "osteopenia", ruleset: str = "test-rules-1") -> ScreeningResult:
    return ScreeningResult(patient_id=pid, bone_density_category=category, falls_risk=False, max_impact_level=2,
                           avoid=[], refer=False, flags=[], cautions=with_standard(), ruleset_version=ruleset)


def plan(pid: str = "TEST-0001", weeks: int = 2, marker: str = "") -> dict:
    """A small plan that satisfies prescribe.plan_schema and the safety check (made by hand,
    not by the planner): brisk walking with the catalogue's own figures, and the record."""
    from prescribe.catalogue import default_catalogue

    walk, stance = default_catalogue().get("brisk_walking"), default_catalogue().get("feet_together_stance")
    exercise = {"exercise_id": walk.exercise_id, "name": walk.name, "category": walk.category, "sets": None,
                "reps": None, "impacts": 0, "minutes": 20, "bouts": 1, "intensity": "RPE 3-4",
                "impact_level": walk.impact_level, "peak_grf_bw": walk.peak_grf_bw,
                "directions": list(walk.directions), "patterns": list(walk.patterns)}
    balance = {"exercise_id": stance.exercise_id, "name": stance.name, "category": stance.category,
               "minutes": 10, "intensity": "challenging but safe", "impact_level": stance.impact_level,
               "peak_grf_bw": stance.peak_grf_bw, "directions": list(stance.directions),
               "patterns": list(stance.patterns)}
    # Balance on two days a week: the safety check asks for it once a person has fallen.
    sessions = [{"day": 1, "kind": "impact", "exercises": [exercise], "impacts": 0, "osteogenic_index": 7.6},
                *({"day": d, "kind": "balance", "exercises": [balance], "impacts": 0, "osteogenic_index": 0.0}
                  for d in (2, 4))]
    return {
        "plan_format_version": PLAN_FORMAT_VERSION, "patient_id": pid, "created": "2026-01-05T09:00:00+00:00",
        "tool_version": "test", "ruleset_version": "test-rules-1",
        "screening": screening(pid).model_dump(mode="json"), "cautions": with_standard(),
        "sources": ["invented test plan"], "marker": marker, "record": record(pid).model_dump(mode="json"),
        "weeks": [{"week": w, "impact_level": walk.impact_level, "impacts_per_session": 0, "reassessment": w == weeks,
                   "sessions": sessions} for w in range(1, weeks + 1)],
    }


def with_record(p: dict, rec) -> dict:
    """Plan dict ``p`` for the person of record ``rec``: the record and a screening that holds the
    person back no less than the record does (every door screens the record again and refuses a
    plan whose embedded screening is looser; PRODUCT.md "One derivation")."""
    from prescribe.safety import rescreen, strictest_screening
    from prescribe.records import ScreeningResult as _S
    p["record"] = rec.model_dump(mode="json")
    p["screening"] = strictest_screening(_S.model_validate(p["screening"]), rescreen(rec)).model_dump(mode="json")
    return p


def sha256(path) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def python_env() -> dict:
    """Environment for child Python processes that import prescribe from this checkout."""
    env = dict(os.environ)
    env["PYTHONPATH"] = str(ROOT) + os.pathsep + env.get("PYTHONPATH", "")
    env.pop("PRESCRIBE_DB", None)
    return env


PYTHON = sys.executable
