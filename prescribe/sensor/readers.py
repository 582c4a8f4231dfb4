"""Readers of worn-sensor files: chunks of (time [s], acceleration [g]) for the counter.

* CSV (always available): columns ``time_s, x_g, y_g, z_g``; read in chunks, so a week
  of 100 Hz data (about 60 million rows) is never in memory at once.  ``time_s`` is
  either Unix time (seconds since 1970-01-01 UTC, any value from 946684800, the year
  2000, on) or seconds from the start of the recording.
* Axivity ``.cwa`` and GENEActiv ``.bin`` through scikit-digital-health (MIT), an
  optional extra: ``pip install 'prescribe[sensors]'``.  It reads a whole file at once
  (its own C code); the counting still goes chunk by chunk.  Their timestamps are the
  device's clock, taken as UTC.

Every reader checks what it reads and raises :class:`~prescribe.errors.InputError`
naming the file, the column or the time and what is allowed.
"""

from __future__ import annotations

import io
import os
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Iterator

import numpy as np

from ..errors import FieldProblem, InputError

FORMATS = ("csv", "cwa", "bin")
CSV_COLUMNS = ("time_s", "x_g", "y_g", "z_g")
#: Rows a CSV chunk holds (about 32 MB of float64 per chunk).
CHUNK_ROWS = 1_000_000
INSTALL_HINT = ("reading .cwa and .bin files needs the optional sensor readers: "
                "pip install 'prescribe[sensors]' (scikit-digital-health), or save the recording as a "
                "CSV with columns time_s, x_g, y_g, z_g")


class SensorReaderMissing(InputError):
    """The optional vendor-file reader is not installed (the command line exits 2)."""

    def __init__(self, fmt: str):
        super().__init__([FieldProblem("--format", fmt, INSTALL_HINT)])


@dataclass
class Recording:
    """A file opened for reading: where, what kind, and its chunks."""

    path: Path
    format: str
    chunks: Iterator[tuple[np.ndarray, np.ndarray]]
    declared_rate_hz: float | None = None
    device: dict = field(default_factory=dict)


def detect_format(path: str | os.PathLike, fmt: str | None = None) -> str:
    """The file's format: ``fmt`` when given, else from its suffix."""
    if fmt is not None:
        if fmt not in FORMATS:
            raise InputError.single("--format", fmt, "one of " + ", ".join(FORMATS))
        return fmt
    suffix = Path(path).suffix.lower().lstrip(".")
    if suffix in FORMATS:
        return suffix
    raise InputError.single("FILE", str(path), "a file ending in .csv, .cwa or .bin (or give --format)")


def open_recording(path: str | os.PathLike, fmt: str | None = None, *, chunk_rows: int = CHUNK_ROWS,
                   progress: Callable[[float], None] | None = None) -> Recording:
    """Open a worn-sensor file; its ``chunks`` yield ``(time_s, acc_g)`` arrays.

    ``progress`` is called with the share of the file read so far (0-1).
    """
    kind = detect_format(path, fmt)
    p = Path(path)
    if not p.is_file():
        raise InputError.single("FILE", str(path), "an existing, readable file")
    if kind == "csv":
        return Recording(p, kind, _csv_chunks(p, chunk_rows, progress))
    return _vendor(p, kind, chunk_rows, progress)


def _csv_chunks(path: Path, chunk_rows: int, progress) -> Iterator[tuple[np.ndarray, np.ndarray]]:
    import pandas as pd

    size = max(path.stat().st_size, 1)
    with open(path, "rb") as fh:
        header = fh.readline().decode("utf-8-sig", errors="replace").strip()
        names = [c.strip().strip('"') for c in header.split(",")]
        missing = [c for c in CSV_COLUMNS if c not in names]
        if missing:
            what = ("a time column named time_s (seconds)" if "time_s" in missing
                    else "columns time_s, x_g, y_g, z_g (acceleration in g)")
            raise InputError.single(f"{path.name}: column {missing[0]}", ", ".join(names) or "(no header)", what)
        fh.seek(0)
        try:
            reader = pd.read_csv(fh, usecols=list(CSV_COLUMNS), dtype="float64", chunksize=chunk_rows,
                                 engine="c", skipinitialspace=True, encoding="utf-8-sig")
            row = 0
            for frame in reader:
                values = frame[list(CSV_COLUMNS)].to_numpy()
                row += len(values)
                if progress is not None:
                    progress(min(fh.tell() / size, 1.0))
                yield values[:, 0].copy(), values[:, 1:4].copy()
        except ValueError as exc:
            raise InputError.single(f"{path.name}: row near {row + 2}", str(exc)[:120],
                                    "numbers in every cell of time_s, x_g, y_g, z_g") from None
        except pd.errors.ParserError as exc:
            raise InputError.single(path.name, str(exc)[:120], "a comma-separated file with one header row") from None
    if progress is not None:
        progress(1.0)


def _vendor(path: Path, kind: str, chunk_rows: int, progress) -> Recording:
    try:
        from skdh.io import ReadBin, ReadCwa
    except ImportError:
        raise SensorReaderMissing(kind) from None
    reader = ReadCwa(ext_error="warn") if kind == "cwa" else ReadBin(ext_error="warn")
    if progress is not None:
        progress(0.05)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            data = reader.predict(file=str(path))
        time_s = np.asarray(data["time"], dtype=float)
        acc = np.asarray(data["accel"], dtype=float)
    except InputError:
        raise
    except Exception as exc:  # noqa: BLE001 - any reader failure is an unreadable file
        raise InputError.single("FILE", str(path), f"a readable {kind_name(kind)} file "
                                f"({exc.__class__.__name__}: {str(exc)[:120]})") from None
    if time_s.ndim != 1 or acc.ndim != 2 or acc.shape != (time_s.size, 3) or time_s.size == 0:
        raise InputError.single("FILE", str(path), f"a readable {kind_name(kind)} file with tri-axial samples")
    fs = data.get("fs")
    declared = float(fs) if isinstance(fs, (int, float, np.floating)) and fs else None

    def chunks():
        n = time_s.size
        for start in range(0, n, chunk_rows):
            stop = min(start + chunk_rows, n)
            if progress is not None:
                progress(0.05 + 0.95 * stop / n)
            yield time_s[start:stop], acc[start:stop]

    return Recording(path, kind, chunks(), declared_rate_hz=declared)


def kind_name(kind: str) -> str:
    return {"csv": "CSV", "cwa": "Axivity .cwa", "bin": "GENEActiv .bin"}[kind]


def write_csv(path: str | os.PathLike, time_s, acc_g, decimals: int = 4) -> None:
    """Write a recording as the documented CSV (for tests, demos and conversions)."""
    t = np.asarray(time_s, dtype=float)
    a = np.asarray(acc_g, dtype=float)
    with open(path, "w", encoding="utf-8", newline="\n") as fh:
        fh.write(",".join(CSV_COLUMNS) + "\n")
        buf = io.StringIO()
        np.savetxt(buf, np.column_stack([t, a]), fmt=["%.6f"] + [f"%.{decimals}f"] * 3, delimiter=",")
        fh.write(buf.getvalue())
