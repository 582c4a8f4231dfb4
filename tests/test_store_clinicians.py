"""Clinicians' passphrases in the store (revision 0009), on SQLite and PostgreSQL: only a salted
hash is kept, a right passphrase signs in, wrong ones are counted and lock the name for a while,
and a lead's new passphrase replaces the old one.  Invented clinicians only.

The hash is scrypt with the cost parameters its author gives for interactive logins (Percival C.
2009, "Stronger key derivation via sequential memory-hard functions", BSDCan'09: N = 2**14,
r = 8, p = 1).  The lockout after 5 wrong passphrases for 5 minutes is common practice.
"""

from __future__ import annotations

import hashlib
import json
from datetime import datetime, timedelta, timezone

import pytest
from sqlalchemy import create_engine, text

from prescribe.errors import InputError
from prescribe.store import HEAD_REVISION, open_store
from prescribe.store.clinicians import (LOCK_MINUTES, MAX_FAILED_ATTEMPTS, MIN_PASSPHRASE_LEN, SCRYPT_N, SCRYPT_P,
                                        SCRYPT_R, hash_passphrase, passphrase_matches)

PASS = "a long invented passphrase"


def test_the_hash_is_scrypt_of_the_passphrase_with_its_own_salt():
    salt = bytes(range(16))
    scheme, salt_hex, hash_hex = hash_passphrase(PASS, salt)
    # Worked independently with hashlib's scrypt and the published interactive-login parameters (Percival 2009).
    expected = hashlib.scrypt(PASS.encode(), salt=salt, n=2 ** 14, r=8, p=1, dklen=32).hex()
    assert (SCRYPT_N, SCRYPT_R, SCRYPT_P) == (2 ** 14, 8, 1)
    assert hash_hex == expected and salt_hex == salt.hex() and scheme == "scrypt:n=16384,r=8,p=1"
    assert passphrase_matches(PASS, scheme, salt_hex, hash_hex)
    assert not passphrase_matches(PASS + "x", scheme, salt_hex, hash_hex)
    assert not passphrase_matches(PASS, "md5", salt_hex, hash_hex)  # an unknown scheme never matches
    # Two hashes of one passphrase differ: each has a random salt.
    assert hash_passphrase(PASS)[2] != hash_passphrase(PASS)[2]


def test_only_the_salted_hash_is_stored_and_the_right_passphrase_signs_in(new_db):
    where = new_db()
    with open_store(where) as store:
        assert store.revision() == HEAD_REVISION
        out = store.set_passphrase("Dr Ines Vale (invented)", PASS, "Lead Rowe (invented)")
        assert out["clinician"] == "Dr Ines Vale (invented)" and out["set_by"] == "Lead Rowe (invented)"
        ok = store.check_passphrase("Dr Ines Vale (invented)", PASS)
        assert ok.ok and ok.clinician == "Dr Ines Vale (invented)"
        assert store.passphrase_holders() == [{"clinician": "Dr Ines Vale (invented)",
                                               "set_by": "Lead Rowe (invented)", "set_at": out["set_at"]}]
        audit = [a for a in store.audit() if a["action"] == "passphrase_set"]
        assert audit[-1]["clinician"] == "Lead Rowe (invented)"
        assert PASS not in json.dumps(store.audit())  # never in the audit log
    engine = create_engine(where if "://" in where else f"sqlite:///{where}")
    with engine.connect() as conn:
        row = conn.execute(text("SELECT * FROM clinician_passphrases")).mappings().one()
    engine.dispose()
    assert PASS not in json.dumps(dict(row)) and row["scheme"].startswith("scrypt:")


def test_a_wrong_or_unknown_passphrase_is_refused_and_too_many_lock_the_name(new_db):
    with open_store(new_db()) as store:
        store.set_passphrase("Dr Ines Vale (invented)", PASS, "Lead Rowe (invented)")
        assert store.check_passphrase("Somebody Else (invented)", PASS).reason == "unknown"
        now = datetime(2026, 12, 5, 9, 0, tzinfo=timezone.utc)
        lefts = [store.check_passphrase("Dr Ines Vale (invented)", "not the passphrase", now=now)
                 for _ in range(MAX_FAILED_ATTEMPTS)]
        assert [r.reason for r in lefts] == ["wrong"] * (MAX_FAILED_ATTEMPTS - 1) + ["locked"]
        assert [r.attempts_left for r in lefts[:-1]] == list(range(MAX_FAILED_ATTEMPTS - 1, 0, -1))
        # Locked: even the right passphrase is refused until the lock ends...
        assert store.check_passphrase("Dr Ines Vale (invented)", PASS, now=now + timedelta(minutes=1)).reason == \
            "locked"
        # ...and accepted after it.
        later = now + timedelta(minutes=LOCK_MINUTES, seconds=1)
        assert store.check_passphrase("Dr Ines Vale (invented)", PASS, now=later).ok
        actions = [a["action"] for a in store.audit()]
        assert "sign_in_locked" in actions and actions[-1] == "signed_in"


def test_a_lead_replaces_a_passphrase_and_bad_ones_are_refused_naming_what_is_allowed(new_db):
    with open_store(new_db()) as store:
        store.set_passphrase("Dr Ines Vale (invented)", PASS, "Lead Rowe (invented)")
        store.set_passphrase("Dr Ines Vale (invented)", PASS + " changed", "Lead Rowe (invented)")
        assert not store.check_passphrase("Dr Ines Vale (invented)", PASS).ok
        assert store.check_passphrase("Dr Ines Vale (invented)", PASS + " changed").ok
        with pytest.raises(InputError, match=rf"passphrase must be a passphrase of {MIN_PASSPHRASE_LEN} to"):
            store.set_passphrase("Dr Ines Vale (invented)", "short", "Lead Rowe (invented)")
        with pytest.raises(InputError, match="not the clinician's name"):
            store.set_passphrase("Dr Ines Vale (invented)", "Dr Ines Vale (invented)", "Lead Rowe (invented)")
        with pytest.raises(InputError, match="clinician"):
            store.set_passphrase("", PASS, "Lead Rowe (invented)")
        assert len(store.passphrase_holders()) == 1


def test_a_store_at_revision_0008_gains_the_table_and_keeps_its_rows(new_db):
    from test_store import _alembic_upgrade
    where = new_db("old")
    _alembic_upgrade(where, "0008")
    engine = create_engine(where if "://" in where else f"sqlite:///{where}")
    with engine.begin() as conn:
        conn.execute(text("INSERT INTO audit_log (at, action, patient_id, clinician, detail_json) VALUES "
                          "('2026-01-01T00:00:00+00:00', 'db_init', NULL, 'Old (invented)', '{}')"))
    engine.dispose()
    with open_store(where) as store:
        assert store.revision() == "0009"
        assert store.passphrase_holders() == []
        assert any(a["clinician"] == "Old (invented)" for a in store.audit())
        store.set_passphrase("Dr Ines Vale (invented)", PASS, "Lead Rowe (invented)")
        assert store.check_passphrase("Dr Ines Vale (invented)", PASS).ok
