"""The person's exercise guides: from the exercise catalogue, else from the plan itself."""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from typing import Callable

from ...catalogue import Exercise, default_catalogue
from ...errors import CatalogueError, InputError
from ...plan_schema import Plan
from ...languages import N_
from ..i18n import gettext as _, translate
from .weeks import week_exercises
from .wording import dose_text, exercise_name, full_stop, level_label, sentences, short_name, week_spans

#: Fallback wording when the catalogue has no entry (common practice; wording ours).
_FEEL_FALLBACK = {
    "impact": N_("Firm, quick landings that you feel through your heels and hips, but that do not hurt. "
                 "You may be a little out of breath."),
    "resistance": N_("The last two repetitions of each set feel hard, but you can still keep good form "
                     "and breathe normally."),
    "balance": N_("A little wobbly but in control. Stand next to a kitchen counter or a wall you can hold."),
}
_FEEL_DEFAULT = N_("Comfortable effort: you can still talk in short sentences.")
_IF_HARD_FALLBACK = N_("Do fewer, or go back to last week's amount. Make the movement smaller and slower. "
                       "If it still hurts or you feel unsteady, stop and call the clinic.")


def _catalogue_lookup() -> Callable[[str], Exercise | None]:
    """A function id -> catalogue entry, or None for an id the catalogue does not hold (a
    clinic's own exercise) and for every id when the catalogue cannot be loaded: the guides
    then fall back to the plan's own fields, and the handout still prints."""
    try:
        catalogue = default_catalogue()
    except CatalogueError:
        return lambda _id: None

    def lookup(exercise_id: str) -> Exercise | None:
        try:
            return catalogue.get(exercise_id)
        except InputError:  # not in the catalogue
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

#: Shown once above the exercise guides (common practice; wording ours); in English (the
#: template shows it in the person's language).
IF_HARD_GENERAL = _IF_HARD_FALLBACK


def exercise_guides(plan: Plan, lookup: Callable[[str], Exercise | None] | None = None) -> list[ExerciseGuide]:
    """One guide per exercise of the plan, in order of first appearance.

    ``lookup`` gives an exercise's catalogue entry (or None); the shipped catalogue when omitted.
    """
    lookup = lookup or _catalogue_lookup()
    seen: dict[str, ExerciseGuide] = {}
    notes: dict[str, list[str]] = {}
    for wk in sorted(plan.weeks, key=lambda w: w.week):
        for ex in week_exercises(wk):
            if ex.notes and (note := translate(ex.notes)) not in notes.setdefault(ex.exercise_id, []):
                notes[ex.exercise_id].append(note)
            if ex.exercise_id in seen:
                continue
            entry = lookup(ex.exercise_id)
            how = translate(entry.instructions) if entry is not None and entry.instructions else None
            feel = translate(entry.should_feel) if entry is not None and entry.should_feel else None
            if_hard = None
            if entry is not None and entry.regression:
                easier = lookup(entry.regression)
                if easier is not None:
                    if_hard = _("Do this instead: %(name)s. %(how)s") % {
                        "name": exercise_name(easier.name), "how": translate(easier.instructions)}
                    if not if_hard.endswith(full_stop()):
                        if_hard += full_stop()
                else:
                    if_hard = _("Do the easier version your clinician showed you (%(name)s).") % {
                        "name": entry.regression.replace("_", " ")}
            category = ex.category.lower()
            pose = entry.pose if entry is not None else None
            name = exercise_name(ex.name)
            seen[ex.exercise_id] = ExerciseGuide(
                exercise_id=ex.exercise_id, name=name, category=ex.category,
                level=_("%(level)s: %(label)s") % {"level": ex.impact_level, "label": level_label(ex.impact_level)},
                how_to=how or sentences(_("As your clinician showed you"),
                                        _("%(name)s: %(dose)s.") % {"name": name, "dose": dose_text(ex)}),
                feel=feel or _(_FEEL_FALLBACK.get(category, _FEEL_DEFAULT)),
                if_hard=if_hard or _(_IF_HARD_FALLBACK), notes=(), weeks="",
                drawing=_drawing(pose, _("%(name)s: start and end position") % {"name": short_name(name)})
                if pose is not None else "")
    used: dict[str, list[int]] = {}
    for wk in plan.weeks:
        for ex in week_exercises(wk):
            if wk.week not in used.setdefault(ex.exercise_id, []):
                used[ex.exercise_id].append(wk.week)
    return [ExerciseGuide(**{**g.__dict__, "notes": tuple(notes.get(i, ())[:MAX_NOTES]),
                             "weeks": week_spans(used[i])}) for i, g in seen.items()]


@lru_cache(maxsize=256)
def _drawing(pose, label: str) -> str:
    from ...catalogue.drawings import pose_svg
    return pose_svg(pose, label=label)
