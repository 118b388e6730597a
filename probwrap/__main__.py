"""``python -m probwrap``: the command line, as the ``probwrap`` command (where the scripts folder
is not on the PATH, or in a virtual environment that is not activated)."""

import sys

from probwrap.cli import main

if __name__ == "__main__":
    sys.exit(main())
