"""``prescribe clinician passphrase NAME --clinician LEAD`` and ``prescribe clinician list``.

The single-user app has no login; the three actions that vouch for someone (approving a
clinic template, recording a clearance, resuming a paused program) need a clinician signed
in with a passphrase.  A clinic lead sets each clinician's passphrase here: it is read from
the terminal twice (never shown, never an argument, so it stays out of the shell's history
and the process list), or from the first line of standard input when that is not a
terminal.  Only a salted scrypt hash is stored (prescribe/store/clinicians.py).  ``list``
prints who may sign in, who set their passphrase and when; never a hash.

Under JupyterHub the hub's login says who is working, and no passphrase is needed.
"""

from __future__ import annotations

import getpass
import sys

from ..errors import InputError
from .output import emit_json, emit_table
from .session_cmd import DB_HELP


def register(sub) -> None:
    p = sub.add_parser("clinician", help="clinicians' passphrases for the single-user app (set by a clinic lead)",
                       description="Set a clinician's passphrase (a clinic lead only), or list who may sign "
                                   "in to the single-user app. The passphrase is read from the terminal "
                                   "(twice) or from the first line of standard input; only a salted hash "
                                   "is stored.")
    c = p.add_subparsers(dest="clinician_command", required=True, metavar="passphrase|list")
    q = c.add_parser("passphrase", help="set or replace a clinician's passphrase")
    q.add_argument("name", metavar="NAME", help="the clinician, as they sign in to the app")
    q.add_argument("--clinician", default=None, help="the clinic lead who sets it (required; recorded in the "
                   "audit log)")
    q.add_argument("--db", help=DB_HELP)
    q.set_defaults(func=run_passphrase)
    q = c.add_parser("list", help="who may sign in to the single-user app")
    q.add_argument("--table", action="store_true", help="a plain table instead of JSON")
    q.add_argument("--db", help=DB_HELP)
    q.set_defaults(func=run_list)


def _read_passphrase(name: str) -> str:
    """The new passphrase: typed twice at a terminal, else the first line of standard input."""
    if sys.stdin is not None and sys.stdin.isatty():
        first = getpass.getpass(f"New passphrase for {name}: ")
        second = getpass.getpass("The same again: ")
        if first != second:
            raise InputError.single("passphrase", "(hidden)", "the same passphrase typed twice")
        return first
    line = sys.stdin.readline() if sys.stdin is not None else ""
    return line.rstrip("\r\n")


def run_passphrase(args) -> int:
    from ..settings import current_clinician, require_role
    from ..store import open_store
    from ..store.clinicians import check_passphrase_text
    lead = current_clinician((args.clinician or "").strip() or None)
    if not lead:
        raise InputError.single("--clinician", args.clinician, "the name of the clinic lead who sets the "
                                                               "passphrase (recorded in the audit log)")
    require_role(lead, "set_passphrase")
    name = (args.name or "").strip()
    if not name:
        raise InputError.single("NAME", args.name, "the clinician's name, as they sign in to the app")
    passphrase = check_passphrase_text(_read_passphrase(name), name)  # bad input stops before the store
    with open_store(args.db) as store:
        out = store.set_passphrase(name, passphrase, lead)
        out["db"] = store.where
    emit_json(out)
    return 0


def run_list(args) -> int:
    from ..store import open_store
    with open_store(args.db) as store:
        rows = store.passphrase_holders()
    if args.table:
        emit_table(rows, ["clinician", "set_by", "set_at"])
    else:
        emit_json(rows)
    return 0
