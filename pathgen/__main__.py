"""``python -m pathgen``: the command line (see :mod:`pathgen.cli`)."""

import sys

from .cli import main

if __name__ == "__main__":
    sys.exit(main())
