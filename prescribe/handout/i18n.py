"""The person's pages in the person's language: gettext catalogues through Babel.

The texts are written in English; each other language of
:data:`prescribe.languages.LANGUAGES` has a message catalogue in ``locale/<folder>/LC_MESSAGES/``
(``person.po``, compiled to ``person.mo`` by ``make translations``).  While a handout is
rendered, :func:`using` makes one language current (a context variable, so a thread or a
kernel rendering another handout is not disturbed); the content modules and the template
ask the current language for every text:

* :func:`gettext`, :func:`ngettext` (plural forms), :func:`pgettext` (a text with a
  context) for texts written in the handout's own code and template;
* :func:`translate` for an English text that arrives finished: a caution or note the
  planner or a screening rule wrote, an exercise's name and instructions from the
  catalogue.  A text with figures is recognised by its catalogue entry's placeholders
  (``"No jumping for %(weeks)s weeks."``) and the figures are carried over, each in
  the language's number format;
* :func:`number`, :func:`percent` and :func:`long_date` in the language's conventions
  (Babel's CLDR data).

A text without a translation is never dropped and never passed off as translated: it is
printed in English after the language's "(in English)" mark, and recorded
(:attr:`Language.missing`) so that the clinician's page lists it.  The tests fail on any
such text for the planner's plans, and on any catalogue entry left untranslated.
"""

from __future__ import annotations

import contextvars
import datetime as dt
import gettext as _gettext
import io
import re
from contextlib import contextmanager
from dataclasses import dataclass, field
from decimal import Decimal, InvalidOperation
from functools import lru_cache
from pathlib import Path

from ..languages import LANGUAGES, SOURCE_LANGUAGE, N_, check_language

LOCALE_DIR = Path(__file__).with_name("locale")
#: The gettext domain of the person's pages.
DOMAIN = "person"
#: Language tag -> the catalogue's folder under LOCALE_DIR (gettext's locale names).
FOLDERS = {"es": "es", "zh-Hans": "zh_Hans"}
#: Language tag -> the Babel (CLDR) locale of its dates and numbers.  English keeps the
#: day-month-year order the pages have always printed ("20 April 2026").
BABEL_LOCALES = {"en": "en_GB", "es": "es", "zh-Hans": "zh_Hans_CN"}

#: Printed before a text that has no translation yet (itself translated).
IN_ENGLISH = N_("(in English)")

_PLACEHOLDER = re.compile(r"%\((\w+)\)s|%%")
_NUMBER = re.compile(r"-?\d+(?:\.\d+)?")
#: A value that is a name, not words (a template's name, an exercise id): kept as it is.
_IDENTIFIER = re.compile(r"[a-z0-9_@.\-]+")
#: A catalogue entry is used to recognise finished texts only if it has at least this many
#: letters of its own: "%(level)s: %(label)s" would match almost any text.
_MIN_FIXED_LETTERS = 5


def catalogue_path(tag: str, suffix: str = ".po") -> Path:
    return LOCALE_DIR / FOLDERS[tag] / "LC_MESSAGES" / (DOMAIN + suffix)


@lru_cache(maxsize=None)
def _translations(tag: str) -> _gettext.GNUTranslations:
    """The language's compiled catalogue: ``person.mo`` when it is there and newer than
    ``person.po``, else the ``.po`` compiled in memory (a checkout before ``make translations``)."""
    po, mo = catalogue_path(tag), catalogue_path(tag, ".mo")
    if mo.exists() and mo.stat().st_mtime >= po.stat().st_mtime:
        with mo.open("rb") as fp:
            return _gettext.GNUTranslations(fp)
    return _gettext.GNUTranslations(io.BytesIO(compile_po(po)))


