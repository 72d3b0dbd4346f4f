"""Server-side store of scenarios and planned runs, keyed by random ids.

The browser only ever holds an id (32 hex digits in a ``dcc.Store``); the objects stay
on the server.  Entries live in a `diskcache.Cache` so that a re-plan running in a
background process (Dash's `DiskcacheManager` forks one per job) can hand its result
back to the web process, and the last few objects read are kept unpickled in memory so
that drawing a view never recomputes or reloads what the library already returned.
The startup scenario and plan are pinned in memory and never evicted.
"""

from __future__ import annotations

import re
import threading
import uuid
from collections import OrderedDict
from dataclasses import dataclass, field
from typing import Any

#: What an id from the browser must look like; anything else is refused unread.
ID_PATTERN = re.compile(r"^[0-9a-f]{32}$")
KINDS = ("scenario", "run")


@dataclass
class Entry:
    """One stored object and what the page says about it."""

    value: Any
    meta: dict = field(default_factory=dict)


def valid_id(value: object) -> bool:
    return isinstance(value, str) and bool(ID_PATTERN.match(value))


class PlanStore:
    """Scenarios and `PlanRun` objects by kind and id.

    Parameters
    ----------
    directory : folder of the disk cache (a fresh temporary folder per app).
    size_limit : most bytes kept on disk; the oldest entries go first.
    memory_items : objects kept unpickled in this process.
    """

    def __init__(self, directory: str, size_limit: int = 2**30, memory_items: int = 6):
        import diskcache

        self.directory = directory
        self.size_limit = size_limit
        # culled here, oldest first (diskcache's own cull removes up to ten entries per
        # write, which with a few large plans can drop the one just written)
        self._disk = diskcache.Cache(directory, size_limit=size_limit, cull_limit=0)
        self._pinned: dict[str, Entry] = {}
        self._memo: OrderedDict[str, Entry] = OrderedDict()
        self._memory_items = memory_items
        self._lock = threading.Lock()

    @staticmethod
    def _key(kind: str, item_id: str) -> str:
        if kind not in KINDS:
            raise ValueError(f"unknown kind {kind!r}")
        return f"{kind}:{item_id}"

    def put(self, kind: str, value: Any, meta: dict | None = None, *, pin: bool = False) -> str:
        """Store ``value`` and return its new id."""
        item_id = uuid.uuid4().hex
        entry = Entry(value, dict(meta or {}))
        key = self._key(kind, item_id)
        if pin:
            self._pinned[key] = entry
        else:
            self._disk.set(key, entry)
            self._remember(key, entry)
            self._cull(keep=key)
        return item_id

    def _cull(self, keep: str) -> None:
        """Drop the oldest entries until the cache is within its size limit, never the
        one just written (``keep``)."""
        while self._disk.volume() > self.size_limit and len(self._disk) > 1:
            oldest = next(iter(self._disk), None)
            if oldest is None or oldest == keep:
                break
            self._disk.delete(oldest)

    def get(self, kind: str, item_id: object) -> Entry | None:
        """The entry, or ``None`` for an unknown, evicted or malformed id."""
        if not valid_id(item_id):
            return None
        key = self._key(kind, item_id)  # type: ignore[arg-type]
        if key in self._pinned:
            return self._pinned[key]
        with self._lock:
            if key in self._memo:
                self._memo.move_to_end(key)
                return self._memo[key]
        entry = self._disk.get(key)
        if entry is None:
            return None
        self._remember(key, entry)
        return entry

    def _remember(self, key: str, entry: Entry) -> None:
        with self._lock:
            self._memo[key] = entry
            self._memo.move_to_end(key)
            while len(self._memo) > self._memory_items:
                self._memo.popitem(last=False)

    def close(self) -> None:
        self._disk.close()
