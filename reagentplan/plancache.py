"""Plans kept on disk by the fingerprint of their inputs, so that a plan already made for
the same inputs is read back instead of made again (the dashboard's startup plan).

The key is `reagentplan.record.versions.fingerprint` of what a plan is made from: the
workbook's bytes (or, for the demo station, the demo's parameters: it is built by this
package's code), the record's state when planned from a record (the as-of day and the
last import), the plan settings and the package version.  A plan of another version is
never read back.

The folder is ``$REAGENTPLAN_CACHE`` when set, else the user cache folder:
``$XDG_CACHE_HOME/reagentplan`` (default ``~/.cache/reagentplan``) on Linux and macOS,
``%LOCALAPPDATA%\\reagentplan\\cache`` on Windows.  Each entry is one file written
atomically (`reagentplan.output.write_bytes`) that carries the SHA-256 of its contents;
an entry that is truncated, damaged or unreadable is ignored, removed and made again.
Only the newest `MAX_ENTRIES` entries are kept.

The files are Python pickles: the cache folder must be writable by its user only (it is
created so), as for any user cache.
"""

from __future__ import annotations

import hashlib
import os
import pickle
import threading
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

from . import __version__

#: The environment variable naming the cache folder.
CACHE_ENV = "REAGENTPLAN_CACHE"
#: Entries kept; the least recently used go first (a 365-day plan with 500 futures is
#: about 14 MB).
MAX_ENTRIES = 8
#: First line of every entry; a file without it is not an entry.
MAGIC = b"reagentplan plan cache 1\n"
SUFFIX = ".plan"


def cache_dir(environ=None) -> Path:
    """The cache folder (not created): ``$REAGENTPLAN_CACHE``, else the user cache folder."""
    env = os.environ if environ is None else environ
    if env.get(CACHE_ENV):
        return Path(env[CACHE_ENV]).expanduser()
    if os.name == "nt" and env.get("LOCALAPPDATA"):
        return Path(env["LOCALAPPDATA"]) / "reagentplan" / "cache"
    base = env.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "reagentplan"


def plan_key(source: bytes | str, settings: dict, *, as_of=None, last_import_id: int | None = None) -> str:
    """The fingerprint of a plan's inputs (64 hex digits).

    ``source`` is the workbook's bytes, or a text naming inputs built by this package
    (``"demo station, 365 days"``); ``settings`` the plan settings (futures, seed, solver,
    limits...); ``as_of`` and ``last_import_id`` the record's state when planned from one.
    """
    from .record.versions import fingerprint

    data = source.encode() if isinstance(source, str) else bytes(source)
    return fingerprint(data, as_of, last_import_id,
                       {"settings": dict(settings), "version": __version__})


def _path(key: str, directory: Path) -> Path:
    if not (len(key) == 64 and all(c in "0123456789abcdef" for c in key)):
        raise ValueError(f"not a plan key: {key!r}")
    return directory / f"{key}{SUFFIX}"


def read_entry(key: str, directory: str | os.PathLike | None = None):
    """``(value, meta)`` stored under ``key``, or ``None`` when there is none or it is
    damaged (a damaged entry is removed)."""
    path = _path(key, Path(directory) if directory is not None else cache_dir())
    try:
        raw = path.read_bytes()
    except OSError:
        return None
    try:
        if not raw.startswith(MAGIC):
            raise ValueError("no header")
        digest, _, body = raw[len(MAGIC):].partition(b"\n")
        if hashlib.sha256(body).hexdigest().encode() != digest:
            raise ValueError("contents do not match their digest")
        value, meta = pickle.loads(body)
    except Exception:  # damaged or from an older layout: made again and replaced
        path.unlink(missing_ok=True)
        return None
    try:
        os.utime(path)  # recently used: kept longest
    except OSError:
        pass
    return value, meta


