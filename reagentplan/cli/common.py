"""What every command's handler shares: the exit codes and the warnings printout."""

from __future__ import annotations

import sys

EXIT_OK, EXIT_BREACH, EXIT_BAD_INPUT = 0, 1, 2


def warn(scenario, stream=None) -> None:
    """Print the scenario's unusual values (on stderr unless told otherwise)."""
    from ..summary import describe_warnings

    text = describe_warnings(getattr(scenario, "warnings", ()))
    if text:
        print(text, file=stream or sys.stderr)
