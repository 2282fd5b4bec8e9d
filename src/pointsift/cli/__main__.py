"""``python -m pointsift.cli``: the same as the ``pointsift`` command."""

import sys

from . import main

sys.exit(main())
