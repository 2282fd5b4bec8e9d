"""Numbers written for people: no exponent notation, lengths in m or km, plurals that agree.

>>> format_number(14410.2)
'14,410'
>>> format_length(24015.3)
'24 km'
>>> plural(1, "direction")
'1 direction'
"""

from __future__ import annotations

import math
import re
from html import escape

__all__ = ["format_number", "format_length", "plural", "people_text"]


def format_number(value, digits: int = 4) -> str:
    """A number as people write it.

    ``n/a`` for None or non-finite values, ``yes``/``no`` for booleans,
    thousands separators for integers, otherwise ``digits`` significant
    digits written out in full (never ``1.441e+04``): values of 1,000 and
    more are rounded to whole numbers, very small ones keep their leading
    zeros (``0.00012``). Text is escaped for HTML.

    >>> [format_number(v) for v in (None, 12345, 301.74912345, 0.000123456, -2.5e-9, 3968.54)]
    ['n/a', '12,345', '301.7', '0.0001235', '-0.0000000025', '3,969']
    """
    if value is None:
        return "n/a"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return f"{value:,}"
    if isinstance(value, float):
        if not math.isfinite(value):
            return "n/a"
        if value == 0:
            return "0"
        magnitude = abs(value)
        if magnitude >= 10.0 ** (digits - 1) or (magnitude >= 1000 and value == round(value)):
            return f"{value:,.0f}"
        decimals = max(0, digits - 1 - math.floor(math.log10(magnitude)))
        text = f"{value:,.{decimals}f}"
        if "." in text:
            text = text.rstrip("0").rstrip(".")
        return text
    return escape(str(value))


def format_length(metres, *, digits: int = 2) -> str:
    """A distance in ground units: ``850 m``, ``2.4 km``, ``24 km``.

    >>> [format_length(v) for v in (0.5, 850.4, 2400.0, 24015.3, 126000.0)]
    ['0.5 m', '850 m', '2.4 km', '24 km', '126 km']
    """
    if metres is None or not isinstance(metres, (int, float)) or not math.isfinite(metres):
        return "n/a"
    metres = float(metres)
    if abs(metres) >= 1000.0:
        km = metres / 1000.0
        return f"{km:,.0f} km" if abs(km) >= 10 else f"{round(km, 1):g} km"
    if abs(metres) >= 10.0:
        return f"{metres:,.0f} m"
    return f"{float(f'{metres:.{digits}g}'):g} m"


def plural(n: int, word: str, words: str | None = None) -> str:
    """``1 direction``, ``4 directions``, ``1,200 points``."""
    return f"{n:,} {word if n == 1 else (words or word + 's')}"


_EXPONENT = re.compile(r"(?<![\w.])-?\d+(?:\.\d+)?e[+-]?\d+(?![\w.])", re.IGNORECASE)


def people_text(text: str) -> str:
    """Free text from a method with any ``1.441e+04`` written out as ``14,410``.

    >>> people_text("practical range 5.949e+04 beyond the cutoff 2.1e3")
    'practical range 59,490 beyond the cutoff 2,100'
    """
    return _EXPONENT.sub(lambda m: format_number(float(m.group(0))), str(text))