def compile_po(po: Path) -> bytes:
    """A ``.po`` file compiled to ``.mo`` bytes with Babel (fuzzy entries left out, as ``pybabel compile``)."""
    from babel.messages.mofile import write_mo
    from babel.messages.pofile import read_po

    with po.open("rb") as fp:
        catalog = read_po(fp)
    out = io.BytesIO()
    write_mo(out, catalog, use_fuzzy=False)
    return out.getvalue()


@lru_cache(maxsize=None)
def revision_date(tag: str) -> dt.date | None:
    """The day the language's catalogue was last revised (its ``PO-Revision-Date``), if recorded."""
    from babel.messages.pofile import read_po

    with catalogue_path(tag).open("rb") as fp:
        revised = read_po(fp).revision_date
    return revised.date() if isinstance(revised, dt.datetime) else revised


def _pattern(msgid: str) -> re.Pattern | None:
    """A regular expression matching ``msgid`` with its ``%(name)s`` placeholders filled in."""
    parts, names, pos = [], set(), 0
    for m in _PLACEHOLDER.finditer(msgid):
        parts.append(re.escape(msgid[pos:m.start()]))
        if m.group(0) == "%%":
            parts.append("%")
        elif m.group(1) in names:
            parts.append(f"(?P={m.group(1)})")
        else:
            names.add(m.group(1))
            parts.append(f"(?P<{m.group(1)}>.+?)")
        pos = m.end()
    if not names:
        return None
    parts.append(re.escape(msgid[pos:]))
    return re.compile(r"\A" + "".join(parts) + r"\Z", re.S)


@dataclass
class Language:
    """One language of the person's pages, and what it could not translate in this rendering."""

    tag: str
    missing: list[str] = field(default_factory=list)

    @property
    def english(self) -> bool:
        return self.tag == SOURCE_LANGUAGE

    @property
    def babel_locale(self) -> str:
        return BABEL_LOCALES[self.tag]

    # -- texts of the handout's own code and template (placeholders not yet filled) ---------
    def gettext(self, msgid: str) -> str:
        if self.english:
            return msgid
        found = _translations(self.tag)._catalog.get(msgid)
        return found if found is not None else self._miss(msgid)

    def ngettext(self, singular: str, plural: str, n: int) -> str:
        if self.english:
            return singular if n == 1 else plural
        t = _translations(self.tag)
        if (singular, 0) not in t._catalog:
            return self._miss(singular if n == 1 else plural)
        return t.ngettext(singular, plural, n)

    def pgettext(self, context: str, msgid: str) -> str:
        if self.english:
            return msgid
        found = _translations(self.tag)._catalog.get(f"{context}\x04{msgid}")
        return found if found is not None else self._miss(msgid)

    def _miss(self, english: str) -> str:
        if english not in self.missing:
            self.missing.append(english)
        mark = _translations(self.tag)._catalog.get(IN_ENGLISH, IN_ENGLISH)
        return f"{mark} {english}"

    # -- finished English texts from elsewhere (cautions, notes, the catalogue) -------------
    def translate(self, text: str) -> str:
        """``text`` in this language (see the module's docstring); English marked and recorded
        when the catalogue has no entry for it."""
        if self.english or not text or not text.strip():
            return text
        found = _translate(self.tag, text)
        return found if found is not None else self._miss(text)

    # -- numbers and dates -------------------------------------------------------------------
    def number(self, value) -> str:
        """A number as the language writes it (``2.5`` -> ``2,5`` in Spanish); English as ``%g``."""
        if self.english:
            return f"{value:g}" if isinstance(value, float) else str(value)
        from babel.numbers import format_decimal
        try:
            return format_decimal(Decimal(str(value)).normalize(), locale=self.babel_locale)
        except InvalidOperation:
            return str(value)

    def percent(self, value: float) -> str:
        """``80`` -> "80%" (English, Chinese), "80 %" (Spanish)."""
        if self.english:
            return f"{value:g}%"
        from babel.numbers import format_percent
        return format_percent(Decimal(str(value)) / 100, locale=self.babel_locale, decimal_quantization=False)

    def long_date(self, day: dt.date) -> str:
        """A day in words: "20 April 2026", "20 de abril de 2026", "2026年4月20日"."""
        from babel.dates import format_date
        return format_date(day, "d MMMM y" if self.english else "long", locale=self.babel_locale)


