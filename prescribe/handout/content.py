"""What a handout says, worked out from a plan (no HTML here).

The templates only lay out what these functions return, so the wording and the
numbers can be tested without rendering.  Fields the planner may add (``phase``,
``step_up``, ``weak_window``, ``resistance_intensity_pct_1rm``,
``weekly_osteogenic_index``; per exercise ``rest_s``, ``bout_gap_hours``,
``notes``) are used when present and derived when absent.
"""

from __future__ import annotations

import datetime as dt
import re
from dataclasses import dataclass, field, replace
from functools import lru_cache
from typing import Any

from ..catalogue import IMPACT_LEVEL_LABELS
from ..cautions import with_standard
from ..plan_schema import Plan, PlannedExercise, PlannedWeek, weak_window_weeks

DAY_NAMES = ("Monday", "Tuesday", "Wednesday", "Thursday", "Friday", "Saturday", "Sunday")
DAY_SHORT = ("Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun")

#: Our impact scale (PRODUCT.md): the catalogue's labels, with an example for the person.
LEVEL_LABELS = IMPACT_LEVEL_LABELS
LEVEL_EXAMPLES = {0: "feet stay on the floor", 1: "like brisk walking", 2: "like skipping or gentle stamps",
                  3: "like jumps and hops"}
LEVEL_WORDS = {level: f"{label} ({LEVEL_EXAMPLES[level]})" for level, label in IMPACT_LEVEL_LABELS.items()}

#: Hours between bouts that restore mechanosensitivity: Robling, Burr & Turner 2001,
#: J Exp Biol 204:3389-3399 ("approximately 8 h of recovery was sufficient").
DEFAULT_BOUT_GAP_HOURS = 8

_PCT_1RM = re.compile(r"(\d+(?:\.\d+)?)\s*%\s*(?:of\s+)?1\s*RM", re.IGNORECASE)

METHOD_SOURCES_BY_PAGES = {
    "Exerc Sport Sci Rev 31(1):45-50":
    "Turner CH, Robling AG 2003. Designing exercise regimens to increase bone strength. "
    "Exerc Sport Sci Rev 31(1):45-50 (osteogenic index = peak GRF x ln(cycles + 1)).",
    "J Exp Biol 204:3389-3399":
    "Robling AG, Burr DB, Turner CH 2001. Recovery periods restore mechanosensitivity to dynamically "
    "loaded bone. J Exp Biol 204:3389-3399 (about 8 h between bouts).",
    "Endocr Rev 7:379":
    "Eriksen EF 1986. Normal and pathological remodeling of human trabecular bone. Endocr Rev 7:379 "
    "(resorption about 3 weeks before formation: the weak window).",
}
METHOD_SOURCES = tuple(METHOD_SOURCES_BY_PAGES.values())


def evidence(plan: Plan) -> list[str]:
    """The plan's sources, then the handout's own method sources the plan does not cite.

    Exact repeats are dropped; a method source counts as cited when the plan cites
    the same journal pages (for example "J Exp Biol 204:3389-3399").
    """
    out: list[str] = []
    for text in plan.sources:
        text = " ".join(str(text).split())
        if text and text not in out:
            out.append(text)
    cited = " ".join(out)
    for pages, text in METHOD_SOURCES_BY_PAGES.items():
        if pages not in cited:
            out.append(text)
    return out


def pct_1rm(intensity: str) -> float | None:
    """The ``NN`` of an intensity such as ``"80% 1RM"``, or None."""
    match = _PCT_1RM.search(intensity or "")
    return float(match.group(1)) if match else None


@dataclass(frozen=True)
class WeekFacts:
    """One week of the plan as the charts and tables need it."""

    week: int
    impact_level: int
    impacts_per_session: int
    step_up: bool
    weak_window: bool
    resistance_pct_1rm: float | None
    reassessment: bool
    phase: str
    weekly_oi: float
    max_session_oi: float
    peak_grf_bw: float
    directions: tuple[str, ...]
    sessions: int


