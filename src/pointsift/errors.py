"""Exception classes raised by pointsift.

Every message says what was wrong, the offending value, and how to fix it.
The command line maps these to exit codes in one place (:mod:`pointsift.cli`).
"""

__all__ = ["PointsiftError", "InputError", "CRSError", "OutputError", "ConfigError", "plain_library_text"]


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


def plain_library_text(exc: BaseException, path=None) -> str:
    """A library's error text without what means nothing to the user: SQL statements,
    advice about the library's own API, driver prefixes, the path again; one line."""
    text = " ".join(str(exc).split())
    if path is not None:
        for form in (f"'{path}'", f'"{path}"', str(path)):
            text = text.replace(form, "the file")
    if " failed: " in text:  # "sqlite3_prepare_v2(SELECT ...) failed: why": keep only why
        text = text.rsplit(" failed: ", 1)[1]
    parts = [p.strip() for p in text.split(";")]
    text = "; ".join(dict.fromkeys(p for p in parts if p))  # "why; why" once
    for marker in (" Use pandas.", " Use ", "It might help to specify", "prefix the file path", " SQL:", "SELECT ", "INSERT ", "CREATE ", "PRAGMA "):
        cut = text.find(marker)
        if cut > 0:
            text = text[:cut]
    text = text.rstrip(" .:;,")
    return (text[:200] + "...") if len(text) > 200 else (text or type(exc).__name__)
