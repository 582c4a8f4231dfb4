"""Clinicians' passphrases (revision 0009): who approves, clears and resumes in the single-user app.

Under JupyterHub the hub's login says who is working.  The single-user app (``prescribe
app``) has no login, and a typed name proves nothing, so the three actions that vouch for
a person or a template (approving a clinic template, recording a clearance, resuming a
paused program) need a clinician signed in with a passphrase that a clinic lead set at the
command line (``prescribe clinician passphrase NAME --clinician LEAD``).

Only a salted hash is stored: scrypt with N = 2**14, r = 8, p = 1 (the parameters its
author gives for interactive logins: Percival C. 2009, "Stronger key derivation via
sequential memory-hard functions", BSDCan'09), a random 16-byte salt per passphrase, and
the scheme written beside the hash so stronger parameters can come later.  After
``MAX_FAILED_ATTEMPTS`` wrong passphrases in a row the name is locked for
``LOCK_MINUTES`` (common practice; NIST SP 800-63B section 5.2.2 asks for a limit on
failed attempts, from memory).
"""

from __future__ import annotations

import hashlib
import hmac
import os
from dataclasses import dataclass
from datetime import datetime, timedelta, timezone

from sqlalchemy import select

from ..errors import InputError
from . import models as m
from .engine import StoreBase, now_utc
from .rows import _audit, _clinician

#: scrypt's cost parameters (Percival 2009, interactive logins) and the length of the hash [bytes].
SCRYPT_N, SCRYPT_R, SCRYPT_P, SCRYPT_DKLEN = 2 ** 14, 8, 1, 32
SCHEME = f"scrypt:n={SCRYPT_N},r={SCRYPT_R},p={SCRYPT_P}"
SALT_BYTES = 16
#: Shortest passphrase accepted (common practice; NIST SP 800-63B asks for at least 8, from memory).
MIN_PASSPHRASE_LEN = 12
MAX_PASSPHRASE_LEN = 1024
#: Wrong passphrases in a row before the name is locked, and for how long (common practice).
MAX_FAILED_ATTEMPTS = 5
LOCK_MINUTES = 5


def _scrypt(passphrase: str, salt: bytes, scheme: str) -> bytes:
    params = dict(part.split("=") for part in scheme.split(":", 1)[1].split(","))
    n, r, p = int(params["n"]), int(params["r"]), int(params["p"])
    return hashlib.scrypt(passphrase.encode("utf-8"), salt=salt, n=n, r=r, p=p, dklen=SCRYPT_DKLEN,
                          maxmem=2 * 128 * r * (n + p + 2))


def hash_passphrase(passphrase: str, salt: bytes | None = None) -> tuple[str, str, str]:
    """(scheme, salt in hex, hash in hex) of ``passphrase``; a fresh random salt unless one is given."""
    salt = os.urandom(SALT_BYTES) if salt is None else salt
    return SCHEME, salt.hex(), _scrypt(passphrase, salt, SCHEME).hex()


def passphrase_matches(passphrase: str, scheme: str, salt_hex: str, hash_hex: str) -> bool:
    """Whether ``passphrase`` hashes to the stored hash (compared in constant time)."""
    if not scheme.startswith("scrypt:"):
        return False
    return hmac.compare_digest(_scrypt(passphrase, bytes.fromhex(salt_hex), scheme).hex(), hash_hex)


def check_passphrase_text(passphrase: object, name: str) -> str:
    """The passphrase if it may be set for ``name``; else an :class:`InputError` naming what is allowed."""
    allowed = (f"a passphrase of {MIN_PASSPHRASE_LEN} to {MAX_PASSPHRASE_LEN} characters that is not the "
               "clinician's name")
    if not isinstance(passphrase, str) or not MIN_PASSPHRASE_LEN <= len(passphrase) <= MAX_PASSPHRASE_LEN \
            or passphrase.strip().casefold() == name.strip().casefold() or not passphrase.strip():
        shown = f"(hidden, {len(passphrase)} characters)" if isinstance(passphrase, str) else passphrase
        raise InputError.single("passphrase", shown, allowed)
    return passphrase


@dataclass(frozen=True)
class SignInResult:
    """What a passphrase check found: ``ok``; else why not (``unknown``, ``wrong``, ``locked``)."""

    ok: bool
    clinician: str
    reason: str = ""            # "" | "unknown" | "wrong" | "locked"
    locked_until: str | None = None
    attempts_left: int | None = None


