"""pointsift: screen irregularly spaced point measurements before they are mapped or modelled.

The public API is small:

* :func:`screen` - screen a GeoDataFrame, return it with status, score and reasons;
* :func:`screen_frame` - the same with the full :class:`ScreenResult`;
* :func:`screen_file` - read a file, screen it, write a GeoPackage;
* :func:`read_points` - read a point layer as pointsift does;
* :class:`ScreenConfig` - every option;
* the exceptions in :mod:`pointsift.errors`.
"""

import logging

from ._version import __version__

logging.getLogger(__name__).addHandler(logging.NullHandler())

from .config import ScreenConfig  # noqa: E402
from .errors import ConfigError, CRSError, InputError, OutputError, PointsiftError  # noqa: E402
from .io import read_points  # noqa: E402
from .pipeline import ScreenResult, screen, screen_frame  # noqa: E402
from .run import RunResult, screen_file  # noqa: E402

__all__ = [
    "__version__",
    "screen",
    "screen_frame",
    "screen_file",
    "read_points",
    "ScreenConfig",
    "ScreenResult",
    "RunResult",
    "PointsiftError",
    "InputError",
    "CRSError",
    "OutputError",
    "ConfigError",
]
