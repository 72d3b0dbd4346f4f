"""Fit once per scenario: the deterministic balance, the futures and the scheduler all
ask for the same fitted models, so a fit is remembered for as long as its `Scenario`
object lives (scenarios are frozen; a changed scenario is a new object).
"""

from __future__ import annotations

import functools
import threading
import weakref
from collections.abc import Callable
from typing import Any

_lock = threading.Lock()


def per_scenario(steps: Callable[[Any], int]):
    """Decorate ``fn(scenario, progress=None)`` to remember its result per scenario
    object.  ``steps(scenario)`` is how far a remembered result advances ``progress``
    (the tqdm bar the fit would have advanced)."""

    def wrap(fn):
        memory: dict[int, tuple[weakref.ref, Any]] = {}

        @functools.wraps(fn)
        def call(scenario, progress=None):
            key = id(scenario)
            with _lock:
                hit = memory.get(key)
            if hit is not None and hit[0]() is scenario:
                if progress is not None:
                    progress.update(steps(scenario))
                return hit[1]
            result = fn(scenario, progress)

            def forget(_ref, key=key):
                with _lock:
                    memory.pop(key, None)

            with _lock:
                memory[key] = (weakref.ref(scenario, forget), result)
            return result

        call.uncached = fn
        return call

    return wrap
