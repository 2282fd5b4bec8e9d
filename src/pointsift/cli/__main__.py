"""``python -m pointsift.cli``: the same as the ``pointsift`` command."""

import sys

from . import main

if __name__ == "__main__":  # imported (e.g. when collecting doctests) it does nothing
    sys.exit(main())
