"""Rules that a program is what it says: its figures add up, its exercises are the
catalogue's with the catalogue's figures, its swaps keep the kind of movement, and its
records are its own person's."""

from __future__ import annotations

from typing import Iterator

from .facts import STRENGTH_CATEGORIES, _Facts
from .model import SafetyViolation

SRC_FIGURES = "common practice: a plan's week and session figures are what its exercises add up to"
SRC_CATALOGUE = ("common practice: each exercise's level, force and patterns are the catalogue's, whose "
                 "figures carry their own published sources (docs/catalogue.md)")
SRC_SWAP = ("common practice: a substitute keeps the movement (same category and progression family, one step "
            "harder at most, same dose unit), within the person's limits")


def rule_week_figures(f: _Facts) -> Iterator[SafetyViolation]:
    """A week's impact level is its exercises' highest (the other rules read it)."""
    for wk, top in zip(f.weeks, f.levels):
        if top != wk.impact_level:
            yield SafetyViolation(
                "week_level_matches", wk.week, None,
                f"week {wk.week} says impact level {wk.impact_level} but its exercises reach {top}",
                "the week's impact_level equal to its exercises' highest", SRC_FIGURES)


def rule_impact_counts(f: _Facts) -> Iterator[SafetyViolation]:
    """Session and week impact counts are what the exercises add up to."""
    for wk, s, sf in f.count_mismatch:
        yield SafetyViolation(
            "impact_counts_match", wk.week, None,
            f"week {wk.week} day {s.day}: session impacts {s.impacts} do not add up to the exercises' "
            f"level 2-3 impacts {sf.impacts}", "session impacts equal to the sum of its level 2-3 impacts",
            SRC_FIGURES)
    for wk, largest in zip(f.weeks, f.session_max):
        if largest != wk.impacts_per_session:
            yield SafetyViolation(
                "impact_counts_match", wk.week, None,
                f"week {wk.week}: impacts_per_session {wk.impacts_per_session} is not the largest session's "
                f"{largest}", "impacts_per_session equal to the largest session's impacts", SRC_FIGURES)


def rule_catalogue_match(f: _Facts) -> Iterator[SafetyViolation]:
    """Every exercise is in the catalogue with the catalogue's level, force, category and patterns.

    A hand edit cannot relabel a drop jump as level 0 or drop its patterns: the other
    rules read the plan's figures, so they must be the catalogue's.
    """
    seen: set[int] = set()
    reported: set[str] = set()
    for week, s, x in f.exercises():
        if id(x) in seen:
            continue
        seen.add(id(x))
        e = f.entries.get(x.exercise_id)
        if (e is not None and x.category == e.category and x.impact_level == e.impact_level
                and x.peak_grf_bw == e.peak_grf_bw and x.patterns == e.patterns_list
                and x.directions == e.directions_list):
            continue  # the planner's own copy of the entry
        if e is None:
            if x.exercise_id not in reported:
                reported.add(x.exercise_id)
                yield SafetyViolation("catalogue_match", week, x.exercise_id,
                                      f"{x.exercise_id!r} is not an exercise of the catalogue",
                                      "exercise ids from the catalogue (`prescribe exercises`)", SRC_CATALOGUE)
            continue
        wrong = []
        if x.category != e.category:
            wrong.append(f"category {x.category!r} (catalogue: {e.category!r})")
        if x.impact_level != e.impact_level:
            wrong.append(f"impact level {x.impact_level} (catalogue: {e.impact_level})")
        if abs(x.peak_grf_bw - e.peak_grf_bw) > 1e-6:
            wrong.append(f"peak GRF {x.peak_grf_bw:g} BW (catalogue: {e.peak_grf_bw:g})")
        if set(x.patterns) != e.patterns:
            wrong.append(f"patterns {sorted(x.patterns)} (catalogue: {sorted(e.patterns)})")
        if not set(x.directions) <= e.directions:
            wrong.append(f"directions {sorted(x.directions)} (catalogue: {sorted(e.directions)})")
        if wrong and x.exercise_id not in reported:  # once an exercise, at its first wrong week
            reported.add(x.exercise_id)
            yield SafetyViolation("catalogue_match", week, x.exercise_id,
                                  f"{x.exercise_id} is given {'; '.join(wrong)}",
                                  "the catalogue's own figures for each exercise", SRC_CATALOGUE)


def rule_swap_same_kind(f: _Facts) -> Iterator[SafetyViolation]:
    """A swap keeps the kind of movement and the person's limits."""
    for sw in f.plan.swaps or ():
        old_id, new_id = sw.old, sw.new
        old, new = f.entries.get(old_id), f.entries.get(new_id)
        if old is None or new is None:
            yield SafetyViolation("swap_same_kind", None, new_id,
                                  f"the swap of {old_id} for {new_id} names an exercise the catalogue does not have",
                                  "swaps between catalogue exercises", SRC_SWAP)
            continue
        wrong = []
        if new.category != old.category:
            wrong.append(f"it changes the kind of work from {old.category} to {new.category}")
        elif new.category in STRENGTH_CATEGORIES and new.family != old.family:
            wrong.append(f"{new_id} is another movement than {old_id} (a different progression family)")
        elif new.category in STRENGTH_CATEGORIES and new.depth > old.depth + 1:
            wrong.append(f"{new_id} is {new.depth - old.depth} progression steps harder than {old_id}")
        if new.dose_unit != old.dose_unit and not wrong:
            wrong.append(f"it changes the dose from {old.dose_unit} to {new.dose_unit}")
        if f.limits.spine_sparing and new.category in STRENGTH_CATEGORIES and not new.spine_sparing:
            wrong.append(f"{new_id} is not a spine-sparing variant")
        if new.impact_level > f.limits.cap:
            wrong.append(f"{new_id} is impact level {new.impact_level}, above the cap {f.limits.cap}")
        bad = sorted(new.patterns & f.limits.avoid)
        if bad:
            wrong.append(f"{new_id} involves {', '.join(bad)}")
        if wrong:
            yield SafetyViolation(
                "swap_same_kind", None, new_id, f"swapping {old_id} for {new_id}: " + "; ".join(wrong),
                f"a substitute for {old_id} of the same kind ({old.category}"
                + (f", the {old.family} family, at most one step harder" if old.category in STRENGTH_CATEGORIES
                   else "") + ") within the person's limits", SRC_SWAP)


def rule_same_person(f: _Facts) -> Iterator[SafetyViolation]:
    """The record the plan carries, and the one it is checked against, are the plan's person."""
    for name, rec in (("the plan's record", f.plan.record), ("the stored record", f.record)):
        if rec is not None and rec.patient_id != f.plan.patient_id:
            yield SafetyViolation("same_person", None, None,
                                  f"{name} is {rec.patient_id!r} but the plan is for {f.plan.patient_id!r}",
                                  "a record of the plan's own person", SRC_FIGURES)
