"""Which scale the screen judges on, and the way back to the original units.

* A water level with a land-surface elevation is judged as depth to water
  (land surface minus level; ``land_surface_use="depth"``, the default chosen
  by measurement, docs/methods.md) or as a level with the land surface as an
  external drift of the local fit (``"drift"``).
* A strongly skewed positive variable can be judged on the log scale
  (``transform="log"``, or ``"auto"`` for quantities other than levels).
* Otherwise the values themselves.

Reasons, ``expected_value`` and ``local_residual`` are always in the original
units; the standardized residual keeps the sign of value minus expected.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from .config import ScreenConfig
from .context import Context
from .methods.local import LocalResult

__all__ = ["Judging", "choose_judging", "skewness", "STRONG_SKEW", "SkewCheck", "skew_check"]

#: Sample skewness from which a positive variable counts as strongly skewed
#: (common practice: beyond 1 the right tail dominates a symmetric screen).
STRONG_SKEW = 1.0


def skewness(values: np.ndarray) -> float:
    """Adjusted Fisher-Pearson sample skewness G1 of the finite values (as ``scipy.stats.skew(bias=False)``).

    >>> round(skewness(np.array([1.0, 2.0, 3.0, 10.0])), 4)
    1.7636
    """
    v = values[np.isfinite(values)]
    n = v.size
    if n < 3 or np.ptp(v) == 0:
        return float("nan")
    d = v - v.mean()
    m2, m3 = np.mean(d * d), np.mean(d * d * d)
    return float(np.sqrt(n * (n - 1)) / (n - 2) * m3 / m2**1.5)


@dataclass(frozen=True)
class SkewCheck:
    """Whether a layer is strongly skewed and whether it is judged (or described) on the log scale.

    Attributes
    ----------
    skewness : float
        :func:`skewness` of the usable values (NaN when it cannot be measured).
    strongly : bool
        Skewness at least :data:`STRONG_SKEW` and every usable value positive.
    use_log : bool
        ``transform="log"``, or ``"auto"`` for a strongly skewed variable that is not a level.
    log_values : ndarray or None
        Natural log per row where usable and positive, NaN elsewhere (None unless ``use_log``).
    """

    skewness: float
    strongly: bool
    use_log: bool
    log_values: np.ndarray | None

    def record(self, quantity: str, transform: str) -> dict:
        """The run record's entries for the skew decision."""
        return {"quantity": quantity, "transform_option": transform,
                "skewness": None if not np.isfinite(self.skewness) else round(self.skewness, 3),
                "strongly_skewed_positive": self.strongly}

    def advice(self) -> str:
        """The note for a strongly skewed variable judged on its own scale."""
        return (f"The values are strongly skewed (skewness {self.skewness:.2f}, all positive): a symmetric screen "
                "flags the long tail; consider transform log (--transform log, or auto).")


def skew_check(values: np.ndarray, usable: np.ndarray, transform: str, quantity: str) -> SkewCheck:
    """The skew decision shared by the screen (:func:`choose_judging`) and ``describe``."""
    skew = skewness(np.where(usable, values, np.nan))
    positive = bool(usable.any() and (values[usable] > 0).all())
    strongly = bool(np.isfinite(skew) and skew >= STRONG_SKEW and positive)
    use_log = transform == "log" or (transform == "auto" and strongly and quantity != "level")
    logs = None
    if use_log:
        logs = np.where(usable & (values > 0), np.log(np.where(values > 0, values, 1.0)), np.nan)
    return SkewCheck(skew, strongly, use_log, logs)


@dataclass(frozen=True)
class Judging:
    """The judged scale.

    Attributes
    ----------
    mode : str
        ``"values"``, ``"depth to water"``, ``"level with land-surface drift"``, ``"log"``.
    judged : ndarray
        Values on the judged scale (NaN where not judged).
    drift : ndarray or None
        External drift for the local fit.
    unjudged : ndarray of object
        Why a usable row cannot be judged on this scale ("" when it can).
    record : dict
        For ``run_info["judged_scale"]``.
    notes : tuple of str
        For the user (skew).
    """

    mode: str
    judged: np.ndarray
    drift: np.ndarray | None
    unjudged: np.ndarray
    record: dict
    notes: tuple[str, ...] = ()

    def to_judged(self, value: float, ground: float) -> float:
        """One value (original units) on the judged scale (for ``"level or depth to water"``: the depth)."""
        if self.mode in ("depth to water", "level or depth to water"):
            return ground - value
        if self.mode == "log":
            return float(np.log(value)) if value > 0 else float("nan")
        return value

    def back(self, local: LocalResult, values: np.ndarray, ground: np.ndarray) -> LocalResult:
        """The local result in original units (expected, residual; z signed as value minus expected)."""
        if self.mode in ("depth to water", "level or depth to water"):
            expected = ground - local.expected
            return dataclasses.replace(local, expected=expected, residual=values - expected, z=-local.z,
                                       curved_z=-local.curved_z)
        if self.mode == "log":
            expected = np.exp(local.expected)
            return dataclasses.replace(local, expected=expected, residual=values - expected)
        return local


def choose_judging(values: np.ndarray, usable: np.ndarray, context: Context, config: ScreenConfig) -> Judging:
    """Choose the judged scale for a layer.

    Parameters
    ----------
    values : ndarray
        Parsed values (NaN where unusable).
    usable : ndarray of bool
        Rows with a location and a value.
    context : Context
        Land surface and the rest.
    config : ScreenConfig
        ``quantity``, ``transform``, ``land_surface_use``.

    Returns
    -------
    Judging
    """
    n = values.size
    unjudged = np.full(n, "", dtype=object)
    check = skew_check(values, usable, config.transform, config.quantity)
    skew, strongly = check.skewness, check.strongly
    record = check.record(config.quantity, config.transform)
    notes: list[str] = []
    if check.use_log:
        bad = usable & ~(values > 0)
        unjudged[bad] = "value is not positive, so it cannot be judged on the log scale (transform log)"
        record["scale"] = "log of the values"
        if strongly:
            notes.append(f"The values are strongly skewed (skewness {skew:.2f}); judged on the log scale.")
        return Judging("log", check.log_values, None, unjudged, record, tuple(notes))
    if strongly:
        notes.append(check.advice())
    if config.quantity == "level" and context.has_ground and config.land_surface_use != "none":
        if config.land_surface_use in ("depth", "auto"):
            missing = usable & ~np.isfinite(context.ground)
            unjudged[missing] = ("no land-surface elevation, needed because the screen judges depth to water "
                                 "(give it, or pass land_surface_use none)")
            judged = np.where(usable & ~missing, context.ground - values, np.nan)
            if config.land_surface_use == "auto":
                record["scale"] = ("per well, the levels or the depth to water (land surface minus level), whichever "
                                   "its neighbours fit more tightly; back in level units for the outputs")
                return Judging("level or depth to water", judged, None, unjudged, record, tuple(notes))
            record["scale"] = "depth to water (land surface minus level), back in level units for the outputs"
            return Judging("depth to water", judged, None, unjudged, record, tuple(notes))
        record["scale"] = "levels, with the land surface as an external drift of each local fit"
        return Judging("level with land-surface drift", np.where(usable, values, np.nan), context.ground, unjudged,
                       record, tuple(notes))
    record["scale"] = "the values"
    return Judging("values", np.where(usable, values, np.nan), None, unjudged, record, tuple(notes))
