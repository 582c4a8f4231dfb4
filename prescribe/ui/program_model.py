"""The program as the person will do it, in plain words (no widgets: testable without a browser).

The program section of the app shows one week day by day (each exercise by name with its
dose, load and supervision) and the whole progression at a glance; the swap panel says
what a swap will change before it is made and what it changed after.  This module works
those out from the plan; :mod:`prescribe.ui.program_view` lays them out.

The words for effort follow the verbal anchors of Borg's CR10 scale (Borg 1982, Med Sci
Sports Exerc 14:377-381); the words for a load given as % 1RM follow the usual bands of
resistance-training guidance (ACSM 2009 position stand on progression models, Med Sci
Sports Exerc 41:687-708: about 60-70% 1RM for novices, 80% and more is heavy).
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from datetime import date, datetime, timedelta
from typing import Any, Iterable

from ..handout.content import DAY_NAMES, LEVEL_LABELS
from ..intensity import needs_supervision, pct_1rm, rpe_range
from ..plan_schema import Plan
from ..stimulus import week_stages


# ---------------------------------------------------------------------------------------
# words
# ---------------------------------------------------------------------------------------

def effort_words(rpe: float) -> str:
    """Borg CR10 verbal anchor for an effort (Borg 1982): 3 moderate, 5 strong, 7 very strong."""
    if rpe < 2:
        return "very light"
    if rpe < 3:
        return "light"
    if rpe < 5:
        return "moderate"
    if rpe < 7:
        return "hard"
    if rpe < 9:
        return "very hard"
    return "near maximal"


def pct_words(pct: float) -> str:
    """A load as % 1RM in words (ACSM 2009 bands; under 60% light is common practice)."""
    if pct < 60:
        return "light load"
    if pct < 70:
        return "moderate load"
    if pct < 80:
        return "moderately heavy load"
    return "heavy load"


def load_words(ex: Any) -> str:
    """The load of one planned exercise in words: "heavy load, 80% 1RM, about 32 kg".

    Intensity given as % 1RM gets its band in words; an RPE gets the CR10 anchor; other
    intensities ("challenging but safe") are already words.  A working load in kg is shown
    where the program has one (an adjusted program carries ``load_kg``).
    """
    intensity = (getattr(ex, "intensity", "") or "").strip()
    parts: list[str] = []
    pct = pct_1rm(intensity)
    rpe = rpe_range(intensity)
    if pct is not None:
        parts += [pct_words(pct), f"{pct:g}% 1RM"]
    elif rpe:
        low, high = rpe
        words = effort_words(low) if effort_words(low) == effort_words(high) else \
            f"{effort_words(low)} to {effort_words(high)}"
        parts.append(f"{words} effort, {intensity}" if "(" in intensity else f"{words} effort ({intensity})")
    elif intensity:
        parts.append(intensity)
    kg = ex.load_kg
    if isinstance(kg, (int, float)) and not isinstance(kg, bool) and kg > 0:
        parts.append(f"about {kg:g} kg")
    return ", ".join(parts) or "as shown by the clinician"


def dose_words(ex: Any) -> str:
    """What and how much: "3 sets x 8 reps", "40 impacts in 2 bouts (4 h or more apart)", "20 minutes"."""
    parts: list[str] = []
    impacts = getattr(ex, "impacts", 0) or 0
    bouts = getattr(ex, "bouts", 1) or 1
    sets, reps, minutes = getattr(ex, "sets", None), getattr(ex, "reps", None), getattr(ex, "minutes", None)
    if impacts:
        text = f"{impacts} impacts"
        if sets:
            text += f" in {sets} set{'s' if sets != 1 else ''}"
        if bouts > 1:
            gap = ex.bout_gap_hours
            text += f", split into {bouts} bouts" + (f" about {gap:g} h apart" if gap else "")
        parts.append(text)
    elif sets and reps:
        parts.append(f"{sets} sets x {reps} reps" if sets != 1 else f"1 set x {reps} reps")
    elif reps:
        parts.append(f"{reps} reps")
    if minutes:
        parts.append(f"{minutes:g} minutes")
    if not impacts and bouts > 1:
        parts.append(f"in {bouts} bouts")
    return ", ".join(parts) or "as shown by the clinician"


def level_words(level: int) -> str:
    return f"{level} - {LEVEL_LABELS.get(level, '?')}"


def supervised(ex: Any, limits: Any = None) -> bool:
    """Whether this exercise is done supervised: the limits' one rule
    (:meth:`prescribe.plan_schema.PlanLimits.supervises`, the rule the person's pages use too);
    without limits, the exercise's own mark or the product's rule (80% 1RM or more, or high
    impact, level 3)."""
    if limits is not None:
        return limits.supervises(ex)
    return bool(ex.supervised or needs_supervision(getattr(ex, "intensity", "") or "", getattr(ex, "impact_level", 0)))


def readable_date(value: Any) -> str:
    """An ISO date (or the date of a timestamp) as the app writes dates ("2 Dec 2026"); other text unchanged."""
    if value in (None, ""):
        return ""
    if isinstance(value, datetime) or (isinstance(value, str) and len(value) > 10):
        return readable_time(value).split(",")[0]
    try:
        day = value if isinstance(value, date) else date.fromisoformat(str(value))
    except ValueError:
        return str(value)
    return f"{day.day} {day:%b %Y}"


def readable_time(value: Any) -> str:
    """An ISO timestamp as a readable local date and time ("2 Dec 2026, 09:41"); a date alone as a
    date ("2 Dec 2026"); other text unchanged."""
    if value in (None, ""):
        return ""
    if isinstance(value, date) and not isinstance(value, datetime) or (
            isinstance(value, str) and re.fullmatch(r"\d{4}-\d{2}-\d{2}", value.strip())):
        return readable_date(value)
    try:
        when = value if isinstance(value, datetime) else datetime.fromisoformat(str(value).replace("Z", "+00:00"))
    except ValueError:
        return str(value)
    if when.tzinfo is not None:
        when = when.astimezone()  # the machine's local time zone
    return f"{when.day} {when:%b %Y, %H:%M}"


# ---------------------------------------------------------------------------------------
# a week, day by day
# ---------------------------------------------------------------------------------------

#: A session's kind in the clinician's words.
KIND_WORDS = {"impact": "impact work", "resistance": "strength", "balance": "balance",
              "mixed": "impact and balance"}


@dataclass(frozen=True)
class ExerciseLine:
    """One exercise on one day, as the person will do it."""

    exercise_id: str
    name: str
    dose: str
    load: str
    level: str
    supervised: bool
    note: str = ""
    #: Why it is in the program, at this dose, this week: (about, reason, source) each
    #: (the plan's own ``why``, the reasons the clinician's pages and `prescribe why` print).
    why: tuple[tuple[str, str, str], ...] = ()


@dataclass
class DayPlan:
    """One training day of a week: its sessions' exercises in order."""

    day: int
    day_name: str
    date: date | None
    kinds: list[str]
    lines: list[ExerciseLine] = field(default_factory=list)

    @property
    def heading(self) -> str:
        when = f", {self.date.day} {self.date:%b}" if self.date else ""
        return f"{self.day_name}{when}: {' and '.join(KIND_WORDS.get(k, k) for k in self.kinds)}"


def current_week(plan: Any, today: date | None = None) -> int:
    """The program week ``today`` falls in (week 1 before the start or without a start date)."""
    start = getattr(plan, "start_date", None)
    n = len(plan.weeks)
    if not start:
        return 1
    days = ((today or date.today()) - date.fromisoformat(start)).days
    return min(max(1, days // 7 + 1), n)


def week_days(plan: Any, week: int, limits: Any = None) -> list[DayPlan]:
    """The days of program week ``week``, each with its exercises in the order they are done."""
    wk = next((w for w in plan.weeks if w.week == week), None)
    if wk is None:
        return []
    if limits is None and isinstance(plan, Plan):
        from ..safety import plan_limits
        limits = plan_limits(plan)
    start = getattr(plan, "start_date", None)
    first = date.fromisoformat(start) + timedelta(days=7 * (week - 1)) if start else None
    days: dict[int, DayPlan] = {}
    for session in sorted(wk.sessions, key=lambda s: s.day):
        when = None
        if first is not None:
            # week N starts on start_date + 7(N-1); its day D is the next such weekday
            when = first + timedelta(days=(session.day - 1 - first.weekday()) % 7)
        day = days.setdefault(session.day, DayPlan(session.day, DAY_NAMES[session.day - 1], when, []))
        if session.kind not in day.kinds:
            day.kinds.append(session.kind)
        for ex in session.exercises:
            day.lines.append(ExerciseLine(ex.exercise_id, ex.name, dose_words(ex), load_words(ex),
                                          level_words(ex.impact_level), supervised(ex, limits),
                                          str(ex.notes or ""),
                                          tuple((y.about or "", y.reason, y.source) for y in ex.why)))
    return [days[d] for d in sorted(days, key=lambda d: (days[d].date or date.min, d))]


# ---------------------------------------------------------------------------------------
# the progression at a glance
# ---------------------------------------------------------------------------------------

@dataclass
class StageRow:
    """Consecutive weeks with the same impact work and strength phase."""

    first: int
    last: int
    level: str
    impact_work: str
    strength: str
    weak_window: bool
    reviews: list[int] = field(default_factory=list)

    @property
    def weeks(self) -> str:
        return f"Week {self.first}" if self.first == self.last else f"Weeks {self.first}-{self.last}"


def impact_work_words(week: Any) -> str:
    """The week's impact work: impacts a session where impacts apply, else minutes or reps."""
    if week.impacts_per_session:
        return f"{week.impacts_per_session} impacts per session"
    unit = week.impact_volume_unit
    volume = week.impact_volume
    exercises = [x for s in week.sessions for x in s.exercises if x.category == "impact"]
    minutes = max((x.minutes or 0 for x in exercises), default=0)
    if unit == "minutes" or minutes:
        return f"{(volume if unit == 'minutes' and volume else minutes):g} minutes walking-type work"
    if unit == "reps" and volume:
        return f"{volume} reps of standing work, feet on the floor"
    return "no impact work"


def strength_words(week: Any) -> str:
    phase = str(week.resistance_phase or "")
    pct = [p for s in week.sessions for x in s.exercises if (p := pct_1rm(x.intensity)) is not None]
    load = f", up to {max(pct):g}% 1RM" if pct else ""
    return (phase or "strength") + load if (phase or pct) else ""


def progression(plan: Any) -> list[StageRow]:
    """The whole program in a few rows: level, impact work, strength phase, weak window, reviews."""
    rows: list[StageRow] = []
    weeks = sorted(plan.weeks, key=lambda w: w.week)
    for wk, stage in zip(weeks, week_stages(weeks)):
        row = StageRow(wk.week, wk.week, level_words(wk.impact_level), impact_work_words(wk),
                       strength_words(wk), stage.weak)
        last = rows[-1] if rows else None
        same = last is not None and (last.level, last.impact_work, last.strength, last.weak_window) == (
            row.level, row.impact_work, row.strength, row.weak_window) and not stage.stimulus
        if same:
            last.last = wk.week
        else:
            rows.append(row)
            last = row
        if wk.reassessment:
            last.reviews.append(wk.week)
    return rows


# ---------------------------------------------------------------------------------------
# swaps
# ---------------------------------------------------------------------------------------

def exercise_ids(plan: Any) -> list[str]:
    seen: list[str] = []
    for wk in plan.weeks:
        for s in wk.sessions:
            for x in s.exercises:
                if x.exercise_id not in seen:
                    seen.append(x.exercise_id)
    return seen


def _uses(plan: Any, exercise_id: str) -> list[tuple[int, Any]]:
    return [(wk.week, x) for wk in plan.weeks for s in wk.sessions for x in s.exercises
            if x.exercise_id == exercise_id]


def _weeks_text(weeks: Iterable[int]) -> str:
    weeks = sorted(set(weeks))
    if not weeks:
        return "no week"
    spans, start, prev = [], weeks[0], weeks[0]
    for w in weeks[1:] + [None]:
        if w is not None and w == prev + 1:
            prev = w
            continue
        spans.append(f"{start}" if start == prev else f"{start}-{prev}")
        if w is not None:
            start = prev = w
    return ("week " if len(weeks) == 1 else "weeks ") + ", ".join(spans)


def already_in_program(plan: Any, old_id: str, new_id: str, names: dict[str, str]) -> str | None:
    """The refusal when ``new_id`` is already in the program (a swap would merge the two), else None."""
    if new_id == old_id or not _uses(plan, new_id):
        return None
    new, old = names.get(new_id, new_id), names.get(old_id, old_id)
    weeks = _weeks_text(w for w, _ in _uses(plan, new_id))
    return (f"{new} is already in the program ({weeks}): swapping {old} for it would merge the two "
            f"exercises into one. Choose an exercise not yet in the program, or leave {old} out instead. "
            "Nothing was changed.")


def swap_preview(plan: Any, old_id: str, entry: Any) -> list[str]:
    """What swapping ``old_id`` for the catalogue ``entry`` will change, in plain words."""
    uses = _uses(plan, old_id)
    if not uses:
        return []
    old = uses[0][1]
    lines = [f"{old.name} is replaced by {entry.name} in {_weeks_text(w for w, _ in uses)} "
             f"({len(uses)} session{'s' if len(uses) != 1 else ''})."]
    lines.append(f"The dose stays as prescribed (for example {dose_words(old)}, {load_words(old)}).")
    new_level = int(getattr(entry, "impact_level", 0))
    if new_level != old.impact_level:
        lines.append(f"Impact level changes from {level_words(old.impact_level)} to {level_words(new_level)}.")
    force = getattr(entry, "peak_grf_bw", None)
    if force is not None and abs(float(force) - old.peak_grf_bw) > 1e-9:
        lines.append(f"Peak ground force changes from about {old.peak_grf_bw:g} to {float(force):g} times body weight.")
    return lines


def swap_result(before: Any, after: Any, old_id: str, new_id: str, names: dict[str, str]) -> str:
    """After a swap: what changed in the program, in one paragraph."""
    old, new = names.get(old_id, old_id), names.get(new_id, new_id)
    weeks = _weeks_text(w for w, _ in _uses(after, new_id))
    text = f"Swapped: {new} now replaces {old} in {weeks}."
    changed = [wb.week for wb, wa in zip(before.weeks, after.weeks)
               if (wb.impact_level, wb.impacts_per_session) != (wa.impact_level, wa.impacts_per_session)]
    if changed:
        text += f" The impact level or impacts per session changed in {_weeks_text(changed)}."
    else:
        text += " Impact level and impacts per session are unchanged."
    oi_b = sum(s.osteogenic_index for w in before.weeks for s in w.sessions)
    oi_a = sum(s.osteogenic_index for w in after.weeks for s in w.sessions)
    if abs(oi_a - oi_b) > 0.05:
        text += f" The program's total osteogenic index goes from {oi_b:.1f} to {oi_a:.1f}."
    return text
