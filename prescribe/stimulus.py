"""What each week of a plan asks of the skeleton, the weeks that start a new or larger
stimulus, and the weak window after them: worked out here once for every reader.

A new loading stimulus first activates resorption (about 3 weeks) before formation
(months): around weeks 3 to 5 after a new or larger stimulus bone is transiently weaker,
so nothing rises then (PRODUCT.md; remodelling sequence: Eriksen 1986, Endocr Rev 7:379;
remodelling transient: Heaney, Yates & Santora 1997, J Bone Miner Res 12:1143).

* :func:`session_load` and :func:`week_load`: a session's and a week's figures (:class:`Load`),
  read from the exercises themselves (never from a week's summary fields, which a hand edit
  can leave behind); intensities through :mod:`prescribe.intensity`.
* :func:`new_stimulus`: what starts a new or larger stimulus in a week: the first week with
  any loading work, and any later week whose impact level, resistance load (% 1RM) or
  resistance effort (RPE) rises above the week before.  Impact and resistance count alike.
* :func:`week_stages`: per week of a plan, its load, the stimulus it starts, the weak window
  it is in (weeks 3-5 counted from the stimulus week as 1) and whether the plan labels it a
  window (``weak_window``, e.g. the planner's own schedule); a week is held when either says so.
* :func:`weekly_osteogenic_index`: a week's osteogenic index, recorded or summed.

The safety check (:mod:`prescribe.safety.progression`), the session advice and its adjusted
program (:mod:`prescribe.sessions`), the handout, the tables, the app and the sensor
comparison all read these, so the week a page calls a hold is the week the check and the
advice hold.  Pure functions over the typed plan (:mod:`prescribe.plan_schema`); no I/O.
"""

from __future__ import annotations

from dataclasses import dataclass, fields
from typing import TYPE_CHECKING, Iterable, Sequence

from .intensity import pct_1rm, rpe_top

if TYPE_CHECKING:
    from .plan_schema import PlannedExercise, PlannedWeek

#: The weak window: weeks 3 to 5 counted from a new or larger stimulus (the stimulus week is
#: week 1); first and last position, inclusive (sources in the module docstring).
WEAK_WINDOW_WEEKS: tuple[int, int] = (3, 5)


def in_weak_window(position: int) -> bool:
    """Whether the week at ``position`` after a stimulus (the stimulus week is 1) is in the weak window."""
    first, last = WEAK_WINDOW_WEEKS
    return first <= position <= last


def weak_window_weeks(stimulus_weeks: Iterable[int]) -> set[int]:
    """The weeks inside the weak window of any of ``stimulus_weeks`` (week numbers, or 0-based indices)."""
    first, last = WEAK_WINDOW_WEEKS
    return {s + k - 1 for s in stimulus_weeks for k in range(first, last + 1)}


@dataclass(frozen=True, slots=True)
class Load:
    """What a session (or a week: the highest of its sessions) asks of the skeleton.

    ``impact_level``: highest impact level; ``impacts``: level 2-3 landings (a week: of its
    largest session); ``pct_1rm``: highest resistance load [% 1RM]; ``rpe``: highest effort of
    resistance work (Borg CR10; resistance sessions); ``volume``: sets x repetitions of
    resistance work (resistance sessions); ``minutes``: the longest walking-type (level 1)
    work [min]; ``reps``: the most standing (level 0) repetitions of impact work.  0 where none.
    """

    impact_level: int = 0
    impacts: int = 0
    pct_1rm: float = 0.0
    rpe: float = 0.0
    volume: int = 0
    minutes: float = 0.0
    reps: int = 0

    def rises_above(self, base: "Load", measures: Sequence[str] | None = None) -> list[str]:
        """The measures (field names, in order) in which this load is higher than ``base``."""
        names = measures if measures is not None else LOAD_MEASURES
        return [m for m in names if getattr(self, m) > getattr(base, m) + 1e-9]

    @property
    def loading(self) -> bool:
        """Any work that loads the skeleton: impact above level 0, or resistance work."""
        return self.impact_level > 0 or self.pct_1rm > 0 or self.rpe > 0 or self.volume > 0


#: The measures of a :class:`Load`, in order.
LOAD_MEASURES: tuple[str, ...] = tuple(f.name for f in fields(Load))
#: The measures whose rise starts a new or larger stimulus (a rise in volume alone is more of the
#: same stimulus: it is held in the window, but opens none).
STIMULUS_MEASURES: tuple[str, ...] = ("impact_level", "pct_1rm", "rpe")
#: What each stimulus measure is called where a page or a reason names it.
STIMULUS_WORDS = {"impact_level": "impact", "pct_1rm": "resistance load", "rpe": "resistance effort"}


