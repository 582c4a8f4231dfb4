"""Wording shared by the person's and the clinician's pages: impact levels, intensity and
dose in plain words, exercise names, days and week spans."""

from __future__ import annotations

import re

from ...catalogue import IMPACT_LEVEL_LABELS
from ...intensity import pct_1rm, rpe_range
from ...plan_schema import PlannedExercise

DAY_NAMES = ("Monday", "Tuesday", "Wednesday", "Thursday", "Friday", "Saturday", "Sunday")
DAY_SHORT = ("Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun")

#: Our impact scale (PRODUCT.md): the catalogue's labels, with an example for the person.
LEVEL_LABELS = IMPACT_LEVEL_LABELS
LEVEL_EXAMPLES = {0: "feet stay on the floor", 1: "like brisk walking", 2: "like skipping or gentle stamps",
                  3: "like jumps and hops"}
LEVEL_WORDS = {level: f"{label} ({LEVEL_EXAMPLES[level]})" for level, label in IMPACT_LEVEL_LABELS.items()}

def week_range(first: int, last: int) -> str:
    return f"Week {first}" if first == last else f"Weeks {first}-{last}"


def days_text(days: tuple[int, ...]) -> str:
    """"Mon, Wed, Fri" (the days of the week an exercise is done)."""
    return ", ".join(DAY_SHORT[d - 1] for d in days)


#: How an effort on the 0-10 scale feels, by the talk test (common practice; wording ours).
_EFFORT_FEEL = ((4, "you can still talk"), (6, "you can talk, but not sing"), (8, "you can say only a few words"),
                (10, "you cannot talk"))

#: Repetitions most adults can lift at a share of their one-repetition maximum, from the
#: usual %1RM-to-repetitions table (NSCA, Baechle & Earle, Essentials of Strength
#: Training and Conditioning; from memory): at or above each share, about this many.
_REPS_AT_PCT = ((95, 2), (93, 3), (90, 4), (87, 5), (85, 6), (83, 7), (80, 8), (77, 9), (75, 10), (70, 12),
                (65, 15), (60, 20))


def effort_words(low: float, high: float | None = None) -> str:
    """"effort 3 to 4 out of 10: you can still talk" (the person's words for RPE 3-4)."""
    top = high if high is not None else low
    feel = next((text for limit, text in _EFFORT_FEEL if top <= limit), _EFFORT_FEEL[-1][1])
    span = f"{low:g}" if high is None or high == low else f"{low:g} to {high:g}"
    return f"effort {span} out of 10: {feel}"


def weight_words(pct: float) -> str:
    """A share of the one-repetition maximum in the person's words: what weight to pick."""
    reps = next((n for limit, n in _REPS_AT_PCT if pct >= limit), None)
    if pct >= 100:
        return "the most you can lift once"
    if reps is None:
        return "a light weight you could lift more than 20 times"
    return f"a weight you could lift about {reps} times, and no more"


def plain_intensity(intensity: str) -> str:
    """An intensity as the person's pages say it: no RPE, no 1RM.

    "RPE 3-4" -> "effort 3 to 4 out of 10: you can still talk"; "80% 1RM" -> "a weight
    you could lift about 8 times, and no more".  Other wording is kept as it is.
    """
    text = (intensity or "").strip()
    aside = _WITH_ASIDE.match(text)  # "RPE 6-7 (about a 12RM load)": both parts in words
    if aside and rpe_range(aside.group(1), whole=True):
        return f"{plain_intensity(aside.group(1))} ({_plain_rm(aside.group(2))})"
    rpe = rpe_range(text, whole=True)  # "RPE 3-4" or "RPE 6" (the Borg CR10 effort scale, 0-10)
    if rpe:
        low, high = rpe
        return effort_words(low, None if high == low else high)
    pct = pct_1rm(text)
    if pct is not None:
        return weight_words(pct)
    return text.replace("maximal", "your hardest")


#: An intensity with an aside in brackets: "RPE 6-7 (about a 12RM load)".
_WITH_ASIDE = re.compile(r"^\s*([^(]+?)\s*\((.+)\)\s*$")


def _plain_rm(text: str) -> str:
    """Repetition-maximum loads in words: "an 8-12RM load" -> "a load you could lift 8 to 12 times"."""
    text = re.sub(r"\b(?:an?\s+|about\s+an?\s+)?(\d+)\s*-\s*(\d+)\s*RM\b(?:\s+load)?",
                  r"a load you could lift \1 to \2 times", text)
    return re.sub(r"\b(?:an?\s+|about\s+an?\s+)?(\d+)\s*RM\b(?:\s+load)?", r"a load you could lift about \1 times", text)


def short_name(name: str) -> str:
    """An exercise's name without its bracketed aside: "Hex (trap) bar deadlift" -> "Hex bar deadlift"."""
    return " ".join(re.sub(r"\([^)]*\)", "", name).split()) or name


def dose_text(ex: PlannedExercise) -> str:
    """What and how many, in plain words: "40 landings in 2 bouts of 20"."""
    parts = []
    if ex.impacts:
        if ex.bouts > 1:
            per = ex.impacts / ex.bouts
            per_text = f"{per:g}" if per == int(per) else f"about {round(per)}"
            parts.append(f"{ex.impacts} landings in {ex.bouts} bouts of {per_text}")
        else:
            parts.append(f"{ex.impacts} landings")
    sets = f"{ex.sets} set{'' if ex.sets == 1 else 's'}" if ex.sets else ""
    if ex.sets and ex.reps:
        parts.append(f"{sets} of {ex.reps}")
    elif ex.reps:
        parts.append(f"{ex.reps} repetitions")
    elif ex.sets and not ex.impacts:
        parts.append(sets)
    if ex.minutes:
        parts.append(f"{ex.minutes:g} minutes")
    if not ex.impacts and ex.bouts > 1:
        parts.append(f"in {ex.bouts} bouts")
    text = ", ".join(parts) or "as shown by your clinician"
    if ex.intensity:
        # A sentence of its own: short sentences read more easily than one long one.
        words = plain_intensity(ex.intensity)
        text += f". {words[:1].upper()}{words[1:]}"
    load = ex.load_kg  # a working load from the logged sessions (docs/sessions.md)
    if load is not None and load > 0:
        text += f": about {load:g} kg"
    if ex.supervised:
        text += ". Supervised only: with your clinician or trainer there"
    return text


def weeks_phrase(weeks: list[int]) -> str:
    """"week 7", "weeks 7 and 15", "weeks 7, 15 and 22"; empty for no weeks."""
    if not weeks:
        return ""
    if len(weeks) == 1:
        return f"week {weeks[0]}"
    return "weeks " + ", ".join(str(w) for w in weeks[:-1]) + f" and {weeks[-1]}"


def week_spans(weeks: list[int]) -> str:
    """"weeks 1-7, 12" from a list of week numbers."""
    spans: list[list[int]] = []
    for w in sorted(set(weeks)):
        if spans and spans[-1][1] == w - 1:
            spans[-1][1] = w
        else:
            spans.append([w, w])
    text = ", ".join(f"{a}" if a == b else f"{a}-{b}" for a, b in spans)
    return ("week " if len(spans) == 1 and spans[0][0] == spans[0][1] else "weeks ") + text
