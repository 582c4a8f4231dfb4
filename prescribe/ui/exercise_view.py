"""The drawing of an exercise's start and end position, beside the program's exercise list.

Shows the exercise chosen in the program section and, when one is chosen, the exercise it
would be swapped for, each drawn from the catalogue's pose data by
:func:`prescribe.catalogue.drawings.pose_svg` (the same drawing the handout prints).
"""

from __future__ import annotations

import html

import ipywidgets as w

from ..catalogue import default_catalogue
from ..catalogue.drawings import pose_svg

STYLE = """<style>
.pr-exercise-drawing .pr-pose { display: inline-block; width: 300px; margin: 4px 16px 4px 0; vertical-align: top; }
.pr-exercise-drawing .pr-pose svg { width: 100%; height: auto; display: block; }
.pr-exercise-drawing .pr-pose-caption { font-size: 14px; color: #000; margin: 2px 0; }
</style>"""


def figure_html(exercise_id: str | None, label: str) -> str:
    """One labelled drawing (``label``: "Exercise", "Swap for"), or "" for no exercise."""
    if not exercise_id:
        return ""
    esc = html.escape
    try:
        entry = default_catalogue().get(exercise_id)
    except Exception:  # noqa: BLE001 - an exercise outside the catalogue: say so, never fail
        entry = None
    if entry is None or entry.pose is None:
        return (f'<div class="pr-pose" data-exercise="{esc(exercise_id)}"><p class="pr-pose-caption">'
                f'{esc(label)}: no drawing for {esc(exercise_id)}</p></div>')
    return (f'<div class="pr-pose" data-exercise="{esc(exercise_id)}">'
            f'<p class="pr-pose-caption"><b>{esc(label)}:</b> {esc(entry.name)}</p>'
            f'{pose_svg(entry.pose, entry.name)}<p class="pr-pose-caption">Start &rarr; End</p></div>')


class ExerciseView:
    """An HTML widget showing the chosen exercise's drawing (and its replacement's)."""

    def __init__(self) -> None:
        self.widget = w.HTML("")
        self.widget.add_class("pr-exercise-drawing")

    def show(self, exercise_id: str | None, replacement_id: str | None = None) -> None:
        figures = figure_html(exercise_id, "Exercise") + figure_html(replacement_id, "Swap for")
        self.widget.value = STYLE + figures if figures else ""
