"""The person's week-by-week tables: the routine (which exercises on which days), then the
grouped weeks with their doses."""

from __future__ import annotations

from dataclasses import dataclass, field, replace

from ...plan_schema import Plan, PlannedExercise, PlannedWeek
from ...languages import N_
from ..i18n import gettext as _, ngettext, pgettext
from .weeks import WeekFacts, week_facts
from .wording import days_text, dose_text, exercise_name, short_name, week_range


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
            notes.append(_("Step up to level %(level)s") % {"level": f.impact_level})
        if f.weak_window:
            notes.append(_(HOLD_NOTE))
        if self.reviews:
            weeks = pgettext("list", ", ").join(str(w) for w in self.reviews)
            notes.append(ngettext("Review: week %(weeks)s", "Review: weeks %(weeks)s", len(self.reviews))
                         % {"weeks": weeks})
        return notes


#: The note on a row of weeks in the weak window (the template marks it with a dashed box).
HOLD_NOTE = N_("Hold: add nothing")


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
    return [Line(ex.exercise_id, short_name(exercise_name(ex.name)), dose_text(ex), days_text(tuple(by_key[key])),
                 column_of(ex))
            for key, ex in first.items()]


#: Columns of the week-by-week table: (key, heading).
COLUMNS = (("impact", N_("Impact and walking")), ("resistance", N_("Strength")),
           ("balance", N_("Balance and posture")))


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
            who = (ngettext("each of the %(num)s exercises", "each of the %(num)s exercises", count)
                   if len(doses) == 1 else
                   ngettext("each of the other %(num)s exercises", "each of the other %(num)s exercises", count))
            items.append(("", pgettext("between parts", ", ").join((largest, who % {"num": count}))))
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
        """(key, heading) of each column, the heading in the current language."""
        return tuple((key, _(heading)) for key, heading in COLUMNS)


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
    return WeekTable(routine_rows(plan), _row(_("Every week"), (), False, every, True) if every else None, rows)