def week_facts(plan: Plan) -> list[WeekFacts]:
    """Per-week figures, with the weak window derived when absent and the resistance load
    always read from the exercises.

    A step-up is a week whose impact level is higher than the week before (or a
    week the planner marked ``step_up``).  Without the planner's ``weak_window``
    flag, weeks 3 to 5 counted from each step-up (the step-up week is week 1) are
    the weak window.
    """
    weeks = sorted(plan.weeks, key=lambda w: w.week)
    steps: list[bool] = []
    previous = None
    for wk in weeks:
        if wk.step_up is not None:
            steps.append(wk.step_up)
        else:
            steps.append(previous is not None and wk.impact_level > previous)
        previous = wk.impact_level
    step_weeks = [wk.week for wk, s in zip(weeks, steps) if s]
    derived_weak = weak_window_weeks(step_weeks)
    out = []
    for wk, step in zip(weeks, steps):
        weak = wk.weak_window if wk.weak_window is not None else wk.week in derived_weak
        # The load is read from the week's exercises, never from the week's summary field: the
        # handout must not state a higher intensity than the program prescribes.
        found = [p for ex in _exercises(wk) if (p := pct_1rm(ex.intensity)) is not None]
        pct = max(found) if found else None
        session_oi = [s.osteogenic_index for s in wk.sessions]
        weekly = float(sum(session_oi) if wk.weekly_osteogenic_index is None else wk.weekly_osteogenic_index)
        loading = [ex for ex in _exercises(wk) if ex.impact_level >= 1]
        directions = sorted({d for ex in loading for d in ex.directions})
        out.append(WeekFacts(
            week=wk.week, impact_level=wk.impact_level, impacts_per_session=wk.impacts_per_session,
            step_up=step, weak_window=weak, resistance_pct_1rm=pct, reassessment=wk.reassessment,
            phase=wk.phase, weekly_oi=weekly,
            max_session_oi=max(session_oi, default=0.0),
            peak_grf_bw=max((ex.peak_grf_bw for ex in loading), default=0.0),
            directions=tuple(directions), sessions=len(wk.sessions)))
    return out


def _exercises(week: PlannedWeek):
    for session in week.sessions:
        yield from session.exercises


def week_range(first: int, last: int) -> str:
    return f"Week {first}" if first == last else f"Weeks {first}-{last}"


def days_text(days: tuple[int, ...]) -> str:
    """"Mon, Wed, Fri" (the days of the week an exercise is done)."""
    return ", ".join(DAY_SHORT[d - 1] for d in days)


#: "RPE 3-4" or "RPE 6" (the Borg CR10 effort scale, 0-10).
_RPE = re.compile(r"^\s*RPE\s*(\d+(?:\.\d+)?)(?:\s*(?:-|to)\s*(\d+(?:\.\d+)?))?\s*$", re.IGNORECASE)

#: How an effort on the 0-10 scale feels, by the talk test (common practice; wording ours).
_EFFORT_FEEL = ((4, "you can still talk"), (6, "you can talk, but not sing"), (8, "you can say only a few words"),
                (10, "you cannot talk"))

#: Repetitions most adults can lift at a share of their one-repetition maximum, from the
#: usual %1RM-to-repetitions table (NSCA, Baechle & Earle, Essentials of Strength
#: Training and Conditioning; from memory): at or above each share, about this many.
_REPS_AT_PCT = ((95, 2), (93, 3), (90, 4), (87, 5), (85, 6), (83, 7), (80, 8), (77, 9), (75, 10), (70, 12),
                (65, 15), (60, 20))


def effort_words(low: float, high: float | None = None) -> str:
    """"effort 3 to 4 out of 10: you can still talk" (the person's words for RPE 3-4)."""
    top = high if high is not None else low
    feel = next((text for limit, text in _EFFORT_FEEL if top <= limit), _EFFORT_FEEL[-1][1])
    span = f"{low:g}" if high is None or high == low else f"{low:g} to {high:g}"
    return f"effort {span} out of 10: {feel}"


def weight_words(pct: float) -> str:
    """A share of the one-repetition maximum in the person's words: what weight to pick."""
    reps = next((n for limit, n in _REPS_AT_PCT if pct >= limit), None)
    if pct >= 100:
        return "the most you can lift once"
    if reps is None:
        return "a light weight you could lift more than 20 times"
    return f"a weight you could lift about {reps} times, and no more"


