"""Extraction of the person's texts from the data files, for Babel (``make translations``).

The exercise catalogue (names, how to do each exercise, how it should feel), the screening
rules' notes for the person and the planner templates' names and phase names are English texts in
TOML files that reach the person's pages.  ``babel.cfg`` names this extractor for them with
the keys to collect::

    [prescribe.handout.extract:extract_toml: prescribe/data/exercises.toml]
    keys = name instructions should_feel

Every string value under one of ``keys``, at any depth (inline tables and arrays included),
becomes a message of the catalogue, with its line in the file; ``under = TABLE`` looks only
inside that top-level table (the templates' phases, not the templates' own names).
"""

from __future__ import annotations

import tomllib
from typing import Any, Iterator


def _strings(node: Any, keys: set[str], key: str | None = None) -> Iterator[str]:
    if isinstance(node, dict):
        for k, v in node.items():
            yield from _strings(v, keys, k)
    elif isinstance(node, list):
        for item in node:
            yield from _strings(item, keys, key)
    elif isinstance(node, str) and key in keys and node.strip():
        yield node


def extract_toml(fileobj, keywords, comment_tags, options) -> Iterator[tuple[int, str, str, list[str]]]:
    """Babel extraction method: (line, function name, message, comments) for each text."""
    text = fileobj.read().decode("utf-8")
    keys = set((options.get("keys") or "").split())
    lines = text.splitlines()
    data = tomllib.loads(text)
    if options.get("under"):
        data = data.get(options["under"], {})
    seen: set[str] = set()
    for message in _strings(data, keys):
        if message in seen:
            continue
        seen.add(message)
        needle = message[:40]
        lineno = next((i for i, line in enumerate(lines, 1) if needle in line), 0)
        yield lineno, "", message, []
