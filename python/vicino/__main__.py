"""``python -m vicino``: the command line of :mod:`vicino.cli`."""

import sys

from .cli import main

if __name__ == "__main__":
    sys.exit(main())
