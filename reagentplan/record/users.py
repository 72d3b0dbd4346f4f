"""People on the record: named users with a role, and their passwords kept only as slow
salted hashes (Argon2id through ``argon2-cffi``, its default cost: 64 MiB, 3 passes).

Roles, each allowing what the one before allows:

- ``viewer``: every view of the dashboard and ``GET /api/v1/plans/latest``;
- ``coordinator``: also records facts (uploads, ``POST /api/v1/record``), re-plans and
  downloads;
- ``admin``: also manages users.

A record without users keeps the dashboard as it was (loopback, or one shared
password).  `verify` is the one place a password is checked; an unknown name costs the
same hash as a known one, so the time taken does not say which names exist.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import re
import secrets
from dataclasses import dataclass

import sqlalchemy as sa

from ..errors import Problem
from .db import RecordError, require_current, write_transaction
from .models import AppSecret, User

ROLES = ("viewer", "coordinator", "admin")
#: The environment variable a new password is read from (else it is asked for).
PASSWORD_ENV = "REAGENTPLAN_NEW_PASSWORD"
MIN_PASSWORD = 10
MAX_PASSWORD = 1024
_NAME = re.compile(r"^\w[\w.@-]{0,99}$")
U = User.__table__
S = AppSecret.__table__


@dataclass(frozen=True)
class Person:
    """Who is signed in: name, role and a stamp of the password hash (a session made
    before a password change or a removal no longer matches)."""

    name: str
    role: str
    stamp: str

    def may(self, role: str) -> bool:
        return allows(self.role, role)


def allows(role: str, needed: str) -> bool:
    """True when ``role`` may do what ``needed`` may."""
    return role in ROLES and ROLES.index(role) >= ROLES.index(needed)


def _hasher():
    from argon2 import PasswordHasher

    return PasswordHasher()


def _stamp(password_hash: str) -> str:
    return hashlib.sha256(password_hash.encode()).hexdigest()[:16]


def check_name(name: str) -> str:
    name = (name or "").strip()
    if not _NAME.match(name):
        raise RecordError(Problem(None, None, "NAME", f"the name '{name[:120]}'",
                                  "1 to 100 letters, digits, '.', '_', '@' or '-', starting with a "
                                  "letter or digit (no spaces or ':')"), "The command")
    return name


def check_role(role: str) -> str:
    if role not in ROLES:
        raise RecordError(Problem(None, None, "--role", f"the role '{role}'", "one of " + ", ".join(ROLES)),
                          "The command")
    return role


def check_password(password: str, name: str) -> str:
    if password is None or len(password) < MIN_PASSWORD:
        raise RecordError(Problem(None, None, "password", "a password shorter than "
                                  f"{MIN_PASSWORD} characters", f"at least {MIN_PASSWORD} characters"),
                          "The command")
    if len(password) > MAX_PASSWORD:
        raise RecordError(Problem(None, None, "password", f"a password of {len(password)} characters",
                                  f"at most {MAX_PASSWORD} characters"), "The command")
    if password.strip().lower() == name.lower():
        raise RecordError(Problem(None, None, "password", "the password is the user's name",
                                  "a password other than the name"), "The command")
    return password


def hash_password(password: str) -> str:
    return _hasher().hash(password)


def _now() -> dt.datetime:
    return dt.datetime.now(dt.timezone.utc).replace(tzinfo=None)


def add_user(engine, name: str, role: str, password: str) -> None:
    """Add a person; refuses a name already there."""
    require_current(engine)
    name, role = check_name(name), check_role(role)
    hashed = hash_password(check_password(password, name))
    with write_transaction(engine) as conn:
        if conn.execute(sa.select(U.c.id).where(U.c.name == name)).first() is not None:
            raise RecordError(Problem(None, None, "NAME", f"'{name}' is already a user",
                                      "a new name (or `users password NAME` to change the password)"),
                              "The command")
        now = _now()
        conn.execute(sa.insert(U).values(name=name, role=role, password_hash=hashed,
                                         created_at=now, password_changed_at=now))


def _missing(name: str) -> RecordError:
    return RecordError(Problem(None, None, "NAME", f"no user named '{name}'",
                               "a name from `reagentplan users list`"), "The command")


def remove_user(engine, name: str) -> None:
    require_current(engine)
    with write_transaction(engine) as conn:
        if conn.execute(sa.delete(U).where(U.c.name == name)).rowcount == 0:
            raise _missing(name)


def set_password(engine, name: str, password: str) -> None:
    require_current(engine)
    hashed = hash_password(check_password(password, name))
    with write_transaction(engine) as conn:
        done = conn.execute(sa.update(U).where(U.c.name == name)
                            .values(password_hash=hashed, password_changed_at=_now())).rowcount
        if done == 0:
            raise _missing(name)


def list_users(engine) -> list[dict]:
    """Every user: name, role, created_at, password_changed_at (never the hash)."""
    require_current(engine)
    with engine.connect() as conn:
        rows = conn.execute(sa.select(U.c.name, U.c.role, U.c.created_at, U.c.password_changed_at)
                            .order_by(U.c.name)).mappings().all()
    return [dict(r) for r in rows]


def has_users(engine) -> bool:
    """True once the record has at least one user (the dashboard then asks everyone to
    sign in).  A database at an older schema has none."""
    if not sa.inspect(engine).has_table("users"):
        return False
    with engine.connect() as conn:
        return conn.execute(sa.select(U.c.id).limit(1)).first() is not None


def person(engine, name: str) -> Person | None:
    """The user named ``name``, or None."""
    with engine.connect() as conn:
        row = conn.execute(sa.select(U.c.name, U.c.role, U.c.password_hash)
                           .where(U.c.name == name)).first()
    return None if row is None else Person(row.name, row.role, _stamp(row.password_hash))


#: A hash of a password nobody has, checked against when the name is unknown.
_DUMMY: list[str] = []


def verify(engine, name: str, password: str) -> Person | None:
    """The person when ``name`` and ``password`` match, else None (the same work either
    way)."""
    from argon2.exceptions import InvalidHashError, VerificationError

    if not name or not password or len(password) > MAX_PASSWORD or len(name) > 200:
        return None
    with engine.connect() as conn:
        row = conn.execute(sa.select(U.c.name, U.c.role, U.c.password_hash)
                           .where(U.c.name == name)).first()
    hasher = _hasher()
    if row is None:
        if not _DUMMY:
            _DUMMY.append(hasher.hash(secrets.token_urlsafe(16)))
        try:
            hasher.verify(_DUMMY[0], password)
        except VerificationError:
            pass
        return None
    try:
        hasher.verify(row.password_hash, password)
    except (VerificationError, InvalidHashError):
        return None
    return Person(row.name, row.role, _stamp(row.password_hash))


def app_secret(engine, name: str = "session") -> str:
    """A random key kept in the record (made on first use), the same for every
    dashboard process on this record and across restarts."""
    with engine.connect() as conn:
        row = conn.execute(sa.select(S.c.value).where(S.c.name == name)).first()
    if row is not None:
        return row.value
    with write_transaction(engine) as conn:
        row = conn.execute(sa.select(S.c.value).where(S.c.name == name)).first()
        if row is not None:
            return row.value
        value = secrets.token_hex(32)
        conn.execute(sa.insert(S).values(name=name, value=value))
        return value


def os_user() -> str:
    """The operating-system user running this process ("unknown" when there is none)."""
    import getpass

    try:
        return getpass.getuser()
    except Exception:  # no user name in this environment
        return "unknown"


def writer(engine, name: str | None) -> str:
    """Who a command-line write is recorded as: ``name`` (``--user``), which must be a
    user of the record once it has users, else the operating-system user."""
    if name is None:
        return os_user()
    name = check_name(name)
    if has_users(engine) and person(engine, name) is None:
        raise RecordError(Problem(None, None, "--user", f"no user named '{name}'",
                                  "a name from `reagentplan users list`, or leave out --user to be "
                                  "recorded as the operating-system user"), "The command")
    return name
