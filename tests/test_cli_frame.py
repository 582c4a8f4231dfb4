"""The command-line frame: schema output, exit codes, no bare tracebacks (PRODUCT.md contract)."""

from __future__ import annotations

import json


def test_schema_prints_json_schema(cli):
    res = cli("schema")
    assert res.returncode == 0, res.stderr
    schema = json.loads(res.stdout)
    assert schema["type"] == "object" and "patient_id" in schema["properties"]


def test_unknown_command_exits_2_with_message(cli):
    res = cli("no-such-command")
    assert res.returncode == 2
    assert "invalid choice" in res.stderr and "Traceback" not in res.stderr


def test_version(cli):
    res = cli("--version")
    assert res.returncode == 0 and res.stdout.startswith("prescribe ")
