"""Option values: kinds, ranges, lengths with units, and the caller's words.

The machinery behind the option table in :mod:`pointsift.config`: what an
:class:`Option` declares, how a value given as text (command line), TOML
(plan) or Python is converted and checked, and how a message names the option
in its caller's words (:func:`caller`). The table itself, and the configs,
are in :mod:`pointsift.config`.
"""

from __future__ import annotations

import contextvars
import math
import re
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass

from .errors import ConfigError

__all__ = ["Option", "OptionError", "caller", "current_caller", "spell_option", "parse_length", "convert_kind",
           "check_range"]

_LENGTH_UNITS = {
    "": 1.0,
    "m": 1.0,
    "km": 1000.0,
    "ft": 0.3048,
    "mi": 1609.344,
}

_KINDS = ("text", "int", "float", "length", "numbers", "choice", "bool", "texts")


class OptionError(ConfigError):
    """An option's value is wrong; ``option`` names it and ``problem`` says what is wrong,
    without the name (for callers that give the place themselves: click, a plan)."""

    def __init__(self, message: str, option: str | None = None, problem: str | None = None,
                 names: tuple[str, ...] = ()) -> None:
        super().__init__(message)
        self.option = option
        self.problem = problem or message
        #: every option a rule joining options names (first: the one to change)
        self.names = names or ((option,) if option else ())



# --------------------------------------------------------------------------- the caller's words

_CALLER: contextvars.ContextVar[str] = contextvars.ContextVar("pointsift_caller", default="python")
_CALLERS = ("python", "cli", "plan")


@contextmanager
def caller(kind: str) -> Iterator[None]:
    """Name options in messages as ``kind`` does: ``"cli"``, ``"plan"`` or ``"python"`` (the default).

    Examples
    --------
    >>> from pointsift.config import spell
    >>> with caller("cli"):
    ...     spell("k", 8)
    '--neighbours 8'
    >>> spell("k", 8)
    'k=8'
    """
    if kind not in _CALLERS:
        raise ValueError(f"caller {kind!r} is not known; choose one of {', '.join(_CALLERS)}.")
    token = _CALLER.set(kind)
    try:
        yield
    finally:
        _CALLER.reset(token)


def current_caller() -> str:
    """``"python"``, ``"cli"`` or ``"plan"``: whose words messages use now."""
    return _CALLER.get()


def spell_option(option: "Option | None", name: str, example=None) -> str:
    """``name`` (declared by ``option``, or None) as the current caller writes it; see :func:`pointsift.config.spell`."""
    kind = _CALLER.get()
    if kind == "cli":
        flag = "--" + (option.flag if option is not None else name.replace("_", "-"))
        return flag if example is None or example is True else f"{flag} {example}"
    if kind == "plan":
        if example is None:
            return name
        shown = f'"{example}"' if isinstance(example, str) else str(example).lower() if isinstance(example, bool) else str(example)
        return f"{name} = {shown}"
    return f"{name}=" if example is None else f"{name}={example!r}"




