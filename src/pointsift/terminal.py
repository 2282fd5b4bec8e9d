"""What reaches the terminal: control characters made visible.

Ids, reasons, paths and messages come from the data. An escape sequence in an
id could retitle the terminal or rewrite what is on screen, and a newline
could forge a line of the log ("Wrote /etc/passwd"). Everything the command
line prints goes through :func:`printable`.
"""

from __future__ import annotations

import re

__all__ = ["printable", "echo"]

# C0 controls except none (tab and newline inside one message are escaped too),
# DEL, C1 controls, and the Unicode bidirectional overrides and isolates, which
# reorder what is shown (common practice in terminal-safe logging).
_UNSAFE = re.compile("[\x00-\x1f\x7f-\x9f\u061c\u200e\u200f\u202a-\u202e\u2066-\u2069]")
_NAMED = {"\n": "\\n", "\r": "\\r", "\t": "\\t", "\x1b": "\\x1b"}


def printable(text: object, *, keep_newlines: bool = False) -> str:
    """``text`` with every control character shown as an escape (``\\n``, ``\\x1b``, ``\\u202e``).

    Parameters
    ----------
    text : object
        Anything; converted with ``str``.
    keep_newlines : bool
        Keep line breaks (for multi-line text the program itself composed,
        such as a stem-and-leaf display); every other control is escaped.

    Returns
    -------
    str

    Examples
    --------
    >>> printable("W1\\x1b]0;owned\\x07")
    'W1\\\\x1b]0;owned\\\\x07'
    >>> printable("W2\\nWrote /etc/passwd")
    'W2\\\\nWrote /etc/passwd'
    """
    text = str(text)

    def escape(match: re.Match) -> str:
        char = match.group(0)
        if keep_newlines and char == "\n":
            return char
        if char in _NAMED:
            return _NAMED[char]
        code = ord(char)
        return f"\\x{code:02x}" if code < 0x100 else f"\\u{code:04x}"

    return _UNSAFE.sub(escape, text)


def echo(text: object = "", *, err: bool = False, lines: bool = False) -> None:
    """Print one line with its control characters escaped (ids and reasons come from
    the data); ``lines=True`` keeps the line breaks of text the program composed."""
    import click

    click.echo(printable(text, keep_newlines=lines), err=err)
