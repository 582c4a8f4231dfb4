"""Internal names out of the page: exercise ids, record field names and raw timestamps in plain words.

Messages from the engines name things the way the code does ("start_level 2 is above the
screening's max_impact_level (1)", "back_squat").  Before such a text reaches the page,
:func:`plain` puts the catalogue's exercise names in place of exercise ids, a readable
label in place of a field name and a local date and time in place of an ISO timestamp.
No widgets here.
"""

from __future__ import annotations

import re
from functools import lru_cache

from ..records import FIELD_META

#: Field names the engines use in messages, in the clinician's words (the record's own labels are added).
LABELS: dict[str, str] = {
    "start_level": "start level",
    "max_impact_level": "highest impact level allowed",
    "impacts_per_session": "impacts per session",
    "resistance_intensity_pct_1rm": "strength load (% 1RM)",
    "weekly_osteogenic_index": "weekly osteogenic index",
    "impact_sessions_per_week": "impact sessions a week",
    "resistance_sessions_per_week": "strength sessions a week",
    "balance_sessions_per_week": "balance sessions a week",
    "step_up_weeks": "weeks to step up",
    "based_on_version": "based on version",
    "record_version": "record version",
    "program_version": "program version",
    "patient_id": "person's id",
    "exercise_id": "exercise",
    "new_id": "replacement exercise",
    "old_id": "exercise",
    "weak_window": "weak window",
    "impact_level": "impact level",
    "pain_score": "pain score",
    "bout_gap_hours": "hours between bouts",
    "peak_grf_bw": "peak ground force (times body weight)",
}

_SNAKE = re.compile(r"\b[a-z][a-z0-9]*(?:_[a-z0-9]+)+\b")
_ISO = re.compile(r"\b\d{4}-\d{2}-\d{2}[T ]\d{2}:\d{2}(?::\d{2}(?:\.\d+)?)?(?:Z|[+-]\d{2}:?\d{2})?\b")


@lru_cache(maxsize=1)
def exercise_names() -> dict[str, str]:
    """exercise_id -> name for the whole catalogue (empty when the catalogue is not installed)."""
    try:
        from ..catalogue import default_catalogue
    except ImportError:
        return {}
    return {e.exercise_id: e.name for e in default_catalogue().all()}


def label(name: str) -> str:
    """A readable label for an internal name (an exercise, a record field, a code)."""
    if name in exercise_names():
        return exercise_names()[name]
    if name in LABELS:
        return LABELS[name]
    meta = FIELD_META.get(name)
    if meta and meta.get("label"):
        return str(meta["label"])
    return name.replace("_", " ")  # condition, pattern and other codes read as words


def plain(text: object) -> str:
    """``text`` with exercise ids, snake_case names and ISO timestamps in plain words."""
    from .program_model import readable_time

    out = _ISO.sub(lambda m: readable_time(m.group(0)), str(text))
    names = exercise_names()
    # Ids of one word ("walking", "lunge") are ordinary words already; those with an underscore are not.
    for ex_id in sorted((i for i in names if "_" in i and i in out), key=len, reverse=True):
        out = re.sub(rf"(?<![A-Za-z0-9_]){re.escape(ex_id)}(?![A-Za-z0-9_])", names[ex_id], out)
    out = re.sub(r"'([^']+)'", lambda m: m.group(1) if m.group(1) in names.values() else m.group(0), out)
    return _SNAKE.sub(lambda m: label(m.group(0)), out)


_DATE = re.compile(r"\b\d{4}-\d{2}-\d{2}\b")


def dates_in_words(text: object) -> str:
    """Dates (YYYY-MM-DD) in a sentence of the engines' as the app writes dates ("5 Dec 2026")."""
    from .program_model import readable_date
    return _DATE.sub(lambda m: readable_date(m.group(0)), str(text))


_PATH = re.compile(r"\b([a-z][a-z0-9_]*)((?:\[\d*\])?(?:\.[a-z][a-z0-9_]*)*)")


def field_words(text: object) -> str:
    """A record message with its field paths as the form's labels.

    "age_years must be ... not 12." -> "Age must be ... not 12.";
    "fractures[0].months_ago ..." -> "Fractures (row 1) - months ago ...";
    "t_scores.femoral_neck ..." -> "T scores - femoral neck ...";
    "surgeries[].surgeon_cleared_impact" -> "Surgeries - surgeon cleared impact".  The value and the
    allowed range are kept word for word.
    """
    def one(m: re.Match) -> str:
        head, tail = m.group(1), m.group(2)
        if head not in FIELD_META:
            return m.group(0)
        out = str(FIELD_META[head]["label"])
        row = re.match(r"\[(\d*)\]", tail)
        if row:  # "[2]" is a row of the form's list; "[]" (any row, as the rules write it) names none
            out += f" (row {int(row.group(1)) + 1})" if row.group(1) else ""
            tail = tail[row.end():]
        for part in [p for p in tail.split(".") if p]:
            out += " - " + part.replace("_", " ")
        return out
    return _PATH.sub(one, str(text))
