"""Turn the evidence of the methods into a status, a score and reasons.

Statuses
--------
``suspect``
    Very likely a wrong value or location: the standardized local residual
    reaches ``suspect_z`` and the neighbours do not deviate the same way; or
    it reaches ``review_z`` and undoing a common entry mistake (decimal slip,
    feet/metres, transposed digits, sign) makes it fit; or a coincident
    record contradicts it and the neighbours side with the other.
``review``
    Worth a field check: the residual reaches ``review_z``; or it reaches
    ``suspect_z`` but a good share of the neighbours deviate alike (a
    coherent feature such as a pumping cone or a valley floor, which is real
    signal, not an error); or two records at one spot disagree and the
    neighbours cannot tell which is right.
``ok``
    Consistent with the neighbours.
``unscreened``
    Could not be judged (no value, no location, too few neighbours); the
    reason says why.

Score
-----
``screen_score`` is the size of the standardized local residual, halved when
the neighbours echo the deviation (evidence of a real feature rather than an
error), and at least ``suspect_z`` for a contradicted coincident record or
a deviation an entry mistake explains.
Larger means stronger evidence of an error. Unscreened rows have no score.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .config import ScreenConfig
from .methods.autocorr import LocalAutocorrelation
from .methods.local import LocalResult
from .vocabulary import (
    FLAGGED,
    OK,
    QUADRANT_WORDS,
    REVIEW,
    ROLE_AGREES,
    ROLE_CONTRADICTED,
    STATUSES,
    SUSPECT,
    UNSCREENED,
)

__all__ = ["decide", "format_length", "STATUSES"]


def format_length(metres: float) -> str:
    """Plain length for messages: ``"850 m"``, ``"1.2 km"``, ``"35 km"``."""
    if not np.isfinite(metres):
        return "an unknown distance"
    if metres < 1000:
        return f"{metres:.0f} m"
    if metres < 20000:
        return f"{metres / 1000:.1f} km"
    return f"{metres / 1000:.0f} km"


def _round_length(metres: np.ndarray) -> np.ndarray:
    """Lengths rounded as :func:`format_length` shows them (to the metre, 0.1 km or 1 km)."""
    metres = np.asarray(metres, dtype=float)
    return np.where(metres < 1000, np.round(metres), np.where(metres < 20000, np.round(metres, -2), np.round(metres, -3)))



#: Examples of a real local feature, by quantity (a pumping cone only for water).
FEATURE_WORDS = {
    "level": "for example a pumping cone or a valley",
    "depth": "for example a pumping cone or a valley",
    "concentration": "for example a hot spot or a plume",
    "other": "",
}


def _feature(config: ScreenConfig) -> str:
    words = FEATURE_WORDS.get(getattr(config, "quantity", "level"), "")
    return f"likely a real local feature ({words}), check before correcting" if words else \
        "likely a real local feature, check before correcting"


def _value(v: float, config: ScreenConfig) -> str:
    from .methods.plausibility import fmt

    return fmt(v, getattr(config, "units", None) or "")


def decide(
    *,
    ids: np.ndarray,
    values: np.ndarray,
    unscreened_reason: np.ndarray,
    local: LocalResult,
    max_neighbour_distance: np.ndarray,
    autocorr: LocalAutocorrelation | None,
    coincident: pd.DataFrame,
    config: ScreenConfig,
    supporting: tuple[np.ndarray, ...] = (),
    slips: tuple[np.ndarray, np.ndarray] | None = None,
    evidence: list | tuple = (),
) -> pd.DataFrame:
    """Status, score and reasons for every row.

    Parameters
    ----------
    ids : ndarray of object
        Identifier per row (used to name coincident partners).
    values : ndarray
        Parsed values (NaN where unusable).
    unscreened_reason : ndarray of object
        Reason per row from preparation and the graph ("" when screenable).
    local : LocalResult
        Robust local residuals (original units).
    max_neighbour_distance : ndarray
        Distance to the farthest neighbour used, per row.
    autocorr : LocalAutocorrelation or None
        Local Moran's I / Gi* (None when not computed).
    coincident : pandas.DataFrame
        From :func:`pointsift.methods.coincident.coincident_conflicts`.
    config : ScreenConfig
        Thresholds (``suspect_z``, ``review_z``, ``fdr``), quantity and units.
    supporting : tuple of ndarray of object
        Extra sentences per row ("" for none) from other methods, added to
        the reasons of flagged points.
    slips : (ndarray of bool, ndarray of object), optional
        From :func:`pointsift.methods.repairs.likely_slips`: a common entry
        mistake, undone, makes the value fit and is unlikely to fit by
        chance. Raises ``review`` to ``suspect`` for a deviation the
        neighbours do not share.
    evidence : sequence of (mask, text, level)
        Further evidence per row; ``level`` "suspect" (strong: makes the
        row suspect), "review" (asks for a look) or "note" (said, changes nothing).

    Returns
    -------
    pandas.DataFrame
        Columns ``screen_status``, ``screen_score``, ``screen_reasons``.
    """
    n = values.size
    z = local.z
    unscreened = (unscreened_reason != "") | ~np.isfinite(z)
    reason_fallback = np.where(unscreened_reason != "", unscreened_reason, "could not be predicted from the neighbours")
    absz = np.abs(z)
    echoed = local.coherent
    score = np.where(echoed, 0.5 * absz, absz)

    role = coincident["role"].to_numpy()
    contradicted = role == ROLE_CONTRADICTED
    undecided = role == "undecided"
    strong = np.zeros(n, dtype=bool)
    weak = np.zeros(n, dtype=bool)
    for mask, _, level in evidence:
        if level == "suspect":
            strong |= mask
        elif level == "review":
            weak |= mask
    strong &= ~unscreened
    weak &= ~unscreened

    slip_fits = slips[0] if slips is not None else np.zeros(n, dtype=bool)
    by_residual = ((absz >= config.suspect_z) | (slip_fits & (absz >= config.review_z))) & ~echoed
    suspect = ~unscreened & (by_residual | contradicted | strong)
    review = ~unscreened & ~suspect & ((absz >= config.review_z) | undecided | weak)
    status = np.where(unscreened, UNSCREENED, np.where(suspect, SUSPECT, np.where(review, REVIEW, OK)))
    score = np.where(contradicted | strong | (suspect & slip_fits), np.maximum(score, config.suspect_z), score)
    score = np.where(unscreened, np.nan, np.round(score, 3))
    main = _main_sentences(values, local, absz, unscreened, reason_fallback, max_neighbour_distance, echoed, status, config)

    flagged = np.isin(status, FLAGGED)
    # evidence that decided the status leads; the residual sentence follows
    lead = np.full(n, "", dtype=object)
    for mask, text, level in evidence:
        said = mask & ~unscreened & (text != "")
        if level == "note":
            continue
        for i in np.flatnonzero(said):
            lead[i] = text[i] if lead[i] == "" else f"{lead[i]}; {text[i]}"
    parts = [np.where(lead != "", lead, ""), np.array(main, dtype=object)]

    if autocorr is not None:
        parts.append(_moran_text(autocorr, flagged, status, config))
    parts.append(_coincident_text(coincident, ids, values, config))
    if slips is not None:
        parts.append(np.where(flagged, slips[1], ""))
    for extra in supporting:
        parts.append(np.where(flagged, extra, ""))
    for mask, text, level in evidence:
        if level == "note":
            parts.append(np.where(mask, text, ""))

    reasons = np.asarray(parts[0], dtype=object).copy()
    for extra in parts[1:]:
        extra = np.asarray(extra, dtype=object)
        for i in np.flatnonzero(extra != ""):  # only the few rows with more to say
            reasons[i] = extra[i] if reasons[i] == "" else f"{reasons[i]}; {extra[i]}"
    return pd.DataFrame({"screen_status": status, "screen_score": score, "screen_reasons": reasons})


def _main_sentences(values, local, absz, unscreened, reason_fallback, max_neighbour_distance, echoed, status, config):
    """The residual sentence of every row, worded so it never contradicts the status."""
    z = local.z
    count = local.neighbour_count
    # Rows within the review threshold share a handful of sentences: build each
    # distinct one once (fast for a million rows).
    quiet = ~unscreened & (absz < config.review_z)
    main = np.where(unscreened, reason_fallback, "").astype(object)
    if quiet.any():
        rounded = _round_length(max_neighbour_distance[quiet])
        lengths, where_length = np.unique(rounded, return_inverse=True)
        distance_text = np.array([format_length(d) for d in lengths], dtype=object)
        # one integer per (z in tenths, neighbour count, distance): np.unique over
        # int64 is several times faster than factorizing a three-column index
        tenths = np.rint(np.round(absz[quiet], 1) * 10).astype(np.int64)
        k_quiet = count[quiet].astype(np.int64)
        k_span = int(k_quiet.max()) + 1
        key = (tenths * k_span + k_quiet) * lengths.size + where_length
        uniques, codes = np.unique(key, return_inverse=True)
        d_of, rest = uniques % lengths.size, uniques // lengths.size
        sentences = np.array(
            [
                f"within {t / 10:.1f} robust sd of the value expected from {k} neighbours within {distance_text[d]}"
                for t, k, d in zip(rest // k_span, rest % k_span, d_of)
            ],
            dtype=object,
        )
        main[quiet] = sentences[codes.ravel()]
    feature = _feature(config)
    for i in np.flatnonzero(~unscreened & ~quiet):
        a = absz[i]
        neighbours = f"{count[i]} neighbours within {format_length(max_neighbour_distance[i])}"
        side = "above" if z[i] > 0 else "below"
        text = (
            f"value {_value(values[i], config)} is {a:.1f} robust sd {side} the {_value(local.expected[i], config)} "
            f"expected from {neighbours}"
        )
        # a coherent deviation is said to be a feature only when it did not decide a suspect
        if echoed[i] and status[i] != SUSPECT:
            if local.explained_by_curvature[i]:
                text += (
                    f", but the {'plane' if local.quadratic_used[i] else 'curved surface'} of those neighbours "
                    f"predicts it within {abs(local.curved_z[i]):.1f} sd: {feature}"
                )
            else:
                text += f", but {local.echo[i]:.0%} of those neighbours deviate the same way: {feature}"
        main[i] = text
    return main


def _moran_text(autocorr, flagged, status, config):
    """Local Moran's I as supporting evidence of flagged points.

    A smooth field puts half of all points in significant clusters; saying so
    on every ok row would bury the message. A suspect is never called "part
    of a cluster" (it is flagged because it stands apart).
    """
    n = status.size
    significant = np.isfinite(autocorr.p_adjusted) & (autocorr.p_adjusted <= config.fdr) & flagged
    outlier = significant & np.isin(autocorr.quadrant, (2, 4))
    cluster = significant & np.isin(autocorr.quadrant, (1, 3)) & (status != SUSPECT)
    text = np.full(n, "", dtype=object)
    for i in np.flatnonzero(outlier | cluster):
        kind = "spatial outlier" if outlier[i] else "part of a cluster"
        text[i] = (
            f"local Moran's I: {kind}, {QUADRANT_WORDS[int(autocorr.quadrant[i])]} "
            f"(p = {autocorr.p_value[i]:.2g}, adjusted {autocorr.p_adjusted[i]:.2g}; Gi* z = {autocorr.gi_star_z[i]:.1f})"
        )
    return text


def _coincident_text(coincident, ids, values, config):
    role = coincident["role"].to_numpy()
    diff = coincident["difference"].to_numpy()
    partner = coincident["partner"].to_numpy()
    text = np.full(role.size, "", dtype=object)
    for i in np.flatnonzero(role != ""):
        other = ids[partner[i]] if 0 <= partner[i] != i else "another record"
        d = _value(diff[i], config)
        if role[i] == ROLE_AGREES:
            text[i] = f"a coincident record ({other}) agrees"
        elif role[i] == ROLE_CONTRADICTED:
            text[i] = f"coincident record disagrees by {d}: the neighbours side with {other}"
        elif role[i] == "supported":
            text[i] = f"coincident record disagrees by {d}: the neighbours side with this record, not {other}"
        else:
            text[i] = f"coincident record disagrees by {d} ({other}); the neighbours cannot tell which is right"
    return text
