"""How a program progresses week by week: impact levels and volumes, resistance phases,
the weeks 3-5 after a new or larger stimulus, review weeks.

Rules 2 and 3 of :mod:`prescribe.planning`: impact steps up one level at a time after
the current level is held at full volume, and weeks 3 to 5 after a new or larger stimulus
of either kind carry no escalation (resorption precedes formation: Eriksen 1986, Endocr
Rev 7:379; Heaney, Yates & Santora 1997, J Bone Miner Res 12:1143).  The schedule is a
mixin of the builder (:class:`~prescribe.planning.builder._Builder`).
"""

from __future__ import annotations

import math

from ..catalogue import IMPACT_LEVEL_LABELS as IMPACT_LABELS
from ..errors import PlanRequestRefused
from ..stimulus import in_weak_window
from .templates import ResistancePhase
from .sources import (BALANCE_FIRST_WEEKS, FRAIL_BODYWEIGHT_WEEKS, LIFT_LOAD_FROM_PCT, LIFT_PRACTICE_WEEKS,
                      PHASE_WAIT_WEEKS)


def reassessment_weeks(weeks: int) -> list[int]:
    """Review weeks: evenly spaced, at most 8 weeks apart, the last week included.

    Plans of 12 weeks or more get reviews every 6 to 8 weeks (issue 4; common practice).
    """
    k = max(1, math.ceil(weeks / 8))
    return sorted({int(math.floor(i * weeks / k + 0.5)) for i in range(1, k + 1)})