def plain_intensity(intensity: str) -> str:
    """An intensity as the person's pages say it: no RPE, no 1RM.

    "RPE 3-4" -> "effort 3 to 4 out of 10: you can still talk"; "80% 1RM" -> "a weight
    you could lift about 8 times, and no more".  Other wording is kept as it is.
    """
    text = (intensity or "").strip()
    aside = _WITH_ASIDE.match(text)  # "RPE 6-7 (about a 12RM load)": both parts in words
    if aside:
        return f"{plain_intensity(aside.group(1))} ({_plain_rm(aside.group(2))})"
    rpe = _RPE.match(text)
    if rpe:
        return effort_words(float(rpe.group(1)), float(rpe.group(2)) if rpe.group(2) else None)
    pct = pct_1rm(text)
    if pct is not None:
        return weight_words(pct)
    return text.replace("maximal", "your hardest")


_WITH_ASIDE = re.compile(r"^\s*(RPE\s*[\d.]+(?:\s*(?:-|to)\s*[\d.]+)?)\s*\((.+)\)\s*$", re.IGNORECASE)


def _plain_rm(text: str) -> str:
    """Repetition-maximum loads in words: "an 8-12RM load" -> "a load you could lift 8 to 12 times"."""
    text = re.sub(r"\b(?:an?\s+|about\s+an?\s+)?(\d+)\s*-\s*(\d+)\s*RM\b(?:\s+load)?",
                  r"a load you could lift \1 to \2 times", text)
    return re.sub(r"\b(?:an?\s+|about\s+an?\s+)?(\d+)\s*RM\b(?:\s+load)?", r"a load you could lift about \1 times", text)


def short_name(name: str) -> str:
    """An exercise's name without its bracketed aside: "Hex (trap) bar deadlift" -> "Hex bar deadlift"."""
    return " ".join(re.sub(r"\([^)]*\)", "", name).split()) or name


def dose_text(ex: PlannedExercise) -> str:
    """What and how many, in plain words: "40 landings in 2 bouts of 20"."""
    parts = []
    if ex.impacts:
        if ex.bouts > 1:
            per = ex.impacts / ex.bouts
            per_text = f"{per:g}" if per == int(per) else f"about {round(per)}"
            parts.append(f"{ex.impacts} landings in {ex.bouts} bouts of {per_text}")
        else:
            parts.append(f"{ex.impacts} landings")
    sets = f"{ex.sets} set{'' if ex.sets == 1 else 's'}" if ex.sets else ""
    if ex.sets and ex.reps:
        parts.append(f"{sets} of {ex.reps}")
    elif ex.reps:
        parts.append(f"{ex.reps} repetitions")
    elif ex.sets and not ex.impacts:
        parts.append(sets)
    if ex.minutes:
        parts.append(f"{ex.minutes:g} minutes")
    if not ex.impacts and ex.bouts > 1:
        parts.append(f"in {ex.bouts} bouts")
    text = ", ".join(parts) or "as shown by your clinician"
    if ex.intensity:
        # A sentence of its own: short sentences read more easily than one long one.
        words = plain_intensity(ex.intensity)
        text += f". {words[:1].upper()}{words[1:]}"
    load = ex.load_kg  # a working load from the logged sessions (docs/sessions.md)
    if load is not None and load > 0:
        text += f": about {load:g} kg"
    if ex.supervised:
        text += ". Supervised only: with your clinician or trainer there"
    return text


@dataclass(frozen=True)
class Line:
    """One exercise as prescribed in a week: what, how many, how often."""

    exercise_id: str
    name: str
    dose: str
    days: str
    column: str = "impact"


