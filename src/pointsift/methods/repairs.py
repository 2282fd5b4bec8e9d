"""Likely-slip checks: would a common data-entry mistake, undone, make the value fit?

For a value that disagrees with its neighbours, pointsift tries the usual
data-entry mistakes in reverse (common practice in well-database cleaning):

* a decimal point one or two places off (x 10, / 10, x 100, / 100);
* a unit slip between feet and metres (x 0.3048 or / 0.3048);
* two adjacent digits transposed (every adjacent pair of the value as written);
* a lost or added minus sign;
* with a land-surface elevation, a depth to water entered as the level (or
  the reverse).

Only repairs that make sense for the quantity are tried (:data:`KINDS_FOR`).
A repair fitting is evidence only when it is unlikely to fit by chance:
:func:`repair_chance` measures, on the layer itself, how often each kind of
repair "fits" values that are fine, and :func:`likely_slips` counts a fit only
when that chance is small.

A repair "fits" when the repaired value lies within ``fit_z`` robust sd of
the value expected from the neighbours, and the repair moves the value by at
least ``min_change_z`` robust sd (so a tiny swap of the last digits cannot
"explain" ordinary noise). The check names the repair in the reasons; a fit
is supporting evidence that the value is an entry mistake, never proof.
"""

from __future__ import annotations

import numpy as np

__all__ = ["repair_candidates", "likely_slips", "repair_chance", "KINDS", "KINDS_FOR"]

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


#: Repair kinds, in the order they are tried.
KINDS = ("decimal", "units", "digits", "sign", "depth_as_level", "level_as_depth")

#: Kinds that make sense for each quantity (no feet/metres for a
#: concentration; no sign flip for a quantity that cannot be negative).
KINDS_FOR = {
    "level": ("decimal", "units", "digits", "sign", "depth_as_level"),
    "depth": ("decimal", "units", "digits", "level_as_depth"),
    "concentration": ("decimal", "digits"),
    "other": ("decimal", "digits", "sign"),
}


def repair_candidates(value: float, kinds: tuple[str, ...] = KINDS[:4], ground: float = np.nan) -> list[tuple[float, str, str]]:
    """Values the entry might have been, each with its kind and a plain description.

    Parameters
    ----------
    value : float
        The value as entered.
    kinds : tuple of str
        Repair kinds to try (see :data:`KINDS`).
    ground : float
        Land-surface elevation, for ``depth_as_level`` / ``level_as_depth``.

    Returns
    -------
    list of (float, str, str)
        Repaired value, kind, description.

    Examples
    --------
    >>> [round(v, 4) for v, _, _ in repair_candidates(28.53)][:4]
    [285.3, 2.853, 2853.0, 0.2853]
    >>> sorted(round(v, 2) for v, kind, _ in repair_candidates(258.3) if kind == "digits")
    [253.8, 285.3, 528.3]
    """
    out = []
    if "decimal" in kinds:
        out += [
            (value * 10.0, "decimal", "decimal point one place off (x 10)"),
            (value / 10.0, "decimal", "decimal point one place off (/ 10)"),
            (value * 100.0, "decimal", "decimal point two places off (x 100)"),
            (value / 100.0, "decimal", "decimal point two places off (/ 100)"),
        ]
    if "units" in kinds:
        out += [
            (value * _FOOT, "units", "feet entered as metres (x 0.3048)"),
            (value / _FOOT, "units", "metres entered as feet (/ 0.3048)"),
        ]
    if "sign" in kinds:
        out.append((-value, "sign", "sign lost or added"))
    if "digits" in kinds:
        out.extend((v, "digits", text) for v, text in _digits_swaps(value))
    if np.isfinite(ground):
        if "depth_as_level" in kinds:
            out.append((ground - value, "depth_as_level", "depth to water entered as the level (land surface minus the value)"))
        if "level_as_depth" in kinds:
            out.append((ground - value, "level_as_depth", "level entered as the depth to water (land surface minus the value)"))
    return [(v, kind, text) for v, kind, text in out if v != value and np.isfinite(v)]


def _best_fit(value, expected, scale, kinds, ground, to_judged, fit_z, min_change_z, allowed=None):
    """The fitting repair with the smallest miss, or None."""
    best = None
    judged_value = to_judged(value, ground)
    for repaired, kind, description in repair_candidates(value, kinds, ground):
        if allowed is not None and kind not in allowed:
            continue
        judged = to_judged(repaired, ground)
        if not np.isfinite(judged):
            continue
        miss = abs(judged - expected) / scale
        change = abs(judged - judged_value) / scale
        if miss <= fit_z and change >= min_change_z and (best is None or miss < best[0]):
            best = (miss, repaired, kind, description)
    return best


