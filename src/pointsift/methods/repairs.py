"""Likely-slip checks: would a common data-entry mistake, undone, make the value fit?

For a value that disagrees with its neighbours, pointsift tries the usual
data-entry mistakes in reverse (common practice in well-database cleaning):

* a decimal point one or two places off (x 10, / 10, x 100, / 100);
* a unit slip between feet and metres (x 0.3048 or / 0.3048);
* two adjacent digits transposed (every adjacent pair of the value as written);
* a lost or added minus sign.

A repair "fits" when the repaired value lies within ``fit_z`` robust sd of
the value expected from the neighbours, and the repair moves the value by at
least ``min_change_z`` robust sd (so a tiny swap of the last digits cannot
"explain" ordinary noise). The check names the repair in the reasons; a fit
is supporting evidence that the value is an entry mistake, never proof.
"""

from __future__ import annotations

import numpy as np

__all__ = ["repair_candidates", "likely_slips"]

_FOOT = 0.3048


def _digits_swaps(value: float) -> list[tuple[float, str]]:
    text = repr(float(value))
    if "e" in text or "inf" in text or "nan" in text:
        return []
    if text.endswith(".0"):
        text = text[:-2]
    sign = ""
    if text.startswith("-"):
        sign, text = "-", text[1:]
    positions = [i for i, ch in enumerate(text) if ch.isdigit()]
    out = []
    for a, b in zip(positions, positions[1:]):
        if text[a] == text[b]:
            continue
        chars = list(text)
        chars[a], chars[b] = chars[b], chars[a]
        swapped = "".join(chars)
        if swapped.lstrip("0.") == "" or (swapped[0] == "0" and len(swapped) > 1 and swapped[1] != "."):
            continue  # a swap that creates a leading zero is not a way anyone writes a number
        out.append((float(sign + swapped), f"digits transposed (written {sign}{text}, maybe {sign}{swapped})"))
    return out


def repair_candidates(value: float) -> list[tuple[float, str]]:
    """Values the entry might have been, each with a plain description.

    Parameters
    ----------
    value : float
        The value as entered.

    Returns
    -------
    list of (float, str)

    Examples
    --------
    >>> [round(v, 4) for v, _ in repair_candidates(28.53)][:4]
    [285.3, 2.853, 2853.0, 0.2853]
    >>> sorted(round(v, 2) for v, text in repair_candidates(258.3) if "transposed" in text)
    [253.8, 285.3, 528.3]
    """
    out = [
        (value * 10.0, "decimal point one place off (x 10)"),
        (value / 10.0, "decimal point one place off (/ 10)"),
        (value * 100.0, "decimal point two places off (x 100)"),
        (value / 100.0, "decimal point two places off (/ 100)"),
        (value * _FOOT, "feet entered as metres (x 0.3048)"),
        (value / _FOOT, "metres entered as feet (/ 0.3048)"),
        (-value, "sign lost or added"),
    ]
    out.extend(_digits_swaps(value))
    return [(v, text) for v, text in out if v != value]


def likely_slips(
    values: np.ndarray,
    expected: np.ndarray,
    scale: np.ndarray,
    candidates: np.ndarray,
    *,
    fit_z: float = 1.5,
    min_change_z: float = 2.0,
) -> tuple[np.ndarray, np.ndarray]:
    """Find the entry mistake that best explains each candidate's deviation.

    Parameters
    ----------
    values, expected, scale : ndarray
        Value, value expected from the neighbours, and robust residual scale.
    candidates : ndarray of bool
        Rows to check (flagged rows; the check is per row, so keep it small).
    fit_z : float
        The repaired value must be within this many robust sd of expected.
    min_change_z : float
        The repair must move the value by at least this many robust sd.

    Returns
    -------
    fits : ndarray of bool
        A repair fits.
    text : ndarray of object
        "" or a sentence naming the repair and the repaired value.
    """
    n = values.size
    fits = np.zeros(n, dtype=bool)
    text = np.full(n, "", dtype=object)
    for i in np.flatnonzero(candidates & np.isfinite(values) & np.isfinite(expected) & (scale > 0)):
        best = None
        for repaired, description in repair_candidates(float(values[i])):
            miss = abs(repaired - expected[i]) / scale[i]
            change = abs(repaired - values[i]) / scale[i]
            if miss <= fit_z and change >= min_change_z and (best is None or miss < best[0]):
                best = (miss, repaired, description)
        if best is not None:
            fits[i] = True
            text[i] = f"looks like an entry mistake: {best[2]} gives {best[1]:.6g}, within {best[0]:.1f} robust sd of the expected value"
    return fits, text
