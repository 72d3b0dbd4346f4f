"""What every command's handler shares: the exit codes and the warnings printout."""

from __future__ import annotations

import sys

EXIT_OK, EXIT_BREACH, EXIT_BAD_INPUT = 0, 1, 2
#: Exit code after Ctrl-C (128 + SIGINT), as a shell reports it.
EXIT_INTERRUPTED = 130


def warn(scenario, stream=None) -> None:
    """Print the scenario's unusual values (on stderr unless told otherwise)."""
    from ..summary import describe_warnings

    text = describe_warnings(getattr(scenario, "warnings", ()))
    if text:
        print(text, file=stream or sys.stderr)


def study_interrupted() -> int:
    """Say on stderr what a study stopped by Ctrl-C kept, and give its exit code."""
    import sys

    print("Interrupted: the finished cases are in study.csv; the others are marked 'not run'.",
          file=sys.stderr)
    return EXIT_INTERRUPTED
