"""The prose of the person's handout pages, as a reader meets it, for reading-level tests.

"Prose lines" are the handout's paragraphs and list items: sentences the person reads.
Table cells (week rows: days, names and counts), chart keys and page headers are not
prose, and are left out: a readability formula counts sentences, and a table row is none.
"""

from __future__ import annotations

import re
from html.parser import HTMLParser

#: Elements whose text is prose; text inside a table or a chart key is not.
PROSE = {"p", "li", "h1", "h2", "h3"}
SKIP = {"table", "svg", "style", "title", "head"}
SKIP_CLASSES = {"legend", "scales", "chart-title"}


class _Prose(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.lines: list[str] = []
        self._stack: list[tuple[str, bool]] = []  # (tag, skipped)
        self._buf: list[str] | None = None
        self._depth = 0

    def _skipping(self) -> bool:
        return any(skip for _, skip in self._stack)

    def handle_starttag(self, tag, attrs):
        if tag in ("br", "img", "meta", "link", "input", "hr"):
            return
        classes = set((dict(attrs).get("class") or "").split())
        self._stack.append((tag, tag in SKIP or bool(classes & SKIP_CLASSES)))
        if tag in PROSE and not self._skipping() and self._buf is None:
            self._buf, self._depth = [], len(self._stack)

    def handle_endtag(self, tag):
        if not self._stack:
            return
        while self._stack:
            open_tag, _ = self._stack.pop()
            if self._buf is not None and len(self._stack) < self._depth:
                text = " ".join("".join(self._buf).split())
                if text:
                    self.lines.append(text)
                self._buf = None
            if open_tag == tag:
                break

    def handle_data(self, data):
        if self._buf is not None and not self._skipping():
            self._buf.append(data)


def prose_lines(html: str) -> list[str]:
    """The person's pages' paragraphs, list items and headings, each as one line of text."""
    body = html.split('<section class="person"', 1)[-1]
    body = body.split('<section class="clinician', 1)[0]
    parser = _Prose()
    parser.feed('<section class="person"' + body)
    return parser.lines


def as_sentences(lines: list[str]) -> str:
    """Lines joined as sentences: a heading or list item without a full stop ends one too."""
    out = []
    for line in lines:
        line = line.strip()
        if not re.search(r"[.!?:;]$", line):
            line += "."
        out.append(line)
    return "\n".join(out)
