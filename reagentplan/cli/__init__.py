"""The ``reagentplan`` command.

One module per command (`plan`, `record`, `study`...), each with ``register(sub)``,
which declares its subparser and options, and a handler that only parses, calls the
library and prints.  Options several commands share (``--futures``, ``--time-limit``,
``--seed``, ``--solver``, ``--firm-days``, ``--risk-level``, ``--db``) are declared
once in `reagentplan.cli.options`, their defaults taken from `reagentplan.settings`.
To add a command, add a module here and name it in `COMMANDS`.

Bad input exits with code 2 and a message naming sheet, row and column; a closed
standard output (``reagentplan check WORKBOOK | head -1``) ends quietly.
"""

from __future__ import annotations

import argparse
import os
import sys

from .. import CAUTION, __version__
from ..errors import ScenarioError
from . import (balance, calibrate, check, dashboard, db, demo, diff, forecast, plan, record, rehearse,
               review, study, template, users)
from .common import EXIT_BAD_INPUT, EXIT_BREACH, EXIT_OK

#: The commands in the order ``reagentplan --help`` lists them.
COMMANDS = (demo, template, check, balance, forecast, plan, db, record, diff, review, calibrate, study,
            rehearse, dashboard, users)

#: The exit code when standard output was closed early: Python's own for a broken pipe
#: (the Python documentation, "Note on SIGPIPE", in the signal module).
EXIT_BROKEN_PIPE = 1


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="reagentplan",
        description="Scrubber limestone and byproduct planning for coal-fired stations.",
        epilog=CAUTION,
    )
    parser.add_argument("--version", action="version", version=f"reagentplan {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    for command in COMMANDS:
        command.register(sub)
    return parser


def _stdout_closed() -> int:
    """Standard output was closed by its reader (``| head``): point it at the null
    device so that Python's flush at exit does not complain again, and end quietly."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError):
        pass
    return EXIT_BROKEN_PIPE


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        code = args.func(args)
        sys.stdout.flush()  # a reader that went away is found here, not at exit
        return code
    except BrokenPipeError:
        return _stdout_closed()
    except ScenarioError as exc:
        print(exc.report(), file=sys.stderr)
        print(exc.fix_hint(), file=sys.stderr)
        return EXIT_BAD_INPUT
    except OSError as exc:
        print(f"Could not read or write a file: {exc}. Nothing was written.", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        print("Interrupted; nothing was written.", file=sys.stderr)
        return 130
    except Exception as exc:
        if type(exc).__module__.startswith(("sqlalchemy", "psycopg", "alembic")):
            first = (str(exc).strip().splitlines() or [""])[0]
            print(f"The database refused the operation ({type(exc).__name__}: {first}). "
                  "The transaction was rolled back; nothing was written.", file=sys.stderr)
            return EXIT_BAD_INPUT
        raise


__all__ = ["main", "build_parser", "COMMANDS", "EXIT_OK", "EXIT_BREACH", "EXIT_BAD_INPUT"]
