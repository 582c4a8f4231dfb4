"""What a handout says, worked out from a plan (no HTML here).

The templates only lay out what these functions return, so the wording and the numbers
can be tested without rendering.  By concern:

- :mod:`.wording`: shared wording (impact levels, intensity and dose in plain words, names, days, weeks);
- :mod:`.weeks`: the plan's figures week by week, the reviews and the cautions (both audiences);
- :mod:`.tables`: the person's week-by-week tables;
- :mod:`.person`: the person's goals, the program at a glance, bouts and the next review;
- :mod:`.guides`: the person's exercise guides, from the catalogue or the plan;
- :mod:`.clinician`: the clinician's dose rows and evidence.
"""

from __future__ import annotations

from .clinician import METHOD_SOURCES_BY_PAGES, dose_rows, evidence
from .guides import IF_HARD_GENERAL, MAX_NOTES, ExerciseGuide, exercise_guides
from .person import DEFAULT_BOUT_GAP_HOURS, AtAGlance, at_a_glance, bout_advice, goals, next_review
from .tables import (COLUMNS, Cell, Line, TableRow, WeekGroup, WeekTable, cells, column_of, routine_rows,
                     week_groups, week_lines, week_table, without_repeats)
from .weeks import WeekFacts, all_cautions, person_cautions, person_name, review_weeks, week_exercises, week_facts
from .wording import (DAY_NAMES, DAY_SHORT, LEVEL_EXAMPLES, LEVEL_LABELS, LEVEL_WORDS, days_text, dose_text,
                      effort_words, pct_1rm, plain_intensity, short_name, week_range, week_spans, weeks_phrase,
                      weight_words)

__all__ = ["AtAGlance", "COLUMNS", "Cell", "DAY_NAMES", "DAY_SHORT", "DEFAULT_BOUT_GAP_HOURS", "ExerciseGuide",
           "IF_HARD_GENERAL", "LEVEL_EXAMPLES", "LEVEL_LABELS", "LEVEL_WORDS", "Line", "MAX_NOTES",
           "METHOD_SOURCES_BY_PAGES", "TableRow", "WeekFacts", "WeekGroup", "WeekTable", "all_cautions",
           "at_a_glance", "person_cautions", "person_name", "bout_advice", "cells", "column_of", "days_text", "dose_rows", "dose_text",
           "effort_words", "evidence", "exercise_guides", "goals", "next_review", "pct_1rm", "plain_intensity",
           "review_weeks", "routine_rows", "short_name", "week_exercises", "week_facts", "week_groups",
           "week_lines", "week_range", "week_spans", "week_table", "weeks_phrase", "weight_words",
           "without_repeats"]
