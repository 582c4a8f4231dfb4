"""Writing output files so that a reader never sees a partial file and an older file
at the same path is only replaced by a complete new one."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

from .errors import InputError


def write_atomically(path: str | Path, data: str | bytes, field: str = "output file") -> Path:
    """Write ``data`` (text is UTF-8, newlines untouched) to ``path`` in one step.

    The data go to a temporary file in the same folder, which then replaces ``path``;
    on any failure the temporary file is removed and ``path`` is left as it was.
    A folder that cannot be written raises :class:`InputError` naming ``field``.
    """
    target = Path(path)
    payload = data.encode("utf-8") if isinstance(data, str) else data
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".partial",
                                   dir=target.parent if str(target.parent) else ".")
    except OSError as exc:
        raise InputError.single(field, str(path), f"a file in a writable folder ({exc.strerror})") from None
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(payload)
        os.replace(tmp, target)
    finally:
        if os.path.exists(tmp):
            os.unlink(tmp)
    return target
