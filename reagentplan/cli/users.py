"""``reagentplan users add|list|remove|password``: the people who may use the dashboard
and its HTTP interface, with their roles.  A password is read from the environment
variable ``REAGENTPLAN_NEW_PASSWORD`` or asked for (twice) on the terminal, never taken
from the command line, where other users of the machine could read it."""

from __future__ import annotations

import os
import sys

from ..errors import Problem
from .common import EXIT_OK
from .options import add_db


def register(sub) -> None:
    from ..record.users import PASSWORD_ENV, ROLES

    p = sub.add_parser("users", help="people who may use the dashboard and its HTTP interface")
    usub = p.add_subparsers(dest="users_command", required=True, metavar="ACTION")
    q = usub.add_parser("add", help=f"add a person (password from {PASSWORD_ENV} or asked for)")
    q.add_argument("name", metavar="NAME")
    q.add_argument("--role", required=True, choices=ROLES,
                   help="viewer: every view; coordinator: also records facts, re-plans and "
                        "downloads; admin: also manages users")
    add_db(q)
    q.set_defaults(func=add)
    q = usub.add_parser("list", help="every user and role")
    add_db(q)
    q.set_defaults(func=list_)
    q = usub.add_parser("remove", help="remove a person (their sessions end at once)")
    q.add_argument("name", metavar="NAME")
    add_db(q)
    q.set_defaults(func=remove)
    q = usub.add_parser("password", help=f"set a new password (from {PASSWORD_ENV} or asked for)")
    q.add_argument("name", metavar="NAME")
    add_db(q)
    q.set_defaults(func=password)


def new_password(name: str) -> str:
    """The new password: ``REAGENTPLAN_NEW_PASSWORD``, else asked for twice."""
    from ..record.db import RecordError
    from ..record.users import PASSWORD_ENV

    given = os.environ.get(PASSWORD_ENV)
    if given:
        return given
    if not sys.stdin.isatty():
        raise RecordError(Problem(None, None, "password", "no terminal to ask on and no "
                                  f"{PASSWORD_ENV}", f"the password in the environment variable "
                                  f"{PASSWORD_ENV}, or run the command in a terminal"), "The command")
    import getpass

    first = getpass.getpass(f"New password for {name}: ")
    if getpass.getpass("The same again: ") != first:
        raise RecordError(Problem(None, None, "password", "the two passwords differ",
                                  "the same password twice"), "The command")
    return first


def _engine(args):
    from ..record.db import connect

    return connect(args.db)


def add(args) -> int:
    from ..record.users import add_user, check_name

    name = check_name(args.name)
    engine = _engine(args)
    try:
        add_user(engine, name, args.role, new_password(name))
    finally:
        engine.dispose()
    print(f"Added {name} ({args.role}). Once the record has users, the dashboard asks everyone "
          "to sign in.")
    return EXIT_OK


def list_(args) -> int:
    from ..record.users import list_users

    engine = _engine(args)
    try:
        users = list_users(engine)
    finally:
        engine.dispose()
    if not users:
        print("No users: the dashboard on this record needs no sign-in (loopback, or the shared "
              "password).")
        return EXIT_OK
    width = max(len(u["name"]) for u in users)
    print(f"{'name':<{width}}  {'role':<11}  added             password set")
    for u in users:
        print(f"{u['name']:<{width}}  {u['role']:<11}  {u['created_at']:%Y-%m-%d %H:%M}  "
              f"{u['password_changed_at']:%Y-%m-%d %H:%M} UTC")
    return EXIT_OK


def remove(args) -> int:
    from ..record.users import remove_user

    engine = _engine(args)
    try:
        remove_user(engine, args.name)
    finally:
        engine.dispose()
    print(f"Removed {args.name}; their sessions end with their next request.")
    return EXIT_OK


def password(args) -> int:
    from ..record.users import person, set_password

    engine = _engine(args)
    try:
        from ..record.db import require_current

        require_current(engine)
        if person(engine, args.name) is None:
            from ..record.users import _missing

            raise _missing(args.name)
        set_password(engine, args.name, new_password(args.name))
    finally:
        engine.dispose()
    print(f"New password set for {args.name}; their other sessions end with their next request.")
    return EXIT_OK
