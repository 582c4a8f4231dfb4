"""The ``prescribe`` command line.

JSON on stdout (a table with ``--table`` where a command offers it), messages on
stderr; exit 0 on success, 2 on bad input, 1 on any other failure; never a bare
traceback (set ``PRESCRIBE_DEBUG=1`` to see one).

Each command lives in its own module of this package with a ``register(subparsers)``
function; ``COMMAND_MODULES`` lists them in the order ``--help`` shows them.
"""

from __future__ import annotations

import argparse
import importlib
import os
import sys
import traceback

from .. import __version__
from ..errors import InputError, PrescribeError

COMMAND_MODULES = (
    "schema_cmd",     # prescribe schema
    "screen_cmd",     # prescribe screen
    "catalogue_cmd",  # prescribe exercises, prescribe dose
    "plan_cmd",       # prescribe plan
    "handout_cmd",    # prescribe handout
    "app_cmd",        # prescribe app
    "store_cmd",      # prescribe db, save, export, import
    "session_cmd",    # prescribe session add|list, prescribe adjust
    "resume_cmd",     # prescribe resume
    "reassess_cmd",   # prescribe reassess, prescribe progress
    "template_cmd",   # prescribe template list|show|check|add|approve|retire|compare
    "caseload_cmd",   # prescribe caseload export|whatif
    "explain_cmd",    # prescribe explain
    "why_cmd",        # prescribe why
    "sensor_cmd",     # prescribe sensor
    "fhir_cmd",       # prescribe fhir import|export
    "clinician_cmd",  # prescribe clinician passphrase|list
)


class _Parser(argparse.ArgumentParser):
    """argparse, but bad options go through our error path (exit 2, message on stderr)."""

    def error(self, message: str) -> None:  # noqa: D401
        self.print_usage(sys.stderr)
        print(f"prescribe: error: {message}", file=sys.stderr)
        raise SystemExit(2)


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="prescribe",
        description="Screening, bone-loading dose figures and graded exercise programs for adults "
                    "with low bone density. Decision support only: a licensed clinician reviews every output.",
    )
    parser.add_argument("--version", action="version", version=f"prescribe {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True
    for name in COMMAND_MODULES:
        importlib.import_module(f"{__name__}.{name}").register(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        # One check for every command's --out: a file path, never a folder.
        from .output import check_out_path
        check_out_path(getattr(args, "out", None))
        result = args.func(args)
        return int(result or 0)
    except InputError as exc:
        print(f"prescribe {args.command}: bad input: {exc}", file=sys.stderr)
        return exc.exit_code
    except PrescribeError as exc:
        print(f"prescribe {args.command}: {exc}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt:
        print("prescribe: interrupted", file=sys.stderr)
        return 1
    except BrokenPipeError:
        return 1
    except Exception as exc:  # never a bare traceback
        if os.environ.get("PRESCRIBE_DEBUG"):
            traceback.print_exc()
        print(f"prescribe {args.command}: internal error ({exc.__class__.__name__}: {exc}). "
              "Set PRESCRIBE_DEBUG=1 to see the details, and please report it.", file=sys.stderr)
        return 1


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