def _identity(value, ground):
    return value


def repair_chance(
    values: np.ndarray,
    expected: np.ndarray,
    scale: np.ndarray,
    sound: np.ndarray,
    *,
    kinds: tuple[str, ...] = KINDS[:4],
    ground: np.ndarray | None = None,
    to_judged=None,
    fit_z: float = 1.5,
    min_change_z: float = 2.0,
    sample: int = 2000,
    seed: int = 0,
) -> dict:
    """How often each kind of repair "fits" values that are fine: its chance of fitting by coincidence.

    For each sound point (at most ``sample`` of them, drawn with ``seed``),
    every repair of a kind is tried exactly as :func:`likely_slips` does; the
    chance of a kind is the share of those points for which some repair of
    that kind fits.

    Returns
    -------
    dict
        ``{kind: share}``, plus ``"points"``: how many sound points were tried.
    """
    to_judged = _identity if to_judged is None else to_judged
    ground = np.full(values.size, np.nan) if ground is None else ground
    rows = np.flatnonzero(sound & np.isfinite(values) & np.isfinite(expected) & (scale > 0))
    if rows.size > sample:
        rows = np.sort(np.random.default_rng(seed).choice(rows, sample, replace=False))
    hits = dict.fromkeys(kinds, 0)
    for i in rows:
        for kind in kinds:
            if _best_fit(float(values[i]), expected[i], scale[i], kinds, ground[i], to_judged, fit_z, min_change_z, (kind,)):
                hits[kind] += 1
    chance = {kind: (hits[kind] / rows.size if rows.size else float("nan")) for kind in kinds}
    chance["points"] = int(rows.size)
    return chance


def likely_slips(
    values: np.ndarray,
    expected: np.ndarray,
    scale: np.ndarray,
    candidates: np.ndarray,
    *,
    fit_z: float = 1.5,
    min_change_z: float = 2.0,
    kinds: tuple[str, ...] = KINDS[:4],
    ground: np.ndarray | None = None,
    to_judged=None,
    chance: dict | None = None,
    chance_limit: float = 0.01,
    units: str = "",
) -> tuple[np.ndarray, np.ndarray]:
    """Find the entry mistake that best explains each candidate's deviation.

    Parameters
    ----------
    values : ndarray
        Values as entered.
    expected, scale : ndarray
        Value expected from the neighbours and robust residual scale, on
        the judged scale (``to_judged``).
    candidates : ndarray of bool
        Rows to check (flagged rows; the check is per row, so keep it small).
    fit_z : float
        The repaired value must be within this many robust sd of expected.
    min_change_z : float
        The repair must move the value by at least this many robust sd.
    kinds : tuple of str
        Repair kinds that make sense for the quantity (:data:`KINDS_FOR`).
    ground : ndarray, optional
        Land-surface elevation (for the depth/level repairs).
    to_judged : callable, optional
        ``f(value, ground)`` mapping a value to the judged scale (depth to
        water, log); identity by default.
    chance : dict, optional
        From :func:`repair_chance`. A repair counts as evidence only when
        its kind's chance is at most ``chance_limit``; the reason says the chance.
    chance_limit : float
        See ``chance``.
    units : str
        Shown with the repaired value.

    Returns
    -------
    fits : ndarray of bool
        A repair fits and is unlikely to fit by chance (counts as evidence).
    text : ndarray of object
        "" or a sentence naming the repair, the repaired value and its chance.
    """
    to_judged = _identity if to_judged is None else to_judged
    ground = np.full(values.size, np.nan) if ground is None else ground
    n = values.size
    fits = np.zeros(n, dtype=bool)
    text = np.full(n, "", dtype=object)
    u = f" {units}" if units else ""
    for i in np.flatnonzero(candidates & np.isfinite(values) & np.isfinite(expected) & (scale > 0)):
        best = _best_fit(float(values[i]), expected[i], scale[i], kinds, ground[i], to_judged, fit_z, min_change_z)
        if best is None:
            continue
        miss, repaired, kind, description = best
        p = chance.get(kind, np.nan) if chance is not None else np.nan
        counts = chance is None or (np.isfinite(p) and p <= chance_limit)
        fits[i] = counts
        said = f"{description} gives {repaired:.6g}{u}, within {miss:.1f} robust sd of the expected value"
        if chance is None:
            text[i] = f"looks like an entry mistake: {said}"
        elif counts:
            text[i] = f"looks like an entry mistake: {said} (such a repair fits {p:.1%} of this layer's sound values by chance)"
        else:
            text[i] = (f"an entry-mistake repair fits ({said}) but such a repair fits {p:.0%} of this layer's "
                       "sound values by chance: not counted as evidence")
    return fits, text
