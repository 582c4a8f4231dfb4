"""The person's pages: goals, the program at a glance, bouts and the next review."""

from __future__ import annotations

from dataclasses import dataclass

from ...plan_schema import Plan
from ..i18n import gettext as _, number, translate
from .weeks import WeekFacts, review_weeks, week_exercises
from .wording import capitalised, dose_text, exercise_name, level_words, weeks_phrase, weight_words

#: Hours between bouts that restore mechanosensitivity: Robling, Burr & Turner 2001,
#: J Exp Biol 204:3389-3399 ("approximately 8 h of recovery was sufficient").
DEFAULT_BOUT_GAP_HOURS = 8


def goals(plan: Plan) -> list[str]:
    """The plan's ``goals`` when the planner gives them, else plain goals from its content."""
    if plan.goals:
        return [translate(goal) for goal in plan.goals]
    from ...safety import plan_limits
    limits = plan_limits(plan)   # what the program is held to (never the screening alone)
    kinds = {s.kind for w in plan.weeks for s in w.sessions}
    out = []
    if limits.max_impact_level >= 2 and any(w.impacts_per_session for w in plan.weeks):
        out.append(_("Make your hip and spine bones stronger with short bursts of landings, "
                     "built up slowly."))
    if kinds & {"resistance", "mixed"}:
        out.append(_("Make your muscles stronger two or three times a week. This helps your bones too."))
    if limits.balance_first or "balance" in kinds:
        out.append(_("Get better balance and stronger legs, so you are less likely to fall."))
    if limits.spine_sparing:
        out.append(_("Keep your back safe: do not bend forward or twist when you lift, carry or push."))
    # Never "on your own" where supervision is prescribed: the limits' one rule
    # (PlanLimits.supervision_kind), the same the screen marks each line by.
    kind = limits.supervision_kind(plan)
    if kind == "carer":
        out.append(_("Do every session with your carer or clinician there. Know when to stop and ask for advice."))
    elif kind == "advised":
        out.append(_("Do your sessions with your clinician or trainer there, at least at first. Know when to stop "
                     "and ask for advice."))
    elif kind == "marked":
        out.append(_("Do the exercises marked supervised only with your clinician or trainer there. "
                     "Know when to stop and ask for advice."))
    else:
        out.append(_("Exercise safely on your own, and know when to stop and ask for advice."))
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
        start_level=_level(facts[0].impact_level),
        top_level=_level(max(f.impact_level for f in facts)),
        most_impacts=max(f.impacts_per_session for f in facts),
        resistance_range=(_weight_range(min(pcts), max(pcts)) if pcts else None),
        reviews=weeks_phrase([w for w, _when in reviews]) or _("as arranged with your clinician"),
    )


def _level(level: int) -> str:
    """"1: low impact (like brisk walking)"."""
    return _("%(level)s: %(words)s") % {"level": level, "words": level_words(level)}


def _weight_range(low: float, high: float) -> str:
    """The strength weights of a program in the person's words, lightest to heaviest."""
    first = weight_words(low)
    if weight_words(high) == first:
        return _("%(weight)s.") % {"weight": capitalised(first)}
    return _("From %(light)s, up to %(heavy)s.") % {"light": first, "heavy": weight_words(high)}


def bout_advice(plan: Plan) -> list[str]:
    """How to split landings into bouts, from the plan's own numbers."""
    gaps = {ex.bout_gap_hours for w in plan.weeks for ex in week_exercises(w) if ex.bouts > 1}
    gaps = {g for g in gaps if g is not None and g > 0} or {DEFAULT_BOUT_GAP_HOURS}
    rests = {ex.rest_s for w in plan.weeks for ex in week_exercises(w) if ex.impacts}
    rests = sorted(r for r in rests if r is not None and r > 0)
    gap = min(gaps)
    out = [_("When a day has more than one bout, leave at least %(hours)s hours between bouts "
             "(for example one in the morning and one in the evening). Bone responds better to "
             "several short bouts than to one long one.") % {"hours": number(gap)}]
    if rests:
        out.append(_("Between landings, pause for about %(seconds)s seconds: stand tall, then land again.")
                   % {"seconds": number(rests[0])})
    example = next(((w.week, ex) for w in sorted(plan.weeks, key=lambda w: w.week)
                    for ex in week_exercises(w) if ex.impacts and ex.bouts > 1), None)
    if example:
        week, ex = example
        out.append(_("Example from week %(week)s: %(name)s, %(dose)s.")
                   % {"week": week, "name": exercise_name(ex.name), "dose": dose_text(ex)})
    return out


def next_review(plan: Plan) -> str:
    reviews = review_weeks(plan)
    if not reviews:
        return _("Your clinician will tell you when your next review is. If you have not heard by the end "
                 "of the program, call the clinic.")
    week, when = reviews[0]
    if when:
        return _("Your next review is in week %(week)s (around %(date)s).") % {"week": week, "date": when}
    return _("Your next review is in week %(week)s.") % {"week": week}
