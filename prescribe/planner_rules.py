"""Planner templates: the numbers a progression is built from, as data with sources.

Each template is a TOML file in ``prescribe/data/templates/``.  Every number in its
``[impact]``, ``[resistance]`` and ``[balance]`` tables has an entry of the same
name in ``[sources]`` (a published source, "common practice" or "from memory").
A template may allow more than 100 impacts a session only with a
``max_impacts_reason``.  The file format is documented in ``docs/plan.md``.
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

from .errors import InputError, PrescribeError

TEMPLATE_DIR = Path(__file__).resolve().parent / "data" / "templates"

#: Above this many impacts a session a template must give a reason (issue 4, rule 4).
IMPACTS_CEILING = 100

_IMPACT_INT_KEYS = {
    "default_start_level": (0, 3), "max_level": (0, 3),
    "level1_minutes_start": (1, 120), "level1_minutes_step": (0, 60), "level1_minutes_full": (1, 120),
    "level0_reps_start": (1, 100), "level0_reps_step": (0, 50), "level0_reps_full": (1, 100),
    "impacts_start": (1, 200), "impacts_step": (0, 100),
    "impacts_target_level2": (1, 200), "impacts_target_level3": (1, 200),
    "max_impacts_per_session": (1, 300), "bout_split_above": (1, 200), "hold_weeks_at_full": (1, 12),
}
_BALANCE_INT_KEYS = {"minutes_start": (1, 60), "minutes_full": (1, 60), "minutes_falls_risk": (1, 60),
                     "sessions_falls_risk": (2, 7)}


class TemplateError(PrescribeError):
    """A planner template file is malformed: names the file, the key and the problem."""

    def __init__(self, file: str, key: str | None, problem: str):
        self.file, self.key, self.problem = file, key, problem
        super().__init__(f"{file}" + (f", {key}" if key else "") + f": {problem}")


@dataclass(frozen=True)
class ResistancePhase:
    """One block of the resistance progression (``weeks`` 0 means: until the end)."""

    name: str
    weeks: int
    sets: int
    reps: int
    pct_1rm: float | None
    intensity: str


@dataclass(frozen=True)
class Template:
    """A validated planner template (see ``docs/plan.md`` for every field)."""

    name: str
    title: str
    summary: str
    impact: dict
    resistance_phases: tuple[ResistancePhase, ...]
    spine_sparing_phases: tuple[ResistancePhase, ...]
    strength_allowed: bool
    spine_sparing: bool
    balance: dict
    max_impacts_reason: str
    sources: dict
    file: str

    def impacts_target(self, level: int) -> int:
        """Full-volume impacts a session at impact level 2 or 3 [impacts]."""
        key = "impacts_target_level3" if level >= 3 else "impacts_target_level2"
        return min(self.impact[key], self.impact["max_impacts_per_session"])

    def source_list(self) -> list[str]:
        """The distinct citations behind this template's numbers, in file order."""
        out: list[str] = []
        for text in self.sources.values():
            if text not in out:
                out.append(text)
        return out


def template_names() -> list[str]:
    """Names of the bundled templates, sorted."""
    return sorted(p.stem for p in TEMPLATE_DIR.glob("*.toml"))


def _int(table: dict, key: str, bounds: tuple[int, int], file: str) -> int:
    if key not in table:
        raise TemplateError(file, key, "is missing")
    value = table[key]
    if isinstance(value, bool) or not isinstance(value, int) or not bounds[0] <= value <= bounds[1]:
        raise TemplateError(file, key, f"must be a whole number from {bounds[0]} to {bounds[1]}, not {value!r}")
    return value


