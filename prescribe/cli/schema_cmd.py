"""``prescribe schema``: the JSON Schema of the patient record."""

from __future__ import annotations

from ..records import record_json_schema
from .output import emit_json


def register(sub) -> None:
    p = sub.add_parser("schema", help="print the JSON Schema of the patient record")
    p.set_defaults(func=run)


def run(args) -> int:
    emit_json(record_json_schema())
    return 0
