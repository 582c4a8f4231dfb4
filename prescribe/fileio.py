"""Writing output files so that a reader never sees a partial file and an older file
at the same path is only replaced by a complete new one."""

from __future__ import annotations

import json
import os
import tempfile
from contextlib import contextmanager
from pathlib import Path
from typing import BinaryIO, Iterator

from .errors import InputError


def write_atomically(path: str | Path, data: str | bytes, field: str = "output file") -> Path:
    """Write ``data`` (text is UTF-8, newlines untouched) to ``path`` in one step.

    The data go to a temporary file in the same folder, which then replaces ``path``;
    on any failure the temporary file is removed and ``path`` is left as it was.
    A folder that cannot be written raises :class:`InputError` naming ``field``.
    """
    payload = data.encode("utf-8") if isinstance(data, str) else data
    with open_atomically(path, field) as fh:
        fh.write(payload)
    return Path(path)


@contextmanager
def open_atomically(path: str | Path, field: str = "output file") -> Iterator[BinaryIO]:
    """A binary file to write ``path`` in pieces, put in place in one step when the block ends.

    The pieces go to a temporary file in the same folder, which replaces ``path`` only when
    the ``with`` block ends without an exception; otherwise the temporary file is removed
    and ``path`` is left as it was (a reader never sees a partial file).  A folder that
    cannot be written raises :class:`InputError` naming ``field``.
    """
    target = Path(path)
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".partial",
                                   dir=target.parent if str(target.parent) else ".")
    except OSError as exc:
        raise InputError.single(field, str(path), f"a file in a writable folder ({exc.strerror})") from None
    try:
        with os.fdopen(fd, "wb") as fh:
            yield fh
        os.replace(tmp, target)
    finally:
        if os.path.exists(tmp):
            os.unlink(tmp)


# ---------------------------------------------------------------------------
# Reading JSON: the one reader every JSON input goes through
# ---------------------------------------------------------------------------

#: Largest JSON file read as a patient record or a plan [bytes] (a 52-week plan is about 1 MB).
JSON_MAX_BYTES = 64 * 1024 * 1024
#: Largest export bundle read by ``prescribe import`` [bytes] (a person with many program versions).
BUNDLE_MAX_BYTES = 256 * 1024 * 1024
#: Deepest nesting of objects and lists accepted in a JSON document (a plan nests 8 levels,
#: an export bundle about 12).
JSON_MAX_DEPTH = 64
#: Largest caseload CSV read by ``prescribe screen --batch`` [bytes] (about 2 million people).
CSV_MAX_BYTES = 256 * 1024 * 1024


class _DuplicateKey(Exception):
    def __init__(self, key: str):
        self.key = key


def _no_duplicates(pairs: list[tuple[str, object]]) -> dict:
    """``object_pairs_hook`` that refuses an object naming the same key twice.

    Python's ``json`` keeps the last of two equal keys without a word; a record with
    ``"pain_score"`` twice could then be read with the value the clinician did not see.
    """
    out = dict(pairs)
    if len(out) != len(pairs):
        seen: set[str] = set()
        for key, _ in pairs:
            if key in seen:
                raise _DuplicateKey(key)
            seen.add(key)
    return out


def _depth_exceeds(value: object, limit: int) -> bool:
    """True when objects and lists nest deeper than ``limit`` (iterative: no recursion)."""
    stack = [(value, 1)]
    while stack:
        node, depth = stack.pop()
        if isinstance(node, dict):
            children = node.values()
        elif isinstance(node, list):
            children = node
        else:
            continue
        if depth > limit:
            return True
        stack.extend((child, depth + 1) for child in children if isinstance(child, (dict, list)))
    return False


def check_file_size(path: str | Path, what: str, max_bytes: int) -> None:
    """Refuse a file larger than ``max_bytes`` before reading it (:class:`InputError` naming ``what``).

    A missing or unreadable file is left for the reader to report.
    """
    try:
        size = Path(path).stat().st_size
    except OSError:
        return
    if size > max_bytes:
        raise InputError.single(what, f"{path} ({size} bytes)",
                                f"a file of at most {max_bytes} bytes ({max_bytes // (1024 * 1024)} MiB)")


def parse_json_text(text: str, what: str = "JSON document", max_depth: int = JSON_MAX_DEPTH) -> object:
    """Parse JSON text strictly: no key twice in one object, no nesting past ``max_depth``.

    Raises
    ------
    InputError
        Naming ``what`` and the problem: malformed JSON (line and column), the
        duplicated key, or the nesting depth.
    """
    depth_allowed = f"a JSON document nested at most {max_depth} levels deep"
    try:
        data = json.loads(text, object_pairs_hook=_no_duplicates)
    except _DuplicateKey as dup:
        raise InputError.single(what, f"key {dup.key!r} given twice in one object",
                                "JSON objects that name each key once (with a key given twice, which value "
                                "is meant cannot be known)") from None
    except RecursionError:
        raise InputError.single(what, "nested too deeply to read", depth_allowed) from None
    except json.JSONDecodeError as exc:
        raise InputError.single(what, f"line {exc.lineno}, column {exc.colno}",
                                f"well-formed JSON ({exc.msg})") from None
    if _depth_exceeds(data, max_depth):
        raise InputError.single(what, f"nested more than {max_depth} levels deep", depth_allowed)
    return data


#: How every input file is decoded: UTF-8, a leading byte-order mark dropped (editors on
#: Windows save "UTF-8 with BOM"; the mark is not part of the data).
INPUT_ENCODING = "utf-8-sig"


def decode_text(raw: bytes) -> str:
    """Input bytes as text (:data:`INPUT_ENCODING`); raises ``UnicodeDecodeError`` for non-UTF-8."""
    return raw.decode(INPUT_ENCODING)


def read_text_file(path: str | Path, what: str = "file", kind: str = "text file") -> str:
    """The UTF-8 text of a file (a byte-order mark dropped); a missing, unreadable or non-UTF-8
    file is bad input naming ``what``."""
    try:
        return Path(path).read_text(encoding=INPUT_ENCODING)
    except FileNotFoundError:
        raise InputError.single(what, str(path), f"an existing, readable {'file' if kind == 'text file' else kind}"
                                ) from None
    except (IsADirectoryError, PermissionError, UnicodeDecodeError) as exc:
        raise InputError.single(what, str(path), f"a readable UTF-8 {kind} ({exc.__class__.__name__})") from None


def read_json_file(path: str | Path, what: str = "file", max_bytes: int = JSON_MAX_BYTES,
                   max_depth: int = JSON_MAX_DEPTH) -> object:
    """Read a JSON file, turning every failure into an :class:`InputError` naming ``what``.

    Every JSON input of the tool (patient record, plan, export bundle) is read here:
    a file over ``max_bytes``, a key given twice in one object, nesting deeper than
    ``max_depth`` and malformed JSON are all bad input (the command line exits 2).
    """
    p = Path(path)
    check_file_size(p, what, max_bytes)
    text = read_text_file(p, what)
    try:
        return parse_json_text(text, what, max_depth)
    except InputError as err:
        raise InputError(err.problems, str(path)) from None
