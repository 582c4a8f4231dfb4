"""``prescribe clinician passphrase NAME --clinician LEAD`` and ``prescribe clinician list``:
a clinic lead sets the passphrase a clinician signs in to the single-user app with.  The
passphrase is read from standard input (never an argument); only a salted hash is stored.
Bad input exits 2 naming the field, the value and what is allowed, and stores nothing.
Invented clinicians only.
"""

from __future__ import annotations

import json

from prescribe.store import open_store

PASS = "a long invented passphrase"


def test_a_lead_sets_a_passphrase_that_then_signs_in(cli, tmp_db):
    out = cli("clinician", "passphrase", "Dr Ines Vale (invented)", "--clinician", "Lead Rowe (invented)",
              "--db", tmp_db, input=PASS + "\n")
    assert out.returncode == 0, out.stderr
    body = json.loads(out.stdout)
    assert body["clinician"] == "Dr Ines Vale (invented)" and body["set_by"] == "Lead Rowe (invented)"
    assert PASS not in out.stdout + out.stderr
    with open_store(tmp_db) as store:
        assert store.check_passphrase("Dr Ines Vale (invented)", PASS).ok
    listed = cli("clinician", "list", "--db", tmp_db)
    assert listed.returncode == 0 and [r["clinician"] for r in json.loads(listed.stdout)] == \
        ["Dr Ines Vale (invented)"]
    table = cli("clinician", "list", "--table", "--db", tmp_db)
    assert "Dr Ines Vale (invented)" in table.stdout and "hash" not in table.stdout


def test_bad_input_exits_2_naming_what_is_allowed_and_stores_nothing(cli, tmp_db):
    short = cli("clinician", "passphrase", "Dr Ines Vale (invented)", "--clinician", "Lead Rowe (invented)",
                "--db", tmp_db, input="short\n")
    assert short.returncode == 2 and "passphrase must be a passphrase of 12 to 1024 characters" in short.stderr
    assert "short" not in short.stderr.replace("(hidden, 5 characters)", "")  # the passphrase is never echoed
    nobody = cli("clinician", "passphrase", "Dr Ines Vale (invented)", "--db", tmp_db, input=PASS + "\n")
    assert nobody.returncode == 2 and "--clinician" in nobody.stderr
    with open_store(tmp_db) as store:
        assert store.passphrase_holders() == []


def test_only_a_clinic_lead_sets_passphrases_when_the_clinic_names_its_leads(cli, tmp_db):
    env = {"PRESCRIBE_CLINIC_LEADS": "Lead Rowe (invented)"}
    refused = cli("clinician", "passphrase", "Dr Ines Vale (invented)", "--clinician", "Dr Ines Vale (invented)",
                  "--db", tmp_db, input=PASS + "\n", env=env)
    assert refused.returncode == 2 and "clinic lead to set passphrase" in refused.stderr
    done = cli("clinician", "passphrase", "Dr Ines Vale (invented)", "--clinician", "Lead Rowe (invented)",
               "--db", tmp_db, input=PASS + "\n", env=env)
    assert done.returncode == 0, done.stderr