def session_load(kind: str, exercises: Iterable["PlannedExercise"]) -> Load:
    """The :class:`Load` of one session of ``kind`` (impact, resistance, balance or mixed)."""
    impacts = top = volume = reps = 0
    pct = rpe = minutes = 0.0
    resistance = kind == "resistance"
    for x in exercises:
        level = x.impact_level
        if level > top:
            top = level
        if level >= 2:
            impacts += x.impacts
        p = pct_1rm(x.intensity)
        if p is not None and p > pct:
            pct = p
        if resistance:
            r = rpe_top(x.intensity)
            if r is not None and r > rpe:
                rpe = r
            volume += (x.sets or 0) * (x.reps or 0)
        elif level == 1:
            minutes = max(minutes, float(x.minutes or 0))
        elif level == 0 and kind in ("impact", "mixed") and x.category != "balance":
            reps = max(reps, int(x.reps or 0))
    return Load(top, impacts, pct, rpe, volume, minutes, reps)


def highest(loads: Iterable[Load]) -> Load:
    """The highest of each measure over ``loads`` (a week's load from its sessions')."""
    level = impacts = volume = reps = 0
    pct = rpe = minutes = 0.0
    for x in loads:  # plain comparisons: the safety check reads every week of every plan at every door
        if x.impact_level > level:
            level = x.impact_level
        if x.impacts > impacts:
            impacts = x.impacts
        if x.pct_1rm > pct:
            pct = x.pct_1rm
        if x.rpe > rpe:
            rpe = x.rpe
        if x.volume > volume:
            volume = x.volume
        if x.minutes > minutes:
            minutes = x.minutes
        if x.reps > reps:
            reps = x.reps
    return Load(level, impacts, pct, rpe, volume, minutes, reps)


def week_load(week: "PlannedWeek") -> Load:
    """The :class:`Load` of one week: the highest of each measure over its sessions."""
    return highest(session_load(s.kind, s.exercises) for s in week.sessions)


def new_stimulus(previous: Load | None, load: Load) -> tuple[str, ...]:
    """What makes a week with ``load`` a new or larger stimulus after a week with ``previous``.

    The first week (``previous`` None) starts one when it holds any loading work (its
    measures that are above 0, or ``impact_level`` alone for walking-type work); a later
    week when its impact level, % 1RM or effort rises.  Empty when it starts none.
    """
    if previous is None:
        if not load.loading:
            return ()
        return tuple(m for m in STIMULUS_MEASURES if getattr(load, m) > 0) or ("volume",)
    if (load.impact_level <= previous.impact_level and load.pct_1rm <= previous.pct_1rm + 1e-9
            and load.rpe <= previous.rpe + 1e-9):
        return ()  # the usual week: nothing rises (checked plainly, it is asked of every week)
    return tuple(load.rises_above(previous, STIMULUS_MEASURES))


def stimulus_weeks(loads: Sequence[Load]) -> list[int]:
    """0-based indexes of the weeks that start a new or larger stimulus (:func:`new_stimulus`)."""
    return [i for i, load in enumerate(loads) if new_stimulus(loads[i - 1] if i else None, load)]


@dataclass(frozen=True)
class WeekStage:
    """One week of a plan in its progression.

    ``week`` the week number; ``load`` its :class:`Load`; ``stimulus`` what it starts (empty:
    none; :func:`new_stimulus`); ``window`` (stimulus week, position) of the latest new or
    larger stimulus whose weeks 3-5 hold this week, or None; ``labelled`` whether the plan
    itself labels the week a window (``weak_window``).
    """

    week: int
    load: Load
    stimulus: tuple[str, ...]
    window: tuple[int, int] | None
    labelled: bool

    @property
    def weak(self) -> bool:
        """Held: nothing rises this week (weeks 3-5 after a stimulus, or labelled so)."""
        return self.window is not None or self.labelled

    @property
    def impact_step_up(self) -> bool:
        """The impact level starts or rises this week."""
        return "impact_level" in self.stimulus


def week_stages(weeks: Sequence["PlannedWeek"], loads: Sequence[Load] | None = None) -> list[WeekStage]:
    """The :class:`WeekStage` of every week, in week order (``loads``: their loads, when known)."""
    ordered = sorted(weeks, key=lambda w: w.week)
    if loads is None:
        loads = [week_load(w) for w in ordered]
    starts: list[int] = []
    out = []
    for i, (wk, load) in enumerate(zip(ordered, loads)):
        what = new_stimulus(loads[i - 1] if i else None, load)
        if what:
            starts.append(i)
        covering = [s for s in starts if in_weak_window(i - s + 1)]
        window = (ordered[covering[-1]].week, i - covering[-1] + 1) if covering else None
        out.append(WeekStage(wk.week, load, what, window, bool(wk.weak_window)))
    return out


def weak_weeks(weeks: Sequence["PlannedWeek"]) -> set[int]:
    """The week numbers in which nothing rises (:attr:`WeekStage.weak`)."""
    return {st.week for st in week_stages(weeks) if st.weak}


def weekly_osteogenic_index(week: "PlannedWeek") -> float:
    """A week's osteogenic index [BW]: the recorded ``weekly_osteogenic_index``, else the sum of its
    sessions' (rounded to 0.01 as the planner records it; Turner & Robling 2003, Exerc Sport Sci Rev
    31(1):45-50: sessions add up)."""
    recorded = week.weekly_osteogenic_index
    return float(recorded) if recorded is not None else round(sum(s.osteogenic_index for s in week.sessions), 2)
