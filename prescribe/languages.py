"""The languages of the person's pages, and the marker of texts written for the person.

The clinic works in English: the clinician's pages, the app and the command line stay in
English.  The person's pages (the handout the person takes home) can be printed in any
language of :data:`LANGUAGES` (``prescribe handout PLAN.json --language es``); the
translations live in ``prescribe/handout/locale/`` (docs/languages.md).

:func:`N_` marks an English text that reaches the person's pages from code outside the
handout (the standard cautions, the planner's cautions and notes, the impact levels'
names): it returns the text unchanged, and the extraction (``make translations``) finds
it so that each language's catalogue must translate it.  A text with figures in it is
written with named placeholders and formatted with ``%``, so the handout can recognise it
and put the same figures into the translation.
"""

from __future__ import annotations

from .errors import InputError

#: Language tags (BCP 47) the person's pages can be printed in; English first (the
#: language the texts are written in and the clinic's own).
LANGUAGES: tuple[str, ...] = ("en", "es", "zh-Hans")
#: The clinic's language: the clinician's pages, the app and the command line.
SOURCE_LANGUAGE = "en"
#: Each language's name, in English (for the clinician) and in itself (for the person).
LANGUAGE_NAMES: dict[str, tuple[str, str]] = {
    "en": ("English", "English"),
    "es": ("Spanish", "Español"),
    "zh-Hans": ("Chinese (Simplified)", "简体中文"),
}


def N_(text: str) -> str:
    """Mark ``text`` as written for the person's pages (translated there); returns it unchanged."""
    return text


def check_language(value, field: str = "language") -> str:
    """The language tag, if it is one of :data:`LANGUAGES`; else an :class:`InputError` naming
    ``field``, the value and the allowed tags."""
    if value not in LANGUAGES:
        raise InputError.single(field, value, "one of " + ", ".join(LANGUAGES))
    return value
