"""Stem-and-leaf display of measured values (Tukey 1977, *Exploratory Data Analysis*, ch. 1).

Each value is rounded to a whole number of *leaf units* (half away from zero),
``m = round(|x| / leaf_unit)``; the last digit of ``m`` is the leaf and the
rest is the stem. The stem unit is ten leaf units. Negative values get their
own stems, written with a minus sign, including ``-0`` for values between
``-10`` and ``-1`` leaf units, so ``-0 | 3`` (-0.3 with a 0.1 leaf unit) and
``0 | 3`` (+0.3) are different lines. A value that rounds to zero is shown
on the ``0`` stem.

Layout (pointsift's own): lines run from the most negative value at the top to
the largest at the bottom, every line between the first and the last is shown
(an empty line is a gap in the data), and on each line the leaves are sorted so
they grow in magnitude away from the stem, on both sides of zero. A stem can
be *split* over 2 lines (leaves 0-4 and 5-9) or 5 lines (0-1, 2-3, 4-5, 6-7,
8-9); each split line carries its leaf range, e.g. ``12 [5-9] | 578``. The
left column is the number of values on the line.

Choosing the stem unit: unless given, the finest stem unit (a power of ten)
and split (1, 2 or 5 lines per stem) whose display needs at most
``L = floor(2 sqrt(n))`` lines for ``n < 100`` and ``floor(10 log10 n)`` lines
otherwise (the line-count ceiling quoted by Velleman and Hoaglin 1981,
*Applications, Basics and Computing of Exploratory Data Analysis*, ch. 1;
from memory), with at least 6 lines allowed (our choice, so that small sets
keep one more digit). When every value is equal, the leaf unit is the
coarsest that writes the value exactly, with at most four significant digits.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import ConfigError, InputError

__all__ = ["StemLeaf", "StemLeafLine", "stem_and_leaf", "stem_and_leaf_table"]

_SPLITS = (1, 2, 5)
#: Refuse displays longer than this (the stem unit is far too small for the range).
MAX_LINES = 2000


@dataclass(frozen=True)
class StemLeafLine:
    """One line of a stem-and-leaf display.

    Attributes
    ----------
    stem : str
        Stem label, with a minus sign for negative values (``"-0"`` included).
    leaf_low, leaf_high : int
        Range of leaf digits this line holds (0-9 unless the stem is split).
    leaves : str
        Leaf digits, growing in magnitude away from the stem (all of them).
    count : int
        Number of values on the line.
    negative : bool
        True for a stem of negative values.
    """

    stem: str
    leaf_low: int
    leaf_high: int
    leaves: str
    count: int
    negative: bool


@dataclass(frozen=True)
class StemLeaf:
    """A stem-and-leaf display in structured form; ``str()`` gives the text.

    Attributes
    ----------
    leaf_unit : float
        Value of one leaf step (a power of ten).
    stem_unit : float
        Value of one stem step (``10 * leaf_unit``).
    split : int
        Lines per stem (1, 2 or 5).
    lines : tuple of StemLeafLine
        Top (most negative) to bottom (largest).
    n : int
        Values shown.
    n_missing : int
        Non-finite values left out.
    max_leaves : int
        Leaves printed per line in the text before the rest is summarised.
    """

    leaf_unit: float
    stem_unit: float
    split: int
    lines: tuple[StemLeafLine, ...]
    n: int
    n_missing: int
    max_leaves: int = 80

    @property
    def decimals(self) -> int:
        """Decimal places needed to write a value at the leaf unit."""
        return max(0, -int(round(math.log10(self.leaf_unit))))

    def reading(self, line: StemLeafLine, leaf: int) -> float:
        """The value that ``line`` with ``leaf`` stands for."""
        magnitude = (int(line.stem.lstrip("-")) * 10 + leaf) * self.leaf_unit
        return -magnitude if line.negative else magnitude

    def as_frame(self):
        """The lines as a DataFrame (columns ``stem``, ``leaf_low``, ``leaf_high``, ``leaves``, ``count``)."""
        import pandas as pd

        return pd.DataFrame(
            {
                "stem": [ln.stem for ln in self.lines],
                "leaf_low": [ln.leaf_low for ln in self.lines],
                "leaf_high": [ln.leaf_high for ln in self.lines],
                "leaves": [ln.leaves for ln in self.lines],
                "count": [ln.count for ln in self.lines],
            }
        )

    def text(self) -> str:
        """The display as text (header, key, one row per line)."""
        per_stem = "1 line" if self.split == 1 else f"{self.split} lines"
        header = (
            f"Stem-and-leaf display of {self.n} value{'s' if self.n != 1 else ''}"
            + (f" ({self.n_missing} missing left out)" if self.n_missing else "")
            + f"; leaf unit {_fmt_unit(self.leaf_unit)}, stem unit {_fmt_unit(self.stem_unit)}, "
            + f"{per_stem} per stem"
        )
        example = next((ln for ln in self.lines if ln.count), None)
        rows = [header]
        if example is not None:
            leaf = int(example.leaves[0])
            value = self.reading(example, leaf)
            rows.append(f"key: {example.stem} | {leaf} reads as {value:.{self.decimals}f}")
        stem_width = max([len("stem")] + [len(ln.stem) for ln in self.lines])
        count_width = max(len("count"), len(str(max(ln.count for ln in self.lines))))
        tag_width = 6 if self.split > 1 else 0
        rows.append(f"{'count':>{count_width}}  {'stem':>{stem_width}}{'':{tag_width}} | leaves")
        for ln in self.lines:
            tag = f" [{ln.leaf_low}-{ln.leaf_high}]" if self.split > 1 else ""
            leaves = ln.leaves
            if len(leaves) > self.max_leaves:
                leaves = f"{leaves[: self.max_leaves]} (+{len(leaves) - self.max_leaves} more)"
            rows.append(f"{ln.count:>{count_width}}  {ln.stem:>{stem_width}}{tag} | {leaves}".rstrip())
        return "\n".join(rows)

    def __str__(self) -> str:
        return self.text()


def _fmt_unit(unit: float) -> str:
    exponent = int(round(math.log10(unit)))
    return f"{unit:.{max(0, -exponent)}f}"


def _check_stem_unit(stem_unit) -> float:
    ok = isinstance(stem_unit, (int, float)) and math.isfinite(stem_unit) and stem_unit > 0
    if ok:
        exponent = math.log10(stem_unit)
        ok = abs(exponent - round(exponent)) < 1e-9
    if not ok:
        raise ConfigError(
            f"stem_unit must be a power of ten such as 0.1, 1, 10 or 100, got {stem_unit!r}."
        )
    return 10.0 ** round(math.log10(stem_unit))


def _rounded_units(x: np.ndarray, leaf_unit: float) -> np.ndarray:
    # The tiny relative nudge makes 0.15 / 0.1 = 1.4999999999999998 round up,
    # as the decimal 0.15 would by hand.
    scaled = np.abs(x) / leaf_unit * (1.0 + 1e-12)
    return (np.sign(x) * np.floor(scaled + 0.5)).astype(np.int64)


def _line_index(m: np.ndarray, split: int) -> tuple[np.ndarray, np.ndarray]:
    magnitude = np.abs(m)
    leaf = magnitude % 10
    position = (magnitude // 10) * split + leaf // (10 // split)
    # Negative lines count down from -1 so the most negative value is at the top.
    return np.where(m < 0, -position - 1, position), leaf


def _line_count(x_min: float, x_max: float, leaf_unit: float, split: int) -> int:
    ends, _ = _line_index(_rounded_units(np.array([x_min, x_max]), leaf_unit), split)
    return int(ends[1] - ends[0] + 1)


def _max_lines(n: int) -> int:
    limit = math.floor(2 * math.sqrt(n)) if n < 100 else math.floor(10 * math.log10(n))
    # Our floor of 6 lines keeps one more digit for small sets (and room for -0 and 0).
    return max(6, limit)


def _choose(x: np.ndarray, stem_unit, split) -> tuple[float, int]:
    if split is not None and split not in _SPLITS:
        raise ConfigError(f"split must be one of {', '.join(map(str, _SPLITS))} lines per stem, got {split!r}.")
    lo, hi = float(x.min()), float(x.max())
    if stem_unit is not None:
        return _check_stem_unit(stem_unit) / 10.0, split or 1
    if hi == lo:
        if lo == 0:
            return 1.0, split or 1
        top = math.floor(math.log10(abs(lo)))
        for exponent in range(top, top - 4, -1):
            unit = 10.0**exponent
            if abs(round(lo / unit) * unit - lo) <= 1e-9 * abs(lo):
                break
        return unit, split or 1
    limit = _max_lines(x.size)
    top = math.floor(math.log10(hi - lo)) + 1
    chosen = None
    for exponent in range(top, top - 12, -1):
        leaf_unit = 10.0**exponent
        for candidate in (_SPLITS if split is None else (split,)):
            if _line_count(lo, hi, leaf_unit, candidate) <= limit:
                chosen = (leaf_unit, candidate)
            elif chosen is not None:
                return chosen
    return chosen or (10.0**top, split or 1)


def stem_and_leaf_table(values, stem_unit: float | None = None, split: int | None = None, *, max_leaves: int = 80) -> StemLeaf:
    """Build a stem-and-leaf display in structured form.

    Parameters
    ----------
    values : array_like of float
        The values; NaN and inf are left out and counted.
    stem_unit : float, optional
        Value of one stem step, a power of ten (the leaf unit is a tenth of
        it). Chosen automatically when omitted (see the module docstring).
    split : {1, 2, 5}, optional
        Lines per stem. Chosen with the stem unit when omitted; 1 when only
        ``stem_unit`` is given.
    max_leaves : int
        Leaves printed per line in the text; the rest are counted.

    Returns
    -------
    StemLeaf

    Raises
    ------
    InputError
        When there is no finite value, or the stem unit is so small that the
        display would need more than 2000 lines.
    ConfigError
        When ``stem_unit`` is not a power of ten or ``split`` not 1, 2 or 5.

    Examples
    --------
    >>> print(stem_and_leaf_table([1.2, 1.5, 2.3, -0.4], stem_unit=1))
    Stem-and-leaf display of 4 values; leaf unit 0.1, stem unit 1, 1 line per stem
    key: -0 | 4 reads as -0.4
    count  stem | leaves
        1    -0 | 4
        0     0 |
        2     1 | 25
        1     2 | 3
    """
    arr = np.asarray(values, dtype=float).ravel()
    finite = np.isfinite(arr)
    x = arr[finite]
    if x.size == 0:
        raise InputError("No finite value to display; check the value column and the no-data values.")
    leaf_unit, split = _choose(x, stem_unit, split)
    with np.errstate(over="ignore", invalid="ignore"):
        scaled_max = float(np.max(np.abs(x))) / leaf_unit
    if not scaled_max < 2**53:
        raise InputError(
            f"stem_unit {leaf_unit * 10:g} is too small for values up to {np.max(np.abs(x)):g}; "
            "pass a larger stem_unit or leave it out."
        )
    m = _rounded_units(x, leaf_unit)
    line, leaf = _line_index(m, split)
    first, last = int(line.min()), int(line.max())
    if last - first + 1 > MAX_LINES:
        raise InputError(
            f"stem_unit {leaf_unit * 10:g} would need {last - first + 1} lines for values from "
            f"{x.min():g} to {x.max():g}; pass a larger stem_unit (or leave it out to choose one)."
        )
    order = np.lexsort((leaf, line))
    line, leaf = line[order], leaf[order]
    all_lines = np.arange(first, last + 1)
    starts = np.searchsorted(line, all_lines, side="left")
    ends = np.searchsorted(line, all_lines, side="right")
    width = 10 // split
    digits = leaf.astype(np.uint8) + ord("0")
    out = []
    for index, start, end in zip(all_lines, starts, ends):
        negative = index < 0
        position = -index - 1 if negative else index
        stem, part = divmod(int(position), split)
        out.append(
            StemLeafLine(
                stem=("-" if negative else "") + str(stem),
                leaf_low=part * width,
                leaf_high=part * width + width - 1,
                leaves=digits[start:end].tobytes().decode("ascii"),
                count=int(end - start),
                negative=bool(negative),
            )
        )
    return StemLeaf(
        leaf_unit=leaf_unit,
        stem_unit=leaf_unit * 10,
        split=split,
        lines=tuple(out),
        n=int(x.size),
        n_missing=int(arr.size - x.size),
        max_leaves=max_leaves,
    )


def stem_and_leaf(values, stem_unit: float | None = None, split: int | None = None, *, max_leaves: int = 80) -> str:
    """Stem-and-leaf display of the values as text.

    Parameters are those of :func:`stem_and_leaf_table`, which returns the
    structured form.

    Returns
    -------
    str

    Examples
    --------
    >>> print(stem_and_leaf([12, 15, 21, 27, 33], stem_unit=10))
    Stem-and-leaf display of 5 values; leaf unit 1, stem unit 10, 1 line per stem
    key: 1 | 2 reads as 12
    count  stem | leaves
        2     1 | 25
        2     2 | 17
        1     3 | 3
    """
    return stem_and_leaf_table(values, stem_unit, split, max_leaves=max_leaves).text()
