"""``python -m celllab``: the same command line as ``celllab``."""

import sys

from celllab.cli.main import main

if __name__ == "__main__":
    sys.exit(main())
