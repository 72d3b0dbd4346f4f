"""``python -m reagentplan.cli`` runs the same command as ``reagentplan``."""

import sys

from . import main

if __name__ == "__main__":
    sys.exit(main())