@lru_cache(maxsize=4096)
def _translate(tag: str, text: str) -> str | None:
    catalog = _translations(tag)._catalog
    found = catalog.get(text)
    if found is not None:
        return found
    for msgid, pattern in _patterns(tag):
        m = pattern.match(text)
        if m is None:
            continue
        values = {}
        for name, value in m.groupdict().items():
            values[name] = _value(tag, value)
            if values[name] is None:
                break
        else:
            try:
                return catalog[msgid] % values
            except (KeyError, ValueError, TypeError):
                continue
    return None


def _value(tag: str, value: str) -> str | None:
    """A figure or phrase taken out of a finished text, in the language (None if it cannot be)."""
    if _NUMBER.fullmatch(value):
        return Language(tag).number(value)
    found = _translate(tag, value)
    if found is not None:
        return found
    return value if _IDENTIFIER.fullmatch(value) else None


@lru_cache(maxsize=None)
def _patterns(tag: str) -> tuple[tuple[str, re.Pattern], ...]:
    """The catalogue's entries with placeholders, as patterns; the longest fixed text first."""
    out = []
    for msgid in _translations(tag)._catalog:
        if isinstance(msgid, str) and "%(" in msgid and "\x04" not in msgid:
            pattern, fixed = _pattern(msgid), sum(ch.isalpha() for ch in _PLACEHOLDER.sub("", msgid))
            if pattern is not None and fixed >= _MIN_FIXED_LETTERS:
                out.append((fixed, msgid, pattern))
    out.sort(key=lambda item: -item[0])
    return tuple((msgid, pattern) for _, msgid, pattern in out)


_current: contextvars.ContextVar[Language] = contextvars.ContextVar("person_language",
                                                                    default=Language(SOURCE_LANGUAGE))


def current() -> Language:
    """The language of the person's pages being rendered (English outside :func:`using`)."""
    return _current.get()


@contextmanager
def using(tag: str | Language = SOURCE_LANGUAGE, field_name: str = "language"):
    """Make ``tag`` the current language while the block runs; yields the :class:`Language`.

    ``tag`` may be a :class:`Language` already in use (its record of missing texts goes on).
    An unknown tag raises :class:`~prescribe.errors.InputError` naming ``field_name``.
    """
    if isinstance(tag, Language):
        language = tag
    else:
        check_language(tag, field_name)
        language = Language(tag)
    token = _current.set(language)
    try:
        yield language
    finally:
        _current.reset(token)


# The content modules' shortcuts: each asks the current language.
def gettext(msgid: str) -> str:
    return current().gettext(msgid)


def ngettext(singular: str, plural: str, n: int) -> str:
    return current().ngettext(singular, plural, n)


def pgettext(context: str, msgid: str) -> str:
    return current().pgettext(context, msgid)


def translate(text: str) -> str:
    return current().translate(text)


def sentence_space() -> str:
    """What goes between two finished sentences: a space, or nothing in Chinese (an empty
    translation would count as none, so the entry is a pattern of two sentences)."""
    return pgettext("two sentences", "%(first)s %(second)s") % {"first": "", "second": ""}


def number(value) -> str:
    return current().number(value)


def percent(value: float) -> str:
    return current().percent(value)


def long_date(day: dt.date) -> str:
    return current().long_date(day)


__all__ = ["BABEL_LOCALES", "DOMAIN", "FOLDERS", "IN_ENGLISH", "LANGUAGES", "LOCALE_DIR", "Language",
           "catalogue_path", "compile_po", "current", "gettext", "long_date", "ngettext", "number", "percent",
           "pgettext", "translate", "using"]
