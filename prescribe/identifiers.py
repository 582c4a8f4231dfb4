"""The one check of the characters of an identifier or a name.

Patient ids, clinician names, template and program names and the exercise ids of a session
are shown on screens, printed on handouts, written to CSV and compared with one another.
A NUL or another control character, or an invisible Unicode direction mark (the bidi
overrides and isolates U+202A-U+202E and U+2066-U+2069, the marks U+200E and U+200F) can
make two different ids look the same, or reorder what a reader sees ("NTC-0012" shown for
a different id), so they are refused wherever an identifier is read: every such check
calls :func:`identifier_problem` (or :func:`check_identifier`, or the pydantic validator
:func:`identifier_text`).

Refused: Unicode categories Cc (control characters: NUL, tab, newline, ...), Cf (format
characters: the direction marks, zero-width characters, the byte-order mark), Cs
(surrogates), Co (private use), Zl and Zp (line and paragraph separators).
"""

from __future__ import annotations

import unicodedata
from typing import Any

from .errors import InputError

#: Unicode categories an identifier never holds (see the module docstring).
REFUSED_CATEGORIES = frozenset({"Cc", "Cf", "Cs", "Co", "Zl", "Zp"})

#: What is allowed, in the words every message uses.
IDENTIFIER_CHARACTERS = "without control characters (such as NUL) or invisible direction marks (U+202A-U+202E, " \
                        "U+2066-U+2069, U+200E, U+200F)"


def refused_characters(text: str) -> list[str]:
    """The refused characters of ``text``, each once, as ``U+202E RIGHT-TO-LEFT OVERRIDE``."""
    out: list[str] = []
    for ch in text:
        if unicodedata.category(ch) in REFUSED_CATEGORIES:
            name = unicodedata.name(ch, "") or {"\x00": "NUL"}.get(ch, "control character")
            label = f"U+{ord(ch):04X} {name}".rstrip()
            if label not in out:
                out.append(label)
    return out


def identifier_problem(text: Any) -> str | None:
    """Why ``text`` is not acceptable as an identifier's characters, or None (non-text is left
    to the caller's own type check)."""
    if not isinstance(text, str):
        return None
    found = refused_characters(text)
    if not found:
        return None
    return f"text {IDENTIFIER_CHARACTERS}; it holds " + ", ".join(found)


def check_identifier(value: Any, field: str, source: str | None = None) -> Any:
    """``value`` unchanged, or :class:`InputError` naming ``field``, the value and what is allowed."""
    problem = identifier_problem(value)
    if problem:
        raise InputError.single(field, value, problem, source)
    return value


def identifier_text(value: Any) -> Any:
    """The same check as a pydantic field validator (raises ``ValueError``)."""
    problem = identifier_problem(value)
    if problem:
        raise ValueError(problem)
    return value