@dataclass
class WeekGroup:
    """Consecutive weeks with the same program (shown as one row, e.g. "Weeks 3-5")."""

    first: int
    last: int
    facts: WeekFacts
    lines: list[Line]
    key: tuple = field(repr=False, default=())
    reviews: list[int] = field(default_factory=list)

    @property
    def label(self) -> str:
        return week_range(self.first, self.last)

    @property
    def notes(self) -> list[str]:
        f = self.facts
        notes = []
        if f.step_up:
            notes.append(f"Step up to level {f.impact_level}")
        if f.weak_window:
            notes.append("Hold: add nothing")
        if self.reviews:
            notes.append(("Review: week " if len(self.reviews) == 1 else "Review: weeks ")
                         + ", ".join(str(w) for w in self.reviews))
        return notes


def week_lines(week: PlannedWeek) -> list[Line]:
    """The week's exercises, identical prescriptions on several days merged."""
    by_key: dict[tuple, list[int]] = {}
    first: dict[tuple, PlannedExercise] = {}
    for session in sorted(week.sessions, key=lambda s: s.day):
        for ex in session.exercises:
            key = (ex.exercise_id, ex.sets, ex.reps, ex.impacts, ex.minutes, ex.bouts, ex.intensity,
                   ex.load_kg)
            first.setdefault(key, ex)
            days = by_key.setdefault(key, [])
            if session.day not in days:
                days.append(session.day)
    return [Line(ex.exercise_id, short_name(ex.name), dose_text(ex), days_text(tuple(by_key[key])), column_of(ex))
            for key, ex in first.items()]


#: Columns of the week-by-week table: (key, heading).
COLUMNS = (("impact", "Impact and walking"), ("resistance", "Strength"), ("balance", "Balance and posture"))


def column_of(ex: PlannedExercise) -> str:
    category = ex.category.lower()
    if category == "resistance":
        return "resistance"
    if category == "impact" or ex.impact_level >= 1 or ex.impacts:
        return "impact"
    return "balance"


def week_groups(plan: Plan) -> list[WeekGroup]:
    """Group identical consecutive weeks so a 52-week plan stays a few pages long."""
    groups: list[WeekGroup] = []
    facts = {f.week: f for f in week_facts(plan)}
    for wk in sorted(plan.weeks, key=lambda w: w.week):
        f = facts[wk.week]
        lines = week_lines(wk)
        key = (tuple(lines), f.step_up, f.weak_window)
        last = groups[-1] if groups else None
        # A step-up starts its own row; reviews are noted on the row they fall in.
        if last is not None and last.key == key and not f.step_up and last.last == wk.week - 1:
            last.last = wk.week
        else:
            last = WeekGroup(wk.week, wk.week, f, lines, key)
            groups.append(last)
        if f.reassessment:
            last.reviews.append(wk.week)
    return groups


@dataclass(frozen=True)
class Cell:
    """Part of a table cell: exercises done on the same days, identical doses merged."""

    days: str
    items: tuple[tuple[str, str], ...]  # (names, or "" where the routine table names them; dose)
    #: The exercise names of each item, one by one (a name may hold a comma).
    names: tuple[tuple[str, ...], ...] = ()


def cells(lines: list[Line], names: bool = True) -> list[Cell]:
    """Lines grouped by days, then by dose.

    With ``names=False``, the largest set of exercises of a day group sharing one dose
    is not named (the routine table names them, grouped by the same days): "3 sets of
    10 at 60% 1RM, each of the other 4 exercises".
    """
    by_days: dict[str, dict[str, list[str]]] = {}
    for line in lines:
        group = by_days.setdefault(line.days, {}).setdefault(line.dose, [])
        if line.name not in group:
            group.append(line.name)
    out = []
    for days, doses in by_days.items():
        items, groups = [], []
        # Without names, the largest group sharing a dose is named only by its count.
        largest = max(doses, key=lambda d: len(doses[d])) if not names else None
        if largest is not None and len(doses[largest]) < 2:
            largest = None
        for dose, group in doses.items():
            if dose != largest:
                items.append((", ".join(group), dose))
                groups.append(tuple(group))
        if largest is not None:
            count = len(doses[largest])
            who = f"each of the {count} exercises" if len(doses) == 1 else f"each of the other {count} exercises"
            items.append(("", f"{largest}, {who}"))
            groups.append(tuple(doses[largest]))
        out.append(Cell(days, tuple(items), tuple(groups)))
    return out


