"""Rules from what the version-2 record says about the person: the heaviest load allowed, a
short carer-led program, the starting dose held until a clearance, and balance work that
starts within what the person was measured to hold."""

from __future__ import annotations

from typing import Iterator

from ..intensity import pct_1rm
from ..records import FIELD_META
from ..planning.sources import (CARER_LED_MAX_DAYS, CARER_LED_MAX_EXERCISES, NARROW_STANCE_PATTERN, SRC_BALANCE_MEASURED,
                       SRC_CARER_LED, SRC_HOLD_VOLUME)
from .facts import _Facts
from .model import SafetyViolation

SRC_LOAD_CAP = ("the screening's heaviest load allowed: Campbell et al. 2019, Med Sci Sports Exerc 51:2375-2390 "
                "(cancer treatment, bone metastases not excluded; from memory); after a joint replacement or for a "
                "carer-led program: common practice (docs/rules.md)")

#: The tandem stance test's full time [s]: the record's own bound (the test stops there).
TANDEM_TEST_FULL_S: float = FIELD_META["tandem_stance_s"]["maximum"]


def rule_load_cap(f: _Facts) -> Iterator[SafetyViolation]:
    """No resistance load above the screening's ``max_pct_1rm``."""
    cap = f.limits.max_pct_1rm
    if cap is None:
        return
    for week, _, x in f.exercises():
        pct = pct_1rm(x.intensity)
        if pct is not None and pct > cap:
            yield SafetyViolation("load_cap", week, x.exercise_id,
                                  f"{x.exercise_id} is prescribed at {pct:g}% 1RM, above the {cap}% 1RM the "
                                  "screening allows", f"resistance loads up to {cap}% 1RM", SRC_LOAD_CAP)


def rule_carer_led(f: _Facts) -> Iterator[SafetyViolation]:
    """A carer-led program is short (days a week, exercises a session) and every exercise is supervised."""
    if not f.limits.carer_led:
        return
    allowed = (f"a short program: at most {CARER_LED_MAX_DAYS} days a week, {CARER_LED_MAX_EXERCISES} exercises a "
               "session, every exercise with a clinician or carer present")
    for wk, pairs in zip(f.weeks, f.week_sessions):
        days = {s.day for s, _ in pairs}
        if len(days) > CARER_LED_MAX_DAYS:
            yield SafetyViolation("carer_led", wk.week, None, f"week {wk.week} has sessions on {len(days)} days",
                                  allowed, SRC_CARER_LED)
            return
        for s, _ in pairs:
            if len(s.exercises) > CARER_LED_MAX_EXERCISES:
                yield SafetyViolation("carer_led", wk.week, None, f"a day-{s.day} session of week {wk.week} has "
                                      f"{len(s.exercises)} exercises", allowed, SRC_CARER_LED)
                return
    for week, _, x in f.exercises():
        if not x.supervised:
            yield SafetyViolation("carer_led", week, x.exercise_id, f"{x.exercise_id} is not marked supervised "
                                  "(done with a clinician or carer present)", allowed, SRC_CARER_LED)
            return


def rule_hold_volume(f: _Facts) -> Iterator[SafetyViolation]:
    """Until a clearance is recorded, no week rises above week 1 in level, impacts, load, effort or volume."""
    if not f.limits.hold_volume or not f.weeks:
        return
    first = (f.levels[0], f.session_max[0], f.res_pct[0], f.res_rpe[0], f.res_vol[0])
    names = ("impact level", "impacts a session", "% 1RM", "effort", "sets x repetitions")
    for i, wk in enumerate(f.weeks[1:], start=1):
        now = (f.levels[i], f.session_max[i], f.res_pct[i], f.res_rpe[i], f.res_vol[i])
        risen = [n for n, a, b in zip(names, first, now) if b > a]
        if wk.impact_volume is not None and f.weeks[0].impact_volume is not None \
                and wk.impact_level == f.weeks[0].impact_level and wk.impact_volume > f.weeks[0].impact_volume:
            risen.append("impact volume")
        if risen:
            yield SafetyViolation("hold_volume", wk.week, None,
                                  f"week {wk.week} rises above week 1 in {', '.join(risen)}",
                                  "the starting dose held until a clinician records the clearance", SRC_HOLD_VOLUME)
            return


def rule_balance_within_measured(f: _Facts) -> Iterator[SafetyViolation]:
    """Where tandem stance was held for less than the test's full time, no heel-to-toe or one-leg stance
    before the first review week."""
    record = f.record or f.plan.record
    held = None if record is None else record.tandem_stance_s
    if held is None or held >= TANDEM_TEST_FULL_S:
        return
    review = next((wk.week for wk in f.weeks if wk.reassessment), None)
    until = review if review is not None else f.weeks[-1].week
    for week, _, x in f.exercises():
        e = f.entries.get(x.exercise_id)
        patterns = set(x.patterns) | (e.patterns if e is not None else set())
        if week <= until and NARROW_STANCE_PATTERN in patterns:
            yield SafetyViolation("balance_within_measured", week, x.exercise_id,
                                  f"{x.exercise_id} is a heel-to-toe or one-leg stance, and tandem stance was held "
                                  f"for {held:g} s of {TANDEM_TEST_FULL_S:g}",
                                  f"balance tasks within what was measured (feet together, stepping) until the review "
                                  f"of week {until}", SRC_BALANCE_MEASURED)
