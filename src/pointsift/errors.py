"""Exception classes raised by pointsift.

Every message says what was wrong, the offending value, and how to fix it.
The command line maps these to exit codes in one place (:mod:`pointsift.cli`).
"""

__all__ = ["PointsiftError", "InputError", "CRSError", "OutputError", "ConfigError"]


class PointsiftError(Exception):
    """Base class of every error pointsift raises on purpose."""


class InputError(PointsiftError, ValueError):
    """The input data cannot be screened as given (exit code 1 on the CLI)."""


class CRSError(InputError):
    """The coordinate reference system is missing, unusable or contradicts the coordinates."""


class OutputError(PointsiftError, OSError):
    """The output cannot be written (exists, collides with input, unwritable)."""


class ConfigError(PointsiftError, ValueError):
    """An option or plan value is invalid (exit code 2 on the CLI)."""