def _phases(raw, key: str, file: str) -> tuple[ResistancePhase, ...]:
    if not isinstance(raw, list) or not raw:
        raise TemplateError(file, f"resistance.{key}", "must be a non-empty list of phases")
    out = []
    for i, ph in enumerate(raw):
        where = f"resistance.{key}[{i}]"
        if not isinstance(ph, dict):
            raise TemplateError(file, where, "must be a table")
        weeks = _int(ph, "weeks", (0, 52), f"{file}, {where}")
        sets = _int(ph, "sets", (1, 10), f"{file}, {where}")
        reps = _int(ph, "reps", (1, 30), f"{file}, {where}")
        pct = ph.get("pct_1rm")
        if pct is not None and (isinstance(pct, bool) or not isinstance(pct, (int, float)) or not 20 <= pct <= 90):
            raise TemplateError(file, f"{where}.pct_1rm", f"must be a number from 20 to 90, not {pct!r}")
        intensity = ph.get("intensity") or (f"{pct:g}% 1RM" if pct is not None else "")
        if not intensity:
            raise TemplateError(file, where, "needs pct_1rm or an intensity text such as 'RPE 3-4'")
        out.append(ResistancePhase(str(ph.get("name", "phase")), weeks, sets, reps,
                                   float(pct) if pct is not None else None, intensity))
    if out[-1].weeks != 0:
        raise TemplateError(file, f"resistance.{key}", "the last phase must have weeks = 0 (until the end)")
    return tuple(out)


def parse_template(data: dict, file: str = "<template>") -> Template:
    """Validate a template given as parsed TOML.

    Raises
    ------
    TemplateError
        Naming the file, the key and the problem.
    """
    for table in ("impact", "resistance", "balance", "sources"):
        if not isinstance(data.get(table), dict):
            raise TemplateError(file, table, "table is missing")
    name = data.get("name")
    if not isinstance(name, str) or not name:
        raise TemplateError(file, "name", "must be a non-empty text")
    imp_raw, res_raw, bal_raw, sources = data["impact"], data["resistance"], data["balance"], data["sources"]
    impact = {k: _int(imp_raw, k, b, file) for k, b in _IMPACT_INT_KEYS.items()}
    gap = imp_raw.get("bout_gap_hours")
    if isinstance(gap, bool) or not isinstance(gap, (int, float)) or not 4 <= gap <= 24:
        raise TemplateError(file, "impact.bout_gap_hours",
                            f"must be a number from 4 to 24 hours (Robling, Burr & Turner 2001), not {gap!r}")
    impact["bout_gap_hours"] = float(gap)
    if impact["bout_split_above"] > 50:
        raise TemplateError(file, "impact.bout_split_above", "must be at most 50 (impacts a bout)")
    reason = str(data.get("max_impacts_reason", imp_raw.get("max_impacts_reason", ""))).strip()
    if impact["max_impacts_per_session"] > IMPACTS_CEILING and not reason:
        raise TemplateError(file, "impact.max_impacts_per_session",
                            f"is {impact['max_impacts_per_session']}, above {IMPACTS_CEILING}: "
                            "allowed only with a max_impacts_reason")
    balance = {k: _int(bal_raw, k, b, file) for k, b in _BALANCE_INT_KEYS.items()}
    for key in (*impact, *balance, "phases", "spine_sparing_phases", "strength_allowed",
                *(["spine_sparing"] if "spine_sparing" in res_raw else [])):
        if not str(sources.get(key, "")).strip():
            raise TemplateError(file, f"sources.{key}", "every choice needs a source (or 'common practice')")
    return Template(
        name=name, title=str(data.get("title", name)), summary=str(data.get("summary", "")),
        impact=impact,
        resistance_phases=_phases(res_raw.get("phases"), "phases", file),
        spine_sparing_phases=_phases(res_raw.get("spine_sparing_phases"), "spine_sparing_phases", file),
        strength_allowed=bool(res_raw.get("strength_allowed", True)),
        spine_sparing=bool(res_raw.get("spine_sparing", False)),
        balance=balance, max_impacts_reason=reason,
        sources={str(k): str(v) for k, v in sources.items()}, file=file,
    )


@lru_cache(maxsize=None)
def load_template(name: str = "standard") -> Template:
    """A bundled template by name.

    Raises
    ------
    InputError
        For an unknown name, listing the names there are.
    """
    names = template_names()
    if name not in names:
        raise InputError.single("template", name, "one of " + ", ".join(names))
    path = TEMPLATE_DIR / f"{name}.toml"
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except tomllib.TOMLDecodeError as exc:
        raise TemplateError(str(path.name), None, f"is not valid TOML ({exc})") from None
    return parse_template(data, path.name)
