"""Settings: where the store lives and the clinic's name and contact.

Resolution order for the store: ``--db`` on the command line, then the environment
variable ``PRESCRIBE_DB`` (a path or a database URL), then the default
``~/.local/share/prescribe/prescribe.db`` (``$XDG_DATA_HOME/prescribe/prescribe.db``).

The clinic shown on handouts comes from ``PRESCRIBE_CLINIC_NAME`` and
``PRESCRIBE_CLINIC_CONTACT``, or a TOML file named by ``PRESCRIBE_SETTINGS`` with a
``[clinic]`` table (``name``, ``contact``).  Without either, handouts say the clinic
is not set.
"""

from __future__ import annotations

import os
import tomllib
from dataclasses import dataclass
from pathlib import Path

from .errors import InputError


def default_db_path() -> Path:
    base = os.environ.get("XDG_DATA_HOME") or str(Path.home() / ".local" / "share")
    return Path(base) / "prescribe" / "prescribe.db"


def db_url(explicit: str | None = None) -> str:
    """The SQLAlchemy URL of the store: ``--db``, then ``PRESCRIBE_DB``, then the default."""
    value = explicit or os.environ.get("PRESCRIBE_DB") or str(default_db_path())
    if "://" in value:
        return value
    return "sqlite:///" + str(Path(value).expanduser().resolve())


@dataclass(frozen=True)
class Clinic:
    name: str = "Clinic name not set"
    contact: str = ""


def clinic() -> Clinic:
    name = os.environ.get("PRESCRIBE_CLINIC_NAME")
    contact = os.environ.get("PRESCRIBE_CLINIC_CONTACT")
    path = os.environ.get("PRESCRIBE_SETTINGS")
    if path:
        try:
            data = tomllib.loads(Path(path).read_text(encoding="utf-8"))
        except (OSError, tomllib.TOMLDecodeError) as exc:
            raise InputError.single("PRESCRIBE_SETTINGS", path, f"a readable TOML settings file ({exc})") from None
        table = data.get("clinic", {})
        name = name or table.get("name")
        contact = contact or table.get("contact")
    return Clinic(name=name or Clinic.name, contact=contact or "")