class _Progression:
    """The builder's week-by-week schedule (a mixin: the builder holds the choices it reads)."""

    # --- progression of impact work ----------------------------------------------------
    def _volume(self, level: int) -> tuple[int, int, int]:
        imp = self.tpl.impact
        if level == 0:
            return imp["level0_reps_start"], imp["level0_reps_step"], imp["level0_reps_full"]
        if level == 1:
            return imp["level1_minutes_start"], imp["level1_minutes_step"], imp["level1_minutes_full"]
        target = self.tpl.impacts_target(level)
        return min(imp["impacts_start"], target), imp["impacts_step"], target

    def impact_schedule(self) -> list[tuple[int, int, bool, bool, str, ResistancePhase]]:
        """Per week: (level, volume, step_up, weak_window, impact phase text, resistance phase).

        Impact and resistance are scheduled together: a new or larger stimulus of either
        kind (a step up in impact level, a move to the next resistance phase, and the start
        of the program) opens a window whose weeks 3 to 5 carry no escalation of any kind
        (rule 3; prescribe.safety rule weak_window).  There the impact level, its volume and
        the resistance phase are all held; a resistance phase that is due then starts after
        the window.
        """
        out = []
        hold = self.tpl.impact["hold_weeks_at_full"]
        requested = set(self.options.step_up_weeks) if self.options.step_up_weeks else None
        level, (vol, _, _) = self.start, self._volume(self.start)
        phases = self.phases
        ph_i, ph_weeks = 0, 0
        has_resistance = bool(self.chains or self.back or self.posture)
        starts: list[int] = [1] if (level > 0 or has_resistance) else []
        impact_start = 1 if level > 0 else None  # the last step-up of impact work
        at_full = 0

        def window_pos(w: int) -> int:
            """The largest position (3-5) of week w inside a window, else 0."""
            return max((w - s + 1 for s in starts if in_weak_window(w - s + 1)), default=0)

        for w in range(1, self.options.weeks + 1):
            step_up = False
            pos = window_pos(w)
            if w > 1 and self.hold_volume:
                if requested is not None and w in requested:
                    self._refuse_step(w, "hold_volume", "the screening holds the starting dose until a clinician "
                                      "records the clearance (medical and dietetic review first)")
            elif w > 1:
                asked = requested is not None and w in requested
                if pos:
                    if asked:
                        first = max(s for s in starts if in_weak_window(w - s + 1))
                        self._refuse_step(w, "rule 3", f"week {w} is week {w - first + 1} after the new or larger "
                                          f"stimulus of week {first}: weeks 3 to 5 after it carry no escalation "
                                          "(resorption precedes formation; Eriksen 1986)")
                    # weak window: hold level, volume and resistance phase (rule 3)
                else:
                    _, step, full = self._volume(level)
                    blocked = self.falls and w <= BALANCE_FIRST_WEEKS and level + 1 >= 2
                    ready = vol >= full and at_full >= hold
                    if asked:
                        if level >= self.top:
                            self._refuse_step(w, "rule 1", f"week {w} is already at impact level {level}, the "
                                              f"highest allowed for this person with these exercises")
                        if blocked:
                            self._refuse_step(w, "rule 7", f"falls risk: balance comes first, so impact stays at "
                                              f"low impact until week {BALANCE_FIRST_WEEKS + 1}")
                        if not ready:
                            self._refuse_step(w, "rule 2", f"impact level {level} has not been held at full "
                                              f"volume for {hold} weeks by week {w}")
                    go = asked if requested is not None else (ready and level < self.top and not blocked)
                    if go:
                        level += 1
                        vol = self._volume(level)[0]
                        impact_start, step_up, at_full = w, True, 0
                        starts.append(w)
                    else:
                        vol = min(vol + step, full)
                    due = phases[ph_i].weeks and ph_weeks >= phases[ph_i].weeks and ph_i + 1 < len(phases)
                    if due and not go and requested is None and level < self.top:
                        # Wait (up to PHASE_WAIT_WEEKS) for an impact step-up that is close, so the
                        # two stimuli share one window instead of holding the program twice.
                        _, step, full = self._volume(level)
                        to_ready = (max(0, hold - at_full) if vol >= full
                                    else math.ceil((full - vol) / max(step, 1)) + hold)
                        if to_ready <= PHASE_WAIT_WEEKS and ph_weeks - phases[ph_i].weeks <= PHASE_WAIT_WEEKS \
                                and not (self.falls and w + to_ready <= BALANCE_FIRST_WEEKS):
                            due = False
                    if due and requested is not None and any(w + 2 <= r <= w + 4 for r in requested):
                        due = False  # a step-up the clinician asked for would fall in its window: wait
                    if due:
                        ph_i, ph_weeks = ph_i + 1, 0
                        if not starts or starts[-1] != w:
                            starts.append(w)
            else:
                step_up = level > 0
            ph_weeks += 1
            full = self._volume(level)[2]
            at_full = at_full + 1 if vol >= full else 0
            weak = bool(pos)
            label = IMPACT_LABELS[level]
            if self.hold_volume and w > 1:
                text = f"hold {label} at the starting dose until cleared"
            elif weak:
                text = f"consolidate {label} (remodelling window: no increase)"
            elif step_up:
                text = f"start {label}" if w == 1 else f"step up to {label}"
            elif vol >= full:
                text = f"full volume at {label}"
            else:
                text = f"build {label}"
            out.append((level, vol, step_up, weak, text, phases[ph_i]))
        return out

    def _refuse_step(self, week: int, rule: str, reason: str) -> None:
        raise PlanRequestRefused(rule, f"a step up in week {week} was asked for, but {reason}",
                                 field="step_up_weeks", value=week)

    def resistance_mode(self, week: int, ph: ResistancePhase) -> tuple[ResistancePhase, bool, bool, bool]:
        """(phase, barbell lifts in use, lift practice week, body-weight only) for a week.

        ``ph`` is the phase the joint schedule gives the week (:meth:`impact_schedule`).
        """
        lifts = self.lift_from is not None and week >= self.lift_from
        practice = lifts and self.lift_practice and week < self.lift_loaded_from
        bodyweight = week <= self.bodyweight_until
        return ph, lifts and not bodyweight, practice, bodyweight

    def _time_lifts(self, schedule: list) -> None:
        """Lift practice and body-weight weeks from the scheduled phases (which the weeks 3-5
        rule may have lengthened): practice ends, and body-weight work ends, at a phase change."""
        phases = [row[-1] for row in schedule]
        heavy = [w for w, ph in enumerate(phases, start=1) if ph.pct_1rm is not None and ph.pct_1rm >= LIFT_LOAD_FROM_PCT]
        # A barbell lift comes in LIFT_PRACTICE_WEEKS before its first loaded week, at a light load.
        self.lift_from = max(1, heavy[0] - LIFT_PRACTICE_WEEKS) if heavy else None
        self.lift_loaded_from = heavy[0] if heavy else None  # practice lasts until the lift is loaded
        # A barbell lift is a harder exercise than the form it replaces: never brought in during
        # weeks 3-5 of a window (safety rule weak_window), so its practice starts earlier and lasts longer.
        while self.lift_from is not None and self.lift_from > 1 and schedule[self.lift_from - 1][3]:
            self.lift_from -= 1
        # A next block that starts in a loaded phase continues lifts the person already does
        # (the previous block stood in that phase): no practice weeks again (docs/reassess.md).
        self.lift_practice = not (getattr(self, "continuing", False) and heavy and heavy[0] == 1)
        # Body-weight forms for the frail: the first (technique) phase, and at least 4 weeks.
        self.bodyweight_until = 0
        if self.frail:
            first = self.phases[0]
            technique = (sum(1 for ph in phases if ph is first)
                         if first.pct_1rm is None and first.weeks > 0 else 0)
            self.bodyweight_until = max(FRAIL_BODYWEIGHT_WEEKS, technique)