@dataclass(frozen=True)
class TableRow:
    label: str
    notes: tuple[str, ...]
    weak_window: bool
    columns: tuple[tuple[Cell, ...], ...]  # one entry per COLUMNS
    impacts_per_session: int = 0
    #: Cells left out because the row above has them word for word ("as above").
    repeated: tuple[tuple[Cell, ...], ...] = ()

    #: Names of exercises done in these weeks exactly as in the "Every week" row.
    every_week: tuple[str, ...] = ()

    @property
    def has_repeats(self) -> bool:
        return any(self.repeated)

    @property
    def same_as_above(self) -> tuple[str, ...]:
        """Names of the exercises this row does not spell out (as in the row above, or every week).

        Every row names all its exercises: those it spells out with their days and doses,
        and these, named once more in a short line.
        """
        out: list[str] = []
        for column in self.repeated:
            for cell in column:
                for group in cell.names:
                    out.extend(name for name in group if name not in out)
        return tuple(out + [n for n in self.every_week if n not in out])


@dataclass(frozen=True)
class WeekTable:
    """The routine (which exercises on which days) and the week-by-week doses."""

    routine: list[TableRow]
    every_week: TableRow | None
    rows: list[TableRow]

    @property
    def columns(self) -> tuple[tuple[str, str], ...]:
        return COLUMNS


def _row(label: str, notes, weak: bool, lines: list[Line], names: bool, impacts: int = 0) -> TableRow:
    return TableRow(label, tuple(notes), weak,
                    tuple(tuple(cells([ln for ln in lines if ln.column == key], names)) for key, _ in COLUMNS),
                    impacts)


def without_repeats(rows: list[TableRow]) -> list[TableRow]:
    """Rows whose cells identical to the row above's (same column, days and doses) move to ``repeated``.

    Each distinct instruction is then printed once, where it starts; later rows say
    "as above" instead of repeating it.  This keeps the week-by-week tables short to
    read and quick to print.
    """
    out: list[TableRow] = []
    previous: tuple[tuple[Cell, ...], ...] | None = None
    for row in rows:
        if previous is None:
            out.append(row)
        else:
            kept = tuple(tuple(c for c in col if c not in prev) for col, prev in zip(row.columns, previous))
            same = tuple(tuple(c for c in col if c in prev) for col, prev in zip(row.columns, previous))
            out.append(replace(row, columns=kept, repeated=same))
        previous = row.columns
    return out


def routine_rows(plan: Plan) -> list[TableRow]:
    """Spans of weeks with the same exercises on the same days: names only, no doses."""
    spans: list[tuple[int, int, tuple]] = []
    for wk in sorted(plan.weeks, key=lambda w: w.week):
        key = tuple(dict.fromkeys((ln.exercise_id, ln.name, ln.days, ln.column) for ln in week_lines(wk)))
        if spans and spans[-1][2] == key and spans[-1][1] == wk.week - 1:
            spans[-1] = (spans[-1][0], wk.week, key)
        else:
            spans.append((wk.week, wk.week, key))
    rows = []
    for first, last, key in spans:
        columns = []
        for col, _ in COLUMNS:
            by_days: dict[str, list[str]] = {}
            for _id, name, days, column in key:
                if column == col and name not in by_days.setdefault(days, []):
                    by_days[days].append(name)
            columns.append(tuple(Cell(days, tuple((n, "") for n in names), tuple((n,) for n in names))
                                 for days, names in by_days.items() if names))
        rows.append(TableRow(week_range(first, last), (), False, tuple(columns)))
    return without_repeats(rows)


def week_table(plan: Plan) -> WeekTable:
    """The routine, then rows of grouped weeks with their doses.

    Exercises prescribed identically in every week are pulled out into one
    "Every week" row.
    """
    groups = week_groups(plan)
    common: set[Line] = set()
    if len(groups) > 1:
        common = set(groups[0].lines).intersection(*(g.lines for g in groups[1:]))
    every = [line for line in groups[0].lines if line in common]
    every_names = tuple(dict.fromkeys(line.name for line in every))
    rows = [_row(g.label, g.notes, g.facts.weak_window, [ln for ln in g.lines if ln not in common], True,
                 g.facts.impacts_per_session) for g in groups]
    rows = [replace(row, every_week=every_names) for row in without_repeats(rows)]
    return WeekTable(routine_rows(plan), _row("Every week", (), False, every, True) if every else None, rows)