def _parse_time(text: str | None) -> datetime | None:
    return datetime.fromisoformat(text) if text else None


class CliniciansMixin(StoreBase):
    """Clinicians' passphrases: set by a lead, checked when a clinician signs in."""

    def set_passphrase(self, clinician: str, passphrase: str, set_by: str) -> dict:
        """Set (or replace) ``clinician``'s passphrase; ``set_by`` is the clinic lead who set it.

        Only the salted hash is stored; the audit log records who set whose passphrase, never
        the passphrase.  A replaced passphrase also lifts a lock.  Returns ``{clinician, set_by,
        set_at}``.
        """
        name = _clinician(clinician, required=True).strip()
        lead = _clinician(set_by, required=True).strip()
        check_passphrase_text(passphrase, name)
        scheme, salt_hex, hash_hex = hash_passphrase(passphrase)
        at = now_utc()
        t = m.clinician_passphrases
        with self._write() as conn:
            exists = conn.execute(select(t.c.clinician).where(t.c.clinician == name)).first() is not None
            values = dict(scheme=scheme, salt_hex=salt_hex, hash_hex=hash_hex, set_by=lead, set_at=at,
                          failed_attempts=0, locked_until=None)
            if exists:
                conn.execute(t.update().where(t.c.clinician == name).values(**values))
            else:
                conn.execute(t.insert().values(clinician=name, **values))
            _audit(conn, at, "passphrase_set", None, lead, {"clinician": name, "replaced": exists})
        return {"clinician": name, "set_by": lead, "set_at": at}

    def check_passphrase(self, clinician: str, passphrase: str, *, now: datetime | None = None) -> SignInResult:
        """Check ``clinician``'s passphrase, counting wrong attempts (and locking after too many).

        Never raises for a wrong or unknown name: the result says why the sign-in failed.
        """
        name = (clinician or "").strip() if isinstance(clinician, str) else ""
        if not name or not isinstance(passphrase, str):
            return SignInResult(False, name, "unknown")
        now = now or datetime.now(timezone.utc)
        t = m.clinician_passphrases
        with self._read() as conn:
            row = conn.execute(select(t).where(t.c.clinician == name)).first()
        if row is None:
            return SignInResult(False, name, "unknown")
        locked = _parse_time(row.locked_until)
        if locked is not None and locked > now:
            return SignInResult(False, name, "locked", row.locked_until, 0)
        ok = passphrase_matches(passphrase, row.scheme, row.salt_hex, row.hash_hex)
        at = now.isoformat(timespec="microseconds")
        with self._write() as conn:
            if ok:
                conn.execute(t.update().where(t.c.clinician == name).values(failed_attempts=0, locked_until=None))
                _audit(conn, at, "signed_in", None, name, {})
                return SignInResult(True, name)
            failures = conn.execute(select(t.c.failed_attempts).where(t.c.clinician == name)).scalar() or 0
            failures = (0 if locked is not None else failures) + 1  # a lock that has passed starts a new count
            if failures >= MAX_FAILED_ATTEMPTS:
                until = (now + timedelta(minutes=LOCK_MINUTES)).isoformat(timespec="microseconds")
                conn.execute(t.update().where(t.c.clinician == name).values(failed_attempts=0, locked_until=until))
                _audit(conn, at, "sign_in_locked", None, name, {"failed_attempts": failures, "until": until})
                return SignInResult(False, name, "locked", until, 0)
            conn.execute(t.update().where(t.c.clinician == name).values(failed_attempts=failures, locked_until=None))
            _audit(conn, at, "sign_in_refused", None, name, {"failed_attempts": failures})
        return SignInResult(False, name, "wrong", None, MAX_FAILED_ATTEMPTS - failures)

    def passphrase_holders(self) -> list[dict]:
        """Who may sign in to the single-user app: ``{clinician, set_by, set_at}`` (never a hash)."""
        t = m.clinician_passphrases
        with self._read() as conn:
            rows = conn.execute(select(t.c.clinician, t.c.set_by, t.c.set_at).order_by(t.c.clinician)).all()
        return [{"clinician": r.clinician, "set_by": r.set_by, "set_at": r.set_at} for r in rows]
