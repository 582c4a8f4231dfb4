"""Writing results: JSON on stdout, or a plain table with ``--table``."""

from __future__ import annotations

import json
import sys
from typing import Any, Iterable

from pydantic import BaseModel


def to_jsonable(obj: Any) -> Any:
    if isinstance(obj, BaseModel):
        return obj.model_dump(mode="json")
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(o) for o in obj]
    if isinstance(obj, dict):
        return {k: to_jsonable(v) for k, v in obj.items()}
    return obj


def emit_json(obj: Any, stream=None) -> None:
    stream = stream or sys.stdout
    json.dump(to_jsonable(obj), stream, indent=2, ensure_ascii=False, allow_nan=False)
    stream.write("\n")


def emit_table(rows: Iterable[dict], columns: list[str], stream=None) -> None:
    """A fixed-width text table of ``columns`` (lists are joined with commas)."""
    stream = stream or sys.stdout
    rows = [to_jsonable(r) for r in rows]

    def cell(v: Any) -> str:
        if isinstance(v, list):
            return ",".join(str(x) for x in v)
        if v is None:
            return ""
        if isinstance(v, float):
            return f"{v:g}"
        return str(v)

    cells = [[cell(r.get(c)) for c in columns] for r in rows]
    widths = [max([len(c)] + [len(row[i]) for row in cells]) for i, c in enumerate(columns)]
    stream.write("  ".join(c.ljust(w) for c, w in zip(columns, widths)).rstrip() + "\n")
    stream.write("  ".join("-" * w for w in widths) + "\n")
    for row in cells:
        stream.write("  ".join(v.ljust(w) for v, w in zip(row, widths)).rstrip() + "\n")


def check_out_path(value: str | None, option: str = "--out") -> None:
    """Refuse an output path that names an existing folder (InputError naming ``option``).

    The one check of every command's ``--out`` (:func:`prescribe.cli.main` runs it before
    the command), so a folder is never half-written into or reported as a late I/O failure.
    """
    from pathlib import Path

    from ..errors import InputError
    if value is not None and Path(value).expanduser().is_dir():
        raise InputError.single(option, value, f"a file path, not a folder ({value} is a folder)")
