"""Wording shared by the person's and the clinician's pages: impact levels, intensity and
dose in plain words, exercise names, days and week spans.

Every text the person reads goes through the current language (:mod:`..i18n`): English
unless a handout for the person is being rendered in another language.
"""

from __future__ import annotations

import re

from ...catalogue import IMPACT_LEVEL_LABELS
from ...intensity import pct_1rm, rpe_range
from ...languages import N_
from ...plan_schema import PlannedExercise
from ..i18n import gettext as _, ngettext, number, pgettext, translate

DAY_NAMES = ("Monday", "Tuesday", "Wednesday", "Thursday", "Friday", "Saturday", "Sunday")
DAY_SHORT = (N_("Mon"), N_("Tue"), N_("Wed"), N_("Thu"), N_("Fri"), N_("Sat"), N_("Sun"))

#: Our impact scale (PRODUCT.md): the catalogue's labels, with an example for the person.
LEVEL_LABELS = IMPACT_LEVEL_LABELS
LEVEL_EXAMPLES = {0: N_("feet stay on the floor"), 1: N_("like brisk walking"), 2: N_("like skipping or gentle stamps"),
                  3: N_("like jumps and hops")}
LEVEL_WORDS = {level: f"{label} ({LEVEL_EXAMPLES[level]})" for level, label in IMPACT_LEVEL_LABELS.items()}


def level_words(level: int) -> str:
    """"low impact (like brisk walking)" in the current language (:data:`LEVEL_WORDS` in English)."""
    if level not in IMPACT_LEVEL_LABELS:
        return ""
    return _("%(label)s (%(example)s)") % {"label": translate(IMPACT_LEVEL_LABELS[level]),
                                          "example": _(LEVEL_EXAMPLES[level])}


def level_label(level: int) -> str:
    """The impact level's name ("low impact") in the current language."""
    return translate(IMPACT_LEVEL_LABELS.get(level, ""))


def week_range(first: int, last: int) -> str:
    if first == last:
        return _("Week %(week)s") % {"week": first}
    return _("Weeks %(first)s-%(last)s") % {"first": first, "last": last}


def days_text(days: tuple[int, ...]) -> str:
    """"Mon, Wed, Fri" (the days of the week an exercise is done)."""
    return pgettext("list", ", ").join(_(DAY_SHORT[d - 1]) for d in days)


#: How an effort on the 0-10 scale feels, by the talk test (common practice; wording ours).
_EFFORT_FEEL = ((4, N_("you can still talk")), (6, N_("you can talk, but not sing")),
                (8, N_("you can say only a few words")), (10, N_("you cannot talk")))

#: Repetitions most adults can lift at a share of their one-repetition maximum, from the
#: usual %1RM-to-repetitions table (NSCA, Baechle & Earle, Essentials of Strength
#: Training and Conditioning; from memory): at or above each share, about this many.
_REPS_AT_PCT = ((95, 2), (93, 3), (90, 4), (87, 5), (85, 6), (83, 7), (80, 8), (77, 9), (75, 10), (70, 12),
                (65, 15), (60, 20))


def effort_words(low: float, high: float | None = None) -> str:
    """"effort 3 to 4 out of 10: you can still talk" (the person's words for RPE 3-4)."""
    top = high if high is not None else low
    feel = _(next((text for limit, text in _EFFORT_FEEL if top <= limit), _EFFORT_FEEL[-1][1]))
    if high is None or high == low:
        return _("effort %(low)s out of 10: %(feel)s") % {"low": number(low), "feel": feel}
    return _("effort %(low)s to %(high)s out of 10: %(feel)s") % {"low": number(low), "high": number(high),
                                                                   "feel": feel}


def weight_words(pct: float) -> str:
    """A share of the one-repetition maximum in the person's words: what weight to pick."""
    reps = next((n for limit, n in _REPS_AT_PCT if pct >= limit), None)
    if pct >= 100:
        return _("the most you can lift once")
    if reps is None:
        return _("a light weight you could lift more than 20 times")
    return _("a weight you could lift about %(reps)s times, and no more") % {"reps": reps}


def plain_intensity(intensity: str) -> str:
    """An intensity as the person's pages say it: no RPE, no 1RM.

    "RPE 3-4" -> "effort 3 to 4 out of 10: you can still talk"; "80% 1RM" -> "a weight
    you could lift about 8 times, and no more".  Other wording is kept as it is.
    """
    text = (intensity or "").strip()
    aside = _WITH_ASIDE.match(text)  # "RPE 6-7 (about a 12RM load)": both parts in words
    if aside and rpe_range(aside.group(1), whole=True):
        return _("%(effort)s (%(load)s)") % {"effort": plain_intensity(aside.group(1)),
                                             "load": translate(_plain_rm(aside.group(2)))}
    rpe = rpe_range(text, whole=True)  # "RPE 3-4" or "RPE 6" (the Borg CR10 effort scale, 0-10)
    if rpe:
        low, high = rpe
        return effort_words(low, None if high == low else high)
    pct = pct_1rm(text)
    if pct is not None:
        return weight_words(pct)
    return translate(text.replace("maximal", "your hardest"))


