"""Planner templates: the numbers a progression is built from, as data with sources.

Each template is a TOML file in ``prescribe/data/templates/``.  Every number in its
``[impact]``, ``[resistance]`` and ``[balance]`` tables has an entry of the same
name in ``[sources]`` (a published source, "common practice" or "from memory").
A template may allow more than 100 impacts a session only with a
``max_impacts_reason``.  The file format is documented in ``docs/plan.md``.
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path

from ...errors import InputError, PrescribeError
from ...identifiers import identifier_problem
from ...loading.dose import BOUT_GAP_MIN_H, IMPACTS_PER_BOUT_MAX, IMPACTS_PER_SESSION_MAX as IMPACTS_CEILING

TEMPLATE_DIR = Path(__file__).resolve().parents[2] / "data" / "templates"

#: Above IMPACTS_CEILING impacts a session (prescribe.loading.dose.IMPACTS_PER_SESSION_MAX) a template must give
#: a reason; its bouts hold at most IMPACTS_PER_BOUT_MAX impacts, at least BOUT_GAP_MIN_H apart.

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
    #: Version of this template document: 1 for the shipped files (unless they say otherwise),
    #: the store's version number for a clinic template.
    version: int = 1
    #: "shipped" (a file of this package) or "clinic" (a version kept in the store).
    origin: str = "shipped"
    #: Optional certainty of each choice, keyed like ``sources`` (see :data:`CERTAINTY_LEVELS`).
    certainty: dict = field(default_factory=dict)

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
    if identifier_problem(name):
        raise TemplateError(file, "name", "must be a non-empty " + identifier_problem(name))
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
        version=_version(data.get("version", 1), file),
        certainty={str(k): str(v) for k, v in (data.get("certainty") or {}).items()}
        if isinstance(data.get("certainty"), dict) else {},
    )


def _version(value, file: str) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or value < 1:
        raise TemplateError(file, "version", f"must be a whole number of at least 1, not {value!r}")
    return value


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


# =========================================================================================
# Field metadata and a validator that names every bad field (for the template review tools)
# =========================================================================================

#: Certainty a clinic may record beside a template's source: the GRADE levels (Guyatt et al.
#: 2008, BMJ 336:924-926) or, where no graded evidence exists, expert consensus or common practice.
CERTAINTY_LEVELS: tuple[str, ...] = ("high", "moderate", "low", "very low", "expert consensus",
                                     "common practice")

#: Unit and help text of each number in a template, keyed ``table.key``.  The bounds are the
#: validator's own (``_IMPACT_INT_KEYS``, ``_BALANCE_INT_KEYS`` and the checks of
#: :func:`parse_template`); :func:`template_fields` joins the two so a form never copies a limit.
_FIELD_TEXT: dict[str, tuple[str, str]] = {
    "impact.default_start_level": ("level", "Impact level impact work starts at (0 no impact to 3 high impact)."),
    "impact.max_level": ("level", "Highest impact level this template ever reaches; the screening's cap also applies."),
    "impact.level1_minutes_start": ("min", "Minutes of walking-type (low impact) work a session at the start."),
    "impact.level1_minutes_step": ("min", "Minutes added a week to walking-type work."),
    "impact.level1_minutes_full": ("min", "Full volume of walking-type work a session."),
    "impact.level0_reps_start": ("reps", "Repetitions of no-impact work (heel raises, sit-to-stand) at the start."),
    "impact.level0_reps_step": ("reps", "Repetitions added a week to no-impact work."),
    "impact.level0_reps_full": ("reps", "Full volume of no-impact work a session."),
    "impact.impacts_start": ("impacts", "Landings a session when moderate or high impact starts."),
    "impact.impacts_step": ("impacts", "Landings added a week until the level's target."),
    "impact.impacts_target_level2": ("impacts", "Full volume a session at moderate impact."),
    "impact.impacts_target_level3": ("impacts", "Full volume a session at high impact."),
    "impact.max_impacts_per_session": ("impacts", "Ceiling of landings in one session; above 100 only with a reason."),
    "impact.bout_split_above": ("impacts", "Above this many landings in a day the work is split into bouts (at most 50)."),
    "impact.bout_gap_hours": ("h", "Hours between bouts of one day (4 to 24; about 8 restores mechanosensitivity)."),
    "impact.hold_weeks_at_full": ("weeks", "Weeks a level is held at full volume before stepping up."),
    "balance.minutes_start": ("min", "Minutes of balance work a session at the start."),
    "balance.minutes_full": ("min", "Minutes of balance work a session at full volume."),
    "balance.minutes_falls_risk": ("min", "Minutes of balance work a session when falls risk is flagged."),
    "balance.sessions_falls_risk": ("sessions/week", "Balance sessions a week when falls risk is flagged."),
}

#: Bounds of the numbers in a resistance phase (those :func:`_phases` checks).
PHASE_BOUNDS: dict[str, tuple[float, float]] = {"weeks": (0, 52), "sets": (1, 10), "reps": (1, 30),
                                                "pct_1rm": (20, 90)}
BOUT_GAP_BOUNDS: tuple[float, float] = (BOUT_GAP_MIN_H, 24)
BOUT_SPLIT_MAX = IMPACTS_PER_BOUT_MAX


@dataclass(frozen=True)
class TemplateField:
    """One number of a template: where it lives, its bounds, unit and help (for forms and checks)."""

    table: str
    key: str
    low: float
    high: float
    unit: str
    help: str
    whole: bool = True

    @property
    def path(self) -> str:
        return f"{self.table}.{self.key}"


def template_fields() -> tuple[TemplateField, ...]:
    """Every scalar number of a template with its bounds, unit and help text, in file order."""
    out = []
    for key, (lo, hi) in _IMPACT_INT_KEYS.items():
        if key == "bout_split_above":
            hi = BOUT_SPLIT_MAX
        unit, text = _FIELD_TEXT[f"impact.{key}"]
        out.append(TemplateField("impact", key, lo, hi, unit, text))
        if key == "bout_split_above":
            unit, text = _FIELD_TEXT["impact.bout_gap_hours"]
            out.append(TemplateField("impact", "bout_gap_hours", *BOUT_GAP_BOUNDS, unit, text, whole=False))
    for key, (lo, hi) in _BALANCE_INT_KEYS.items():
        unit, text = _FIELD_TEXT[f"balance.{key}"]
        out.append(TemplateField("balance", key, lo, hi, unit, text))
    return tuple(out)


def _number_problem(value, f_low: float, f_high: float, whole: bool) -> str | None:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or (whole and not isinstance(value, int)):
        return "a whole number" if whole else "a number"
    if not f_low <= value <= f_high:
        return "out of range"
    return None


def template_problems(data) -> list:
    """Every problem of a template document, each a :class:`~prescribe.errors.FieldProblem`
    naming the field (``impact.impacts_step``), the value and what is allowed.

    Empty for a template :func:`parse_template` accepts.  Unlike :func:`parse_template`,
    which stops at the first problem, this names them all (``prescribe template check``).
    """
    from ...errors import FieldProblem

    if not isinstance(data, dict):
        return [FieldProblem("template", data, "a TOML document with name, [impact], [resistance], [balance] "
                                               "and [sources]")]
    problems: list = []
    name = data.get("name")
    if not isinstance(name, str) or not name.strip():
        problems.append(FieldProblem("name", name, "a non-empty text"))
    elif identifier_problem(name):
        problems.append(FieldProblem("name", name, "a non-empty " + identifier_problem(name)))
    tables = {}
    for table in ("impact", "resistance", "balance", "sources"):
        raw = data.get(table)
        if not isinstance(raw, dict):
            problems.append(FieldProblem(table, raw, f"a [{table}] table", kind="missing" if raw is None else "invalid"))
            raw = {}
        tables[table] = raw
    if "version" in data and (isinstance(data["version"], bool) or not isinstance(data["version"], int)
                              or data["version"] < 1):
        problems.append(FieldProblem("version", data["version"], "a whole number of at least 1"))
    for f in template_fields():
        raw = tables[f.table]
        if f.key not in raw:
            problems.append(FieldProblem(f.path, None, f"{'a whole number' if f.whole else 'a number'} from "
                                         f"{f.low:g} to {f.high:g} [{f.unit}]", kind="missing"))
            continue
        if _number_problem(raw[f.key], f.low, f.high, f.whole):
            problems.append(FieldProblem(f.path, raw[f.key], f"{'a whole number' if f.whole else 'a number'} "
                                         f"from {f.low:g} to {f.high:g} [{f.unit}]"))
    imp = tables["impact"]
    reason = str(data.get("max_impacts_reason", imp.get("max_impacts_reason", ""))).strip()
    mx = imp.get("max_impacts_per_session")
    if isinstance(mx, int) and not isinstance(mx, bool) and mx > IMPACTS_CEILING and not reason:
        problems.append(FieldProblem("impact.max_impacts_per_session", mx,
                                     f"at most {IMPACTS_CEILING} unless max_impacts_reason says why"))
    res = tables["resistance"]
    for key in ("phases", "spine_sparing_phases"):
        phases = res.get(key)
        where = f"resistance.{key}"
        if not isinstance(phases, list) or not phases:
            problems.append(FieldProblem(where, phases, "a non-empty list of phases {name, weeks, sets, reps, "
                                                        "pct_1rm or intensity}"))
            continue
        for i, ph in enumerate(phases):
            at = f"{where}[{i}]"
            if not isinstance(ph, dict):
                problems.append(FieldProblem(at, ph, "a table {name, weeks, sets, reps, pct_1rm or intensity}"))
                continue
            for k in ("weeks", "sets", "reps"):
                lo, hi = PHASE_BOUNDS[k]
                if k not in ph:
                    problems.append(FieldProblem(f"{at}.{k}", None, f"a whole number from {lo:g} to {hi:g}",
                                                 kind="missing"))
                elif _number_problem(ph[k], lo, hi, True):
                    problems.append(FieldProblem(f"{at}.{k}", ph[k], f"a whole number from {lo:g} to {hi:g}"))
            pct = ph.get("pct_1rm")
            lo, hi = PHASE_BOUNDS["pct_1rm"]
            if pct is not None and _number_problem(pct, lo, hi, False):
                problems.append(FieldProblem(f"{at}.pct_1rm", pct, f"a number from {lo:g} to {hi:g} [% 1RM]"))
            if pct is None and not str(ph.get("intensity") or "").strip():
                problems.append(FieldProblem(f"{at}.intensity", None, "pct_1rm or an intensity text such as "
                                                                     "'RPE 3-4'", kind="missing"))
        last = phases[-1]
        if isinstance(last, dict) and last.get("weeks") != 0:
            problems.append(FieldProblem(f"{where}[{len(phases) - 1}].weeks", last.get("weeks"),
                                         "0 in the last phase (it runs until the end)"))
    for key in ("strength_allowed", "spine_sparing"):
        if key in res and not isinstance(res[key], bool):
            problems.append(FieldProblem(f"resistance.{key}", res[key], "true or false"))
    sources = tables["sources"]
    needed = [f.key for f in template_fields()] + ["phases", "spine_sparing_phases", "strength_allowed"]
    if "spine_sparing" in res:
        needed.append("spine_sparing")
    for key in needed:
        if not str(sources.get(key, "") or "").strip():
            problems.append(FieldProblem(f"sources.{key}", sources.get(key),
                                         "a source for this number (a citation, 'common practice' or "
                                         "'from memory')", kind="missing"))
    certainty = data.get("certainty")
    if certainty is not None:
        if not isinstance(certainty, dict):
            problems.append(FieldProblem("certainty", certainty, "a [certainty] table keyed like [sources]"))
        else:
            for key, value in certainty.items():
                if key not in needed:
                    problems.append(FieldProblem(f"certainty.{key}", value, "a key of [sources] ("
                                                 + ", ".join(needed) + ")", kind="unknown_field"))
                elif value not in CERTAINTY_LEVELS:
                    problems.append(FieldProblem(f"certainty.{key}", value, "one of " + ", ".join(CERTAINTY_LEVELS)))
    return problems