@dataclass(frozen=True)
class Option:
    """One option, declared once.

    Attributes
    ----------
    name : str
        Python keyword and plan key.
    kind : str
        ``text``, ``texts`` (a list of text), ``int``, ``float``, ``length``
        (metres; text with a unit such as ``"5km"`` accepted), ``numbers``
        (a list of numbers), ``choice``, ``bool``.
    help : str
        One line for ``--help``; the default is added from ``default_text``.
    default : object
        Value when the option is not given (None: not set, or derived).
    default_text : str, optional
        How ``--help`` states the default (e.g. "from the spacing").
    config : str or None
        The config holding it: ``"screen"`` (:class:`ScreenConfig`),
        ``"describe"`` (:class:`DescribeConfig`), ``"report"``
        (:class:`ReportConfig`), ``"campaign"``
        (:class:`pointsift.campaigns.CampaignConfig`) or None (read by the
        command itself: layer, coordinate columns, batch settings).
    commands : tuple of str
        Commands offering it on the command line.
    plan : tuple of str
        Plan tables accepting it as a key: ``"batch"``, ``"defaults"``, ``"input"``.
    flag : str, optional
        Command-line flag without the dashes (default: the name with dashes).
    dest : str, optional
        Parameter name of the click command function (default: the name).
    minimum, maximum : float, optional
        Range; ``min_open`` / ``max_open`` exclude the bound itself.
    choices : tuple, optional
        Valid values of a ``choice``.
    required : tuple of str
        Commands where the command line must give it.
    multiple : bool
        The flag may be repeated (a list).
    nonempty : bool
        A list must hold at least one item.
    metavar : str, optional
        Placeholder in ``--help`` (default from the kind).
    short : str, optional
        One-letter alias of the flag (``-j``).
    """

    name: str
    kind: str
    help: str
    default: object = None
    default_text: str | None = None
    config: str | None = "screen"
    commands: tuple[str, ...] = ("screen", "describe", "batch", "campaigns")
    plan: tuple[str, ...] = ("defaults", "input")
    flag: str | None = None
    dest: str | None = None
    minimum: float | None = None
    maximum: float | None = None
    min_open: bool = False
    max_open: bool = False
    choices: tuple | None = None
    required: tuple[str, ...] = ()
    multiple: bool = False
    nonempty: bool = False
    metavar: str | None = None
    short: str | None = None

    def __post_init__(self) -> None:
        if self.kind not in _KINDS:
            raise ValueError(f"option {self.name}: kind {self.kind!r} is not one of {', '.join(_KINDS)}")
        if self.flag is None:
            object.__setattr__(self, "flag", self.name.replace("_", "-"))
        if self.dest is None:
            object.__setattr__(self, "dest", self.name)

    def help_text(self) -> str:
        """The ``--help`` line, with the default."""
        if self.default_text is not None:
            return f"{self.help} (default {self.default_text})."
        if self.default is None or self.kind == "bool":
            return f"{self.help}."
        shown = ",".join(f"{v:g}" for v in self.default) if self.kind == "numbers" else (
            f"{self.default:g}" if isinstance(self.default, float) else str(self.default))
        return f"{self.help} (default {shown})."



# --------------------------------------------------------------------------- values


def _length_metres(text: str | float | int) -> float:
    if isinstance(text, bool):
        raise ValueError(text)
    if isinstance(text, (int, float)):
        return float(text)
    match = re.fullmatch(r"\s*([+-]?[0-9]*\.?[0-9]+(?:[eE][+-]?[0-9]+)?)\s*([a-zA-Z]*)\s*", str(text))
    if not match or match.group(2).lower() not in _LENGTH_UNITS:
        raise ValueError(text)
    return round(float(match.group(1)) * _LENGTH_UNITS[match.group(2).lower()], 9)


_LENGTH_HELP = (f"Write a number with an optional unit ({', '.join(u for u in _LENGTH_UNITS if u)}), "
                "for example '5km' or '750m'.")


def _length_problem(text) -> str:
    return f"{text!r} is not a length. {_LENGTH_HELP}"


def parse_length(text: str | float | int, name: str = "length") -> float:
    """Parse a length such as ``"5km"``, ``"750 m"``, ``"2mi"`` or ``1200`` into metres.

    Parameters
    ----------
    text : str or float
        A number with an optional unit (m, km, ft, mi). A bare number is metres.
    name : str
        Option name used in the error message.

    Returns
    -------
    float
        The length in metres (positive).

    Examples
    --------
    >>> parse_length("5km")
    5000.0
    >>> parse_length("250 ft")
    76.2
    """
    try:
        value = _length_metres(text)
    except ValueError:
        raise ConfigError(f"{name} {_length_problem(text)}") from None
    if not value > 0:
        raise ConfigError(f"{name} must be a positive length, got {text!r}.")
    return value


def _number_words(value) -> str:
    return f"{value:g}" if isinstance(value, float) else str(value)


def _range_words(option: Option) -> str | None:
    """``"a whole number from 3 to 100"``, ``"positive"``... for messages; None when unbounded."""
    low, high = option.minimum, option.maximum
    if low is None and high is None:
        return None
    if option.kind == "int":
        if high is None:
            return f"a whole number, {_number_words(low)} or more"
        return f"a whole number from {_number_words(low)} to {_number_words(high)}"
    if low is not None and high is not None:
        return f"between {_number_words(low)} and {_number_words(high)}"
    if low == 0:
        return "positive" if option.min_open else "zero or positive"
    return f"above {_number_words(low)}" if option.min_open else f"{_number_words(low)} or more"


