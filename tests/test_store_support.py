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
    """A small plan that satisfies prescribe.plan_schema (made by hand, not by the planner)."""
    exercise = {"exercise_id": "heel_drop", "name": "Heel drops", "category": "impact", "sets": 2, "reps": 10,
                "impacts": 20, "minutes": None, "bouts": 1, "intensity": "RPE 5", "impact_level": 2,
                "peak_grf_bw": 2.5, "directions": ["vertical"], "patterns": []}
    return {
        "plan_format_version": PLAN_FORMAT_VERSION, "patient_id": pid, "created": "2026-01-05T09:00:00+00:00",
        "tool_version": "test", "ruleset_version": "test-rules-1",
        "screening": screening(pid).model_dump(mode="json"), "cautions": with_standard(),
        "sources": ["invented test plan"], "marker": marker,
        "weeks": [{"week": w, "impact_level": min(w, 2), "impacts_per_session": 20, "reassessment": w == weeks,
                   "sessions": [{"day": 1, "kind": "impact", "exercises": [exercise], "impacts": 20,
                                 "osteogenic_index": 7.6}]} for w in range(1, weeks + 1)],
    }


def sha256(path) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def python_env() -> dict:
    """Environment for child Python processes that import prescribe from this checkout."""
    env = dict(os.environ)
    env["PYTHONPATH"] = str(ROOT) + os.pathsep + env.get("PYTHONPATH", "")
    env.pop("PRESCRIBE_DB", None)
    return env


PYTHON = sys.executable