def dose_rows(plan: Plan) -> list[tuple[str, WeekFacts]]:
    """Consecutive weeks with the same dose figures merged, for the clinician page."""
    rows: list[tuple[int, int, WeekFacts]] = []

    def figures(f: WeekFacts) -> tuple:
        return (f.impact_level, f.impacts_per_session, round(f.max_session_oi, 1), round(f.weekly_oi, 1),
                round(f.peak_grf_bw, 2), f.directions, f.resistance_pct_1rm, f.weak_window)

    for f in week_facts(plan):
        if rows and figures(rows[-1][2]) == figures(f) and not f.step_up and rows[-1][1] == f.week - 1:
            rows[-1] = (rows[-1][0], f.week, rows[-1][2])
        else:
            rows.append((f.week, f.week, f))
    return [(f"{a}" if a == b else f"{a}-{b}", f) for a, b, f in rows]


def review_weeks(plan: Plan) -> list[tuple[int, str | None]]:
    """(week, date or None) of every review the plan asks for."""
    try:
        start = dt.date.fromisoformat(str(plan.created)[:10])
    except ValueError:
        start = None
    out = []
    for wk in sorted(plan.weeks, key=lambda w: w.week):
        if wk.reassessment:
            when = start + dt.timedelta(weeks=wk.week - 1) if start else None
            out.append((wk.week, when.strftime("%d %B %Y").lstrip("0") if when else None))
    return out


def all_cautions(plan: Plan) -> list[str]:
    """The standard cautions first, then the plan's and the screening's own."""
    return with_standard([*plan.cautions, *plan.screening.cautions])


def goals(plan: Plan) -> list[str]:
    """The plan's ``goals`` when the planner gives them, else plain goals from its content."""
    if plan.goals:
        return list(plan.goals)
    kinds = {s.kind for w in plan.weeks for s in w.sessions}
    out = []
    if plan.screening.max_impact_level >= 2 and any(w.impacts_per_session for w in plan.weeks):
        out.append("Make your hip and spine bones stronger with short bursts of landings, "
                   "built up slowly.")
    if kinds & {"resistance", "mixed"}:
        out.append("Make your muscles stronger two or three times a week. This helps your bones too.")
    if plan.screening.falls_risk or "balance" in kinds:
        out.append("Get better balance and stronger legs, so you are less likely to fall.")
    if {"loaded_spinal_flexion", "loaded_spinal_twisting"} & set(plan.screening.avoid):
        out.append("Keep your back safe: do not bend forward or twist when you lift, carry or push.")
    if any(x.supervised for w in plan.weeks for ses in w.sessions for x in ses.exercises):
        # Never "on your own" where supervision is prescribed (docs/safety.md, rule supervision).
        out.append("Do the exercises marked supervised only with your clinician or trainer there. "
                   "Know when to stop and ask for advice.")
    else:
        out.append("Exercise safely on your own, and know when to stop and ask for advice.")
    return out


@dataclass(frozen=True)
class AtAGlance:
    weeks: int
    sessions_per_week: int
    start_level: str
    top_level: str
    most_impacts: int
    resistance_range: str | None
    reviews: str


def at_a_glance(plan: Plan, facts: list[WeekFacts]) -> AtAGlance:
    counts = [f.sessions for f in facts]
    typical = max(set(counts), key=counts.count)
    pcts = [f.resistance_pct_1rm for f in facts if f.resistance_pct_1rm is not None]
    reviews = review_weeks(plan)
    return AtAGlance(
        weeks=len(facts), sessions_per_week=typical,
        start_level=f"{facts[0].impact_level}: {LEVEL_WORDS.get(facts[0].impact_level, '')}",
        top_level=f"{max(f.impact_level for f in facts)}: "
                  f"{LEVEL_WORDS.get(max(f.impact_level for f in facts), '')}",
        most_impacts=max(f.impacts_per_session for f in facts),
        resistance_range=(_weight_range(min(pcts), max(pcts)) if pcts else None),
        reviews=weeks_phrase([w for w, _ in reviews]) or "as arranged with your clinician",
    )