def _in_range(option: Option, value: float) -> bool:
    if isinstance(value, float) and math.isnan(value):
        return False
    if option.minimum is not None and (value < option.minimum or (option.min_open and value == option.minimum)):
        return False
    if option.maximum is not None and (value > option.maximum or (option.max_open and value == option.maximum)):
        return False
    return True


_NO_VALUE = object()


def _fail(option: Option, problem: str, value=_NO_VALUE, said: str | None = None) -> OptionError:
    """The error of one option. ``problem`` says what is wrong for a caller that names the option
    itself (click, a plan's place); the message names it with ``value`` and says ``said``."""
    if value is _NO_VALUE:
        message = f"{spell_option(option, option.name)} {problem}"
    else:
        message = f"{spell_option(option, option.name, value)} {said}"
    return OptionError(message, option=option.name, problem=problem)


def _convert_kind(option: Option, value):
    """Value of the option's kind, or raise OptionError (no range check)."""
    kind, text = option.kind, isinstance(value, str)
    if kind == "text":
        if text and value:
            return value
        raise _fail(option, f"expects text (a quoted string), got {value!r}.", value, "is not text (a quoted string).")
    if kind == "texts":
        items = [value] if text else list(value) if isinstance(value, (list, tuple)) else None
        if items and all(isinstance(v, str) and v for v in items):
            return tuple(items)
        raise _fail(option, f"expects a list of text such as [\"wells\"], got {value!r}.")
    if kind == "bool":
        if isinstance(value, bool):
            return value
        raise _fail(option, f"expects true or false, got {value!r}.", value, "is not true or false.")
    if kind == "int":
        if isinstance(value, int) and not isinstance(value, bool):
            return value
        if text and re.fullmatch(r"\s*[+-]?\d+\s*", value):
            return int(value)
        raise _fail(option, f"expects a whole number, got {value!r}.", value, "is not a whole number.")
    if kind == "float":
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            return float(value)
        try:
            if text:
                return float(value)
        except ValueError:
            pass
        raise _fail(option, f"expects a number, got {value!r}.", value, "is not a number.")
    if kind == "length":
        try:
            return _length_metres(value)
        except (ValueError, TypeError):
            raise _fail(option, _length_problem(value), value, f"is not a length. {_LENGTH_HELP}") from None
    if kind == "numbers":
        if text:
            if value.strip().lower() in ("", "none"):
                value = []
            else:
                try:
                    value = [float(part) for part in value.split(",") if part.strip()]
                except ValueError:
                    said = "is not a comma-separated list of numbers, e.g. '-9999,-999'."
                    raise _fail(option, f"{value!r} {said}", value, said) from None
        if isinstance(value, (list, tuple)):
            try:
                if all(not isinstance(v, bool) for v in value):
                    return tuple(float(v) for v in value)
            except (TypeError, ValueError):
                pass
        raise _fail(option, f"expects a list of numbers such as [-9999, -999], got {value!r}.")
    # choice
    for choice in option.choices:
        if value == choice or (text and str(choice) == value.strip()):
            return choice
    said = f"is not known; choose one of {', '.join(map(str, option.choices))}."
    raise _fail(option, f"{value!r} {said}", value, said)


def convert_kind(option: Option, value):
    """``value`` in the option's kind, or :class:`OptionError` naming the option (no range check)."""
    return _convert_kind(option, value)


def check_range(option: Option, value, given):
    """``value`` when the option's range and non-emptiness allow it, else :class:`OptionError`."""
    if option.nonempty and not value:
        raise _fail(option, "needs at least one value.")
    if option.kind in ("int", "float", "length") and not _in_range(option, value):
        raise _fail(option, f"must be {_range_words(option)}, got {given!r}.", given,
                    f"is outside the range: it must be {_range_words(option)}.")
    return value


def fail(option: Option, problem: str) -> OptionError:
    """The error of ``option`` with ``problem`` (the option named in the caller's words)."""
    return _fail(option, problem)