def write_entry(key: str, value, meta: dict, directory: str | os.PathLike | None = None,
                keep: int = MAX_ENTRIES) -> Path:
    """Store ``(value, meta)`` under ``key`` atomically, then drop all but the ``keep``
    most recently used entries."""
    from .output import write_bytes

    folder = Path(directory) if directory is not None else cache_dir()
    folder.mkdir(parents=True, exist_ok=True, mode=0o700)
    body = pickle.dumps((value, dict(meta)), protocol=pickle.HIGHEST_PROTOCOL)
    path = write_bytes(MAGIC + hashlib.sha256(body).hexdigest().encode() + b"\n" + body,
                       _path(key, folder))
    entries = sorted(folder.glob(f"*{SUFFIX}"), key=lambda p: p.stat().st_mtime, reverse=True)
    for old in entries[keep:]:
        if old != path:
            old.unlink(missing_ok=True)
    return path


@dataclass
class PlanProgress:
    """What a plan being made is doing, for another thread to show: each step's text and
    start time [s since the epoch], and how it ended.  Safe to read while written."""

    steps: list[tuple[str, float]] = field(default_factory=list)
    started: float = field(default_factory=time.time)
    finished: float | None = None
    error: str | None = None
    from_cache: bool = False
    _lock: threading.Lock = field(default_factory=threading.Lock, repr=False)

    def say(self, text: str) -> None:
        with self._lock:
            self.steps.append((text, time.time()))

    def finish(self, error: str | None = None) -> None:
        with self._lock:
            self.error = error
            self.finished = time.time()

    @property
    def done(self) -> bool:
        return self.finished is not None

    def snapshot(self) -> dict:
        """A copy to draw: ``steps`` (text, seconds into the start), ``seconds`` so far,
        ``done``, ``error``, ``from_cache``."""
        with self._lock:
            now = self.finished or time.time()
            return {"steps": [(t, s - self.started) for t, s in self.steps],
                    "seconds": now - self.started, "done": self.finished is not None,
                    "error": self.error, "from_cache": self.from_cache}


def plan_in_steps(scenario, settings=None, *, say: Callable[[str], None] | None = None):
    """`reagentplan.pipeline.run_plan` with ``settings`` (a `reagentplan.settings.PlanSettings`,
    default `reagentplan.settings.PLAN`), saying each step as it starts."""
    from .pipeline import FUTURE_FLOWS, plan_with_futures, settings_of

    settings = settings_of(settings)
    say = say or (lambda _text: None)
    fut = None
    if settings.futures > 0:
        from .forecast import sample_futures

        say(f"Sampling {settings.futures} futures of load, coal and weather…")
        fut = sample_futures(scenario, settings.futures, seed=settings.seed, keep=FUTURE_FLOWS)
    say("Solving the plan" + (" and replaying it against the futures…" if fut is not None else "…"))
    return plan_with_futures(scenario, fut, settings)


def cached(key: str, make: Callable[[], object], *, directory: str | os.PathLike | None = None,
           progress: PlanProgress | None = None, use: bool = True):
    """The value stored under ``key``, else ``make()`` stored under it: ``(value, meta)``
    where ``meta`` holds ``made`` (ISO time the value was made), ``seconds`` (how long it
    took) and ``from_cache``.  With ``use`` False nothing is read or written."""
    say = progress.say if progress is not None else (lambda _text: None)
    if use:
        say("Looking for a plan already made from these inputs…")
        hit = read_entry(key, directory)
        if hit is not None:
            if progress is not None:
                progress.from_cache = True
            value, meta = hit
            say(f"Found the plan made at {meta.get('made', '?')}.")
            return value, dict(meta) | {"from_cache": True}
    t0 = time.perf_counter()
    value = make()
    meta = {"made": time.strftime("%Y-%m-%d %H:%M:%S"), "seconds": time.perf_counter() - t0,
            "key": key}
    if use:
        say("Keeping the plan for the next start…")
        try:
            write_entry(key, value, meta, directory)
        except OSError as exc:  # a full or read-only disk costs the next start, not this one
            say(f"Could not keep the plan ({exc.strerror or exc}); it will be made again next time.")
    return value, meta | {"from_cache": False}


__all__ = ["CACHE_ENV", "MAX_ENTRIES", "cache_dir", "plan_key", "read_entry", "write_entry",
           "PlanProgress", "plan_in_steps", "cached"]