def _weight_range(low: float, high: float) -> str:
    """The strength weights of a program in the person's words, lightest to heaviest."""
    first = weight_words(low)
    if weight_words(high) == first:
        return first[:1].upper() + first[1:] + "."
    return f"From {first}, up to {weight_words(high)}."


def weeks_phrase(weeks: list[int]) -> str:
    """"week 7", "weeks 7 and 15", "weeks 7, 15 and 22"; empty for no weeks."""
    if not weeks:
        return ""
    if len(weeks) == 1:
        return f"week {weeks[0]}"
    return "weeks " + ", ".join(str(w) for w in weeks[:-1]) + f" and {weeks[-1]}"


def bout_advice(plan: Plan) -> list[str]:
    """How to split landings into bouts, from the plan's own numbers."""
    gaps = {ex.bout_gap_hours for w in plan.weeks for ex in _exercises(w) if ex.bouts > 1}
    gaps = {g for g in gaps if g is not None and g > 0} or {DEFAULT_BOUT_GAP_HOURS}
    rests = {ex.rest_s for w in plan.weeks for ex in _exercises(w) if ex.impacts}
    rests = sorted(r for r in rests if r is not None and r > 0)
    gap = min(gaps)
    out = [f"When a day has more than one bout, leave at least {gap:g} hours between bouts "
           "(for example one in the morning and one in the evening). Bone responds better to "
           "several short bouts than to one long one."]
    if rests:
        out.append(f"Between landings, pause for about {rests[0]:g} seconds: stand tall, then land again.")
    example = next(((w.week, ex) for w in sorted(plan.weeks, key=lambda w: w.week)
                    for ex in _exercises(w) if ex.impacts and ex.bouts > 1), None)
    if example:
        week, ex = example
        out.append(f"Example from week {week}: {ex.name}, {dose_text(ex)}.")
    return out


def next_review(plan: Plan) -> str:
    reviews = review_weeks(plan)
    if not reviews:
        return "Your clinician will tell you when your next review is. If you have not heard by the end " \
               "of the program, call the clinic."
    week, when = reviews[0]
    text = f"Your next review is in week {week}"
    return text + (f" (around {when})." if when else ".")


# ---------------------------------------------------------------------------
# Exercise guides: from the exercise catalogue, else from the plan itself
# ---------------------------------------------------------------------------

#: Fallback wording when the catalogue has no entry (common practice; wording ours).
_FEEL_FALLBACK = {
    "impact": "Firm, quick landings that you feel through your heels and hips, but that do not hurt. "
              "You may be a little out of breath.",
    "resistance": "The last two repetitions of each set feel hard, but you can still keep good form "
                  "and breathe normally.",
    "balance": "A little wobbly but in control. Stand next to a kitchen counter or a wall you can hold.",
}
_FEEL_DEFAULT = "Comfortable effort: you can still talk in short sentences."
_IF_HARD_FALLBACK = ("Do fewer, or go back to last week's amount. Make the movement smaller and slower. "
                     "If it still hurts or you feel unsteady, stop and call the clinic.")


def _get(entry: Any, *names: str) -> Any:
    for name in names:
        value = entry.get(name) if isinstance(entry, dict) else getattr(entry, name, None)
        if value not in (None, "", [], ()):
            return value
    return None


def _as_text(value: Any) -> str | None:
    if value is None:
        return None
    if isinstance(value, (list, tuple)):
        return " ".join(str(v).strip() for v in value if str(v).strip()) or None
    return str(value)


def _catalogue_lookup():
    """A function id -> entry or None; never raises (the catalogue may be absent or broken)."""
    try:
        from ..catalogue import default_catalogue
        catalogue = default_catalogue()
    except Exception:  # noqa: BLE001 - the handout must still print without a catalogue
        return lambda _id: None

    def lookup(exercise_id: str):
        try:
            return catalogue.get(exercise_id)
        except Exception:  # noqa: BLE001 - unknown id: fall back to the plan's own fields
            return None
    return lookup


