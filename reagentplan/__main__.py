"""``python -m reagentplan`` runs the same command as ``reagentplan``."""

import sys

from .cli import main

if __name__ == "__main__":
    sys.exit(main())