#: The planner's high-impact intensity ("maximal controlled effort") in the person's words.
_HARDEST = N_("your hardest controlled effort")


#: An intensity with an aside in brackets: "RPE 6-7 (about a 12RM load)".
_WITH_ASIDE = re.compile(r"^\s*([^(]+?)\s*\((.+)\)\s*$")


#: Repetition-maximum loads in the person's words.
_RM_RANGE = N_("a load you could lift %(low)s to %(high)s times")
_RM_ONE = N_("a load you could lift about %(reps)s times")


def _plain_rm(text: str) -> str:
    """Repetition-maximum loads in words: "an 8-12RM load" -> "a load you could lift 8 to 12 times"."""
    text = re.sub(r"\b(?:an?\s+|about\s+an?\s+)?(\d+)\s*-\s*(\d+)\s*RM\b(?:\s+load)?",
                  lambda m: _RM_RANGE % {"low": m.group(1), "high": m.group(2)}, text)
    return re.sub(r"\b(?:an?\s+|about\s+an?\s+)?(\d+)\s*RM\b(?:\s+load)?",
                  lambda m: _RM_ONE % {"reps": m.group(1)}, text)


def short_name(name: str) -> str:
    """An exercise's name without its bracketed aside: "Hex (trap) bar deadlift" -> "Hex bar deadlift"."""
    return " ".join(re.sub(r"\([^)]*\)|\uff08[^\uff09]*\uff09", "", name).split()) or name


def exercise_name(name: str) -> str:
    """An exercise's name (the catalogue's, in English) in the current language."""
    return translate(name)


def capitalised(text: str) -> str:
    return text[:1].upper() + text[1:]


def sentences(*texts: str) -> str:
    """Sentences one after the other, as the current language joins them ("A. B", "A。B")."""
    return pgettext("sentence join", ". ").join(t for t in texts if t)


def full_stop() -> str:
    """The current language's full stop ("." or "。")."""
    return pgettext("end of sentence", ".")


def dose_text(ex: PlannedExercise) -> str:
    """What and how many, in plain words: "40 landings in 2 bouts of 20"."""
    parts = []
    if ex.impacts:
        if ex.bouts > 1:
            per = ex.impacts / ex.bouts
            per_text = number(per) if per == int(per) else _("about %(num)s") % {"num": round(per)}
            parts.append(_("%(impacts)s landings in %(bouts)s bouts of %(per)s")
                         % {"impacts": ex.impacts, "bouts": ex.bouts, "per": per_text})
        else:
            parts.append(ngettext("%(num)s landing", "%(num)s landings", ex.impacts) % {"num": ex.impacts})
    sets = ngettext("%(num)s set", "%(num)s sets", ex.sets) % {"num": ex.sets} if ex.sets else ""
    if ex.sets and ex.reps:
        parts.append(_("%(sets)s of %(reps)s") % {"sets": sets, "reps": ex.reps})
    elif ex.reps:
        parts.append(ngettext("%(num)s repetition", "%(num)s repetitions", ex.reps) % {"num": ex.reps})
    elif ex.sets and not ex.impacts:
        parts.append(sets)
    if ex.minutes:
        parts.append(ngettext("%(num)s minute", "%(num)s minutes", 1 if ex.minutes == 1 else 2)
                     % {"num": number(ex.minutes)})
    if not ex.impacts and ex.bouts > 1:
        parts.append(_("in %(bouts)s bouts") % {"bouts": ex.bouts})
    text = pgettext("between parts", ", ").join(parts) or _("as shown by your clinician")
    if ex.intensity:
        # A sentence of its own: short sentences read more easily than one long one.
        text = sentences(text, capitalised(plain_intensity(ex.intensity)))
    load = ex.load_kg  # a working load from the logged sessions (docs/sessions.md)
    if load is not None and load > 0:
        text = _("%(text)s: about %(kg)s kg") % {"text": text, "kg": number(load)}
    if ex.supervised:
        text = sentences(text, _("Supervised only: with your clinician or trainer there"))
    return text


def weeks_phrase(weeks: list[int]) -> str:
    """"week 7", "weeks 7 and 15", "weeks 7, 15 and 22"; empty for no weeks."""
    if not weeks:
        return ""
    if len(weeks) == 1:
        return _("week %(week)s") % {"week": weeks[0]}
    return _("weeks %(weeks)s and %(last)s") % {
        "weeks": pgettext("list", ", ").join(str(w) for w in weeks[:-1]), "last": weeks[-1]}


def week_spans(weeks: list[int]) -> str:
    """"weeks 1-7, 12" from a list of week numbers."""
    spans: list[list[int]] = []
    for w in sorted(set(weeks)):
        if spans and spans[-1][1] == w - 1:
            spans[-1][1] = w
        else:
            spans.append([w, w])
    text = pgettext("list", ", ").join(f"{a}" if a == b else f"{a}-{b}" for a, b in spans)
    if len(spans) == 1 and spans[0][0] == spans[0][1]:
        return _("week %(week)s") % {"week": text}
    return _("weeks %(spans)s") % {"spans": text}