@dataclass(frozen=True)
class ExerciseGuide:
    exercise_id: str
    name: str
    category: str
    level: str
    how_to: str
    feel: str
    if_hard: str
    notes: tuple[str, ...]
    weeks: str
    #: The start and end position drawn from the catalogue's pose data (SVG), or "" when
    #: the catalogue has no pose for the exercise.
    drawing: str = ""


#: At most this many of the planner's notes are shown per exercise.
MAX_NOTES = 1

#: Shown once above the exercise guides (common practice; wording ours).
IF_HARD_GENERAL = _IF_HARD_FALLBACK


def exercise_guides(plan: Plan, lookup=None) -> list[ExerciseGuide]:
    """One guide per exercise of the plan, in order of first appearance."""
    lookup = lookup or _catalogue_lookup()
    seen: dict[str, ExerciseGuide] = {}
    notes: dict[str, list[str]] = {}
    for wk in sorted(plan.weeks, key=lambda w: w.week):
        for ex in _exercises(wk):
            if ex.notes and ex.notes not in notes.setdefault(ex.exercise_id, []):
                notes[ex.exercise_id].append(ex.notes)
            if ex.exercise_id in seen:
                continue
            entry = lookup(ex.exercise_id)
            how = _as_text(_get(entry, "instructions", "how_to", "cues")) if entry is not None else None
            feel = _as_text(_get(entry, "should_feel", "feel", "how_it_should_feel")) if entry is not None else None
            if_hard = None
            if entry is not None:
                reg_id = _get(entry, "regression", "regression_id", "easier")
                reg = lookup(reg_id) if isinstance(reg_id, str) else None
                if reg is not None:
                    reg_name = _get(reg, "name") or reg_id
                    reg_how = _as_text(_get(reg, "instructions", "how_to"))
                    if_hard = f"Do this instead: {reg_name}" + (f". {reg_how}" if reg_how else ".")
                    if not if_hard.endswith("."):
                        if_hard += "."
                elif isinstance(reg_id, str):
                    if_hard = f"Do the easier version your clinician showed you ({reg_id.replace('_', ' ')})."
            category = ex.category.lower()
            pose = _get(entry, "pose") if entry is not None else None
            seen[ex.exercise_id] = ExerciseGuide(
                exercise_id=ex.exercise_id, name=ex.name, category=ex.category,
                level=f"{ex.impact_level}: {LEVEL_LABELS.get(ex.impact_level, '')}",
                how_to=how or f"As your clinician showed you. {ex.name}: {dose_text(ex)}.",
                feel=feel or _FEEL_FALLBACK.get(category, _FEEL_DEFAULT),
                if_hard=if_hard or _IF_HARD_FALLBACK, notes=(), weeks="",
                drawing=_drawing(pose, short_name(ex.name)) if pose is not None else "")
    used: dict[str, list[int]] = {}
    for wk in plan.weeks:
        for ex in _exercises(wk):
            if wk.week not in used.setdefault(ex.exercise_id, []):
                used[ex.exercise_id].append(wk.week)
    return [ExerciseGuide(**{**g.__dict__, "notes": tuple(notes.get(i, ())[:MAX_NOTES]),
                             "weeks": week_spans(used[i])}) for i, g in seen.items()]


@lru_cache(maxsize=256)
def _drawing(pose, title: str) -> str:
    from ..catalogue.drawings import pose_svg
    return pose_svg(pose, title)


def week_spans(weeks: list[int]) -> str:
    """"weeks 1-7, 12" from a list of week numbers."""
    spans: list[list[int]] = []
    for w in sorted(set(weeks)):
        if spans and spans[-1][1] == w - 1:
            spans[-1][1] = w
        else:
            spans.append([w, w])
    text = ", ".join(f"{a}" if a == b else f"{a}-{b}" for a, b in spans)
    return ("week " if len(spans) == 1 and spans[0][0] == spans[0][1] else "weeks ") + text
