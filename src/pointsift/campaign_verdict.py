"""One status, score and reasons per reading from the campaign, change and history screens.

Statuses
--------
``suspect``
    Two independent pieces of evidence, one of them at the suspect level (the
    other may be at the review level; an exact copy with any other piece), or
    one very strong one. The pieces: the change since the previous campaign reaches
    ``suspect_z`` against the neighbours' changes (judged against the well's
    usual change into that season, not the way back from an earlier odd
    reading, and the neighbours did not change together); the change over the
    longer span does; the history finds a spike (``suspect_z``, with the
    change screen seeing the jump into or out of it), a step that persists (a
    reference-point or datum change) or a reading far outside the well's own
    range; the campaign screen calls it suspect (and the well is not as far
    from its neighbours in most campaigns); it equals an earlier reading to
    the last digit. Very strong alone: a change at twice ``suspect_z``, a
    location farther from the well's usual location than its nearest other
    well, or the campaign screen's suspect when nothing else can judge the
    reading.
``review``
    One piece of that evidence alone (a campaign-screen suspect whose change
    is in line with its neighbours' and whose history shows nothing says so:
    a lasting difference from the neighbours, not a new mistake), any of them
    at the review level (``review_z``), a constant run, a
    broken seasonal pattern, a change over the longer span out of line, or a
    small location change; and every suspect whose neighbours changed
    together (the change screen finds the neighbours' changes deviating
    alike (echo or curvature, :mod:`pointsift.methods.local`) and at least
    two neighbours, and at least 30 % of them, moved the same way by half as
    much or more): evidence of a
    real local change, such as a new pumping centre, keeps a reading at
    ``review`` at most.
``ok``
    At least one screen judged the reading and none flagged it. A reading
    equal to an earlier one to the last digit, with nothing else out of
    line, and a reading after a step keep their status; the reasons say so
    (equal readings happen by chance among a few hundred plausible values;
    a step is flagged where it starts).
``unscreened``
    No screen could judge it (the reasons say why), and every reading other
    than the one representing its well in its campaign.

Score
-----
The largest of the screens' scores (campaign score, |change z|, |spike z|,
|step z|, the range z scaled so that ``far_z`` maps to ``suspect_z``;
``suspect_z`` for a far location change, ``review_z`` for the review-only
rules), halved when the neighbours changed together.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .config import ScreenConfig
from .vocabulary import FLAGGED, OK, REVIEW, SUSPECT

__all__ = ["decide_readings", "READING_COLUMNS"]

#: Columns added to every reading, in order.
READING_COLUMNS = (
    "reading_status",
    "reading_score",
    "reading_reasons",
    "campaign_label",
    "reading_role",
    "campaign_status",
    "campaign_score",
    "campaign_expected_value",
    "campaign_residual_z",
    "change_from_campaign",
    "change",
    "neighbours_expected_change",
    "neighbours_median_change",
    "change_z",
    "neighbours_changed_alike",
    "span_from_campaign",
    "span_change",
    "span_expected_change",
    "span_change_z",
    "history_campaigns",
    "history_relative_level",
    "history_flags",
    "history_score",
    "location_shift_m",
    "neighbours_median_level",
)

_FAR_Z = 6.0


def _g(v: float) -> str:
    return f"{v:.3g}" if np.isfinite(v) else "n/a"


def _moved_text(change: float) -> str:
    return "rose" if change > 0 else "fell" if change < 0 else "did not change"


def _date(days: float) -> str:
    return str((pd.Timestamp("1970-01-01") + pd.Timedelta(days=float(days))).date()) if np.isfinite(days) else "?"


def decide_readings(*, n, reasons, representative, represented_by, campaign_code, labels, values, camp, change, history,
                    prev_row, shift, moved, nearest, days, config: ScreenConfig, span: int, min_campaigns: int,
                    season: np.ndarray) -> dict:
    """Status, score, reasons and per-screen columns for every reading.

    Parameters are the orchestration's per-row arrays (see
    :func:`pointsift.campaigns.screen_campaigns`): ``camp`` the campaign
    screen's columns, ``change`` the change screens' columns, ``history`` the
    history rules' evidence, ``prev_row`` each representative reading's
    previous reading of the same well (-1 for none), ``season`` each
    reading's season label ("" without seasons). Decisions follow the
    module docstring; this function is long because it states every rule
    and sentence in one place.

    Returns
    -------
    dict of ndarray
        The columns of :data:`READING_COLUMNS` (except the two the
        orchestration adds: ``campaign_label``, ``neighbours_median_level``).
    """
    rz, sz = config.review_z, config.suspect_z
    rep = representative & (reasons == "")
    z_raw, coherent = change["change_z"], change["coherent"]
    # a well whose seasonal swing is larger than its neighbours' changes out of line every year into the
    # same season: its change is judged against its own usual change z into that season (median of at
    # least 3), so only what is new stands out
    key = pd.DataFrame({"w": history["_well"], "s": season, "z": np.where(rep, z_raw, np.nan)})
    grouped = key.groupby(["w", "s"]).z
    usual = grouped.transform("median").to_numpy()
    usual = np.where(grouped.transform("count").to_numpy() >= 3, usual, 0.0)
    usual = np.where(np.isfinite(usual), usual, 0.0)
    z_in = z_raw - usual
    ch, nbmed, nbsd = change["change"], change["nb_median"], change["nb_sd"]
    with np.errstate(invalid="ignore"):
        absz = np.abs(z_in)
        prev = np.maximum(prev_row, 0)
        prev_ok = (prev_row >= 0) & (change["change_from"] == campaign_code[prev])
        # the way back after an odd previous reading: the previous change was out of line the other way (and
        # the history does not call this reading the spike), or the history calls the previous reading a spike
        returning = prev_ok & ((((np.abs(z_in[prev]) >= rz) & (np.sign(z_in[prev]) == -np.sign(z_in))) & ~history["spike"])
                               | history["spike"][prev])
        # neighbours changed together: the change screen's coherence test, and at least two neighbours that
        # moved the same way by at least half as much (from the regional change)
        group = np.maximum(2, np.ceil(0.3 * change["nb_count"]))
        alike = rep & ((np.isfinite(ch) & (absz >= rz) & coherent & (change["moving_with"] >= group))
                       | (np.isfinite(change["span_z"]) & (np.abs(change["span_z"]) >= rz) & change["span_coherent"]
                          & (change["span_moving_with"] >= group)))
        change_review = rep & (absz >= rz) & ~returning
        lone_change = change_review & (absz >= sz) & ~alike
        span_z = change["span_z"]
        span_review = rep & (np.abs(span_z) >= rz) & ~change["span_coherent"] & (~np.isfinite(z_in) | change_review)
        spike = rep & history["spike"]
        spike_s = spike & (np.abs(history["spike_z"]) >= sz)
        step = rep & history["step"]
        outside = rep & history["outside"]
        copied = rep & (history["copied_from"] >= 0)
        constant = rep & (history["constant_run"] > 0)
        broken = rep & history["broken_season"]
        after = rep & (history["after_step"] >= 0)
        moved_far = rep & moved & (shift > nearest)
        moved_near = rep & moved & ~moved_far
        camp_z = camp["z"]
        camp_flag = np.isin(camp["status"], FLAGGED)
    # the campaign screen's suspects that the well's own history explains: as far from the neighbours in most campaigns
    well_key = pd.Series(np.where(rep & np.isfinite(camp_z), np.arange(n), -1))
    persistent = np.zeros(n, dtype=bool)
    typical_z = np.full(n, np.nan)
    if (well_key >= 0).any():
        groups = pd.Series(camp_z).where(rep).groupby(history["_well"])
        typical_z = groups.transform("median").to_numpy()
        many = groups.transform("count").to_numpy() >= min_campaigns
        with np.errstate(invalid="ignore"):
            persistent = rep & many & (np.abs(typical_z) >= rz) & (np.abs(camp_z - typical_z) < rz)
    nxt = np.full(n, -1, dtype=np.int64)
    nxt[prev_row[prev_row >= 0]] = np.flatnonzero(prev_row >= 0)
    with np.errstate(invalid="ignore"):
        jump_out = (nxt >= 0) & (np.abs(z_in[np.maximum(nxt, 0)]) >= rz)
        span_out = rep & (np.abs(span_z) >= sz) & ~(change["span_coherent"] & (change["span_moving_with"] >= group))
    # suspect takes two independent pieces of evidence at the suspect level (the neighbours' change, the change
    # over the span, the history's spike (seen by the change screen into or out of it), step or range, the
    # campaign screen, an exact copy), or one very strong one: a change at twice suspect_z, a far location
    # change, or the campaign screen's suspect when nothing else can judge the reading
    camp_alone = rep & (camp["status"] == "suspect") & ~persistent
    evidence = np.stack([lone_change, span_out & ~returning, spike_s & (change_review | jump_out | ~np.isfinite(z_in)),
                         step, outside, camp_alone, copied]).astype(np.int64)
    count = evidence.sum(axis=0)
    # the same pieces at the review level (a second piece may be weaker than the first)
    weaker = np.stack([change_review & ~alike, rep & (np.abs(np.nan_to_num(span_z)) >= rz) & ~returning,
                       spike & (change_review | jump_out | ~np.isfinite(z_in)), step, outside, rep & camp_flag & ~persistent,
                       copied]).astype(np.int64).sum(axis=0)
    unjudged_otherwise = ~np.isfinite(z_in) & ~history["judged"]
    strong = (lone_change & (absz >= 2.0 * sz)) | moved_far | (camp_alone & unjudged_otherwise)
    in_line = camp_alone & (weaker == 1) & ~unjudged_otherwise
    suspect = rep & ((count >= 2) | ((count >= 1) & (weaker >= 2)) | (copied & (weaker >= 2)) | strong)
    copied_s = copied & suspect
    # a copy alone, and a reading after a step, are stated but do not flag: equal readings to the last digit
    # happen by chance (a few hundred distinct plausible values), and a step is flagged where it starts
    review_any = (rep & camp_flag) | change_review | span_review | spike | step | outside | copied_s | constant | broken | moved_near
    capped = suspect & alike & ~moved_far
    suspect = suspect & ~capped

    score = np.where(rep & np.isfinite(camp["score"]), np.where(persistent | in_line, 0.5 * camp["score"], camp["score"]), 0.0)
    with np.errstate(invalid="ignore"):
        score = np.fmax(score, np.where(change_review, np.where(coherent, 0.5, 1.0) * absz, 0.0))
        score = np.fmax(score, np.where(spike, np.abs(history["spike_z"]), 0.0))
        score = np.fmax(score, np.where(step, np.abs(history["step_z"]), 0.0))
        score = np.fmax(score, np.where(outside, np.abs(history["range_z"]) * sz / _FAR_Z, 0.0))
        score = np.fmax(score, np.where(moved_far | copied_s, sz, np.where(constant | broken | moved_near | span_review, rz, 0.0)))
    score = np.where(capped, 0.5 * score, score)
    judged = rep & (np.isin(camp["status"], (SUSPECT, REVIEW, OK)) | np.isfinite(z_in) | np.isfinite(span_z) | history["judged"])
    status = np.where(~judged, "unscreened", np.where(suspect, "suspect", np.where(review_any | capped, "review", "ok"))).astype(object)
    score = np.where(judged, np.round(score, 3), np.nan)

    text = _reasons(n=n, reasons=reasons, rep=rep, represented_by=represented_by, campaign_code=campaign_code, labels=labels,
                    values=values, camp=camp, change=change, history=history, prev_row=prev_row, shift=shift, days=days,
                    flags=dict(change_review=change_review, lone_change=lone_change, returning=returning & (absz >= rz),
                               span_review=span_review, spike=spike, step=step, outside=outside, copied=copied,
                               constant=constant, broken=broken, after=after, moved=moved_far | moved_near, capped=capped,
                               persistent=persistent & camp_flag, in_line=in_line & ~persistent & (camp["status"] == "suspect"),
                               judged=judged),
                    typical_z=typical_z, min_campaigns=min_campaigns, span=span, usual=usual)
    flags = np.full(n, "", dtype=object)
    for name, mask in (("spike", spike), ("step", step), ("after step", after), ("outside own range", outside),
                       ("copied", copied), ("constant", constant), ("seasonal pattern", broken)):
        for i in np.flatnonzero(mask):
            flags[i] = f"{flags[i]}, {name}" if flags[i] else name
    hist_score = np.where(rep & history["judged"], np.round(np.fmax(np.fmax(
        np.where(spike, np.abs(history["spike_z"]), 0.0), np.where(step, np.abs(history["step_z"]), 0.0)),
        np.where(outside, np.abs(history["range_z"]) * sz / _FAR_Z, 0.0)), 3), np.nan)
    role = np.where(rep, "represents the well", np.where(represented_by >= 0, "extra reading", "")).astype(object)
    label_of = lambda codes: np.where(codes >= 0, labels[np.maximum(codes, 0)], "").astype(object)  # noqa: E731
    return {
        "reading_status": status,
        "reading_score": score,
        "reading_reasons": text,
        "reading_role": role,
        "campaign_status": np.where(rep & (camp["status"] != ""), camp["status"], "").astype(object),
        "campaign_score": np.where(rep, camp["score"], np.nan),
        "campaign_expected_value": np.where(rep, camp["expected"], np.nan),
        "campaign_residual_z": np.where(rep, camp_z, np.nan),
        "change_from_campaign": label_of(change["change_from"]),
        "change": np.round(ch, 6),
        "neighbours_expected_change": np.round(change["expected_change"], 6),
        "neighbours_median_change": np.round(nbmed, 6),
        "change_z": np.round(z_raw, 4),
        "neighbours_changed_alike": np.where(np.isfinite(z_in), np.where(alike, "yes", "no"), "").astype(object),
        "span_from_campaign": label_of(change["span_from"]),
        "span_change": np.round(change["span_change"], 6),
        "span_expected_change": np.round(change["span_expected"], 6),
        "span_change_z": np.round(span_z, 4),
        "history_campaigns": np.where(rep, history["count"], 0).astype("int32"),
        "history_relative_level": np.round(history["relative"], 6),
        "history_flags": flags,
        "history_score": hist_score,
        "location_shift_m": np.round(shift, 2),
    }


def _reasons(*, n, reasons, rep, represented_by, campaign_code, labels, values, camp, change, history, prev_row, shift,
             days, flags, typical_z, min_campaigns, span, usual) -> np.ndarray:
    """Plain-language reasons per reading (all the evidence that fired, with its numbers)."""
    out = np.full(n, "", dtype=object)
    extras = pd.Series(represented_by[represented_by >= 0]).value_counts()
    rank = pd.Series(np.arange(n)).where(represented_by >= 0).groupby(represented_by).cumcount().to_numpy() + 2
    for i in range(n):
        if reasons[i] != "":
            out[i] = reasons[i]
            continue
        if represented_by[i] >= 0:
            r = represented_by[i]
            total = int(extras.get(r, 0)) + 1
            which = "second reading" if total == 2 else f"reading {rank[i]} of {total}"
            when = f"the reading of {_date(days[r])}, row {r + 1}" if np.isfinite(days[r]) else f"row {r + 1}"
            out[i] = f"{which} of this well in campaign {labels[campaign_code[i]]} ({when}, represents the well)"
            continue
        if not rep[i]:
            out[i] = "not screened"
            continue
        parts = []
        c = change
        if flags["moved"][i]:
            parts.append(f"location differs from this well's usual location by {shift[i]:.0f} m: moved well or wrong coordinates")
        if flags["change_review"][i]:
            k = int(c["nb_count"][i])
            parts.append(
                f"{_moved_text(c['change'][i])} {_g(abs(c['change'][i]))} since {labels[c['change_from'][i]]} while its {k} "
                f"neighbours {_moved_text(c['nb_median'][i])} {_g(abs(c['nb_median'][i]))} +- {_g(c['nb_sd'][i])} "
                f"(expected change {_g(c['expected_change'][i])}, z = {c['change_z'][i]:.1f})"
                + (f"; judged against this well's usual change z of {usual[i]:.1f} into this season" if abs(usual[i]) >= 1 else "")
                + ("; the neighbours' changes deviate alike" if c["coherent"][i] else "")
            )
        elif flags["returning"][i]:
            parts.append(f"change of {_g(c['change'][i])} since {labels[c['change_from'][i]]} is the way back after that reading")
        if flags["span_review"][i]:
            parts.append(
                f"over {span} campaigns (since {labels[c['span_from'][i]]}) {_moved_text(c['span_change'][i])} "
                f"{_g(abs(c['span_change'][i]))} while the neighbours {_moved_text(c['span_nb_median'][i])} "
                f"{_g(abs(c['span_nb_median'][i]))} (z = {c['span_z'][i]:.1f})"
            )
        h = history
        if flags["spike"][i]:
            dev = h["spike_z"][i] * h["reading_sd"][i] * np.sqrt(1.5)
            parts.append(f"spike: {dev:+.3g} off the readings before and after it, which agree (off and back; "
                         f"z = {h['spike_z'][i]:.1f} against this well's own history of {h['count'][i]} campaigns)")
        if flags["step"][i]:
            parts.append(f"step of the level relative to the neighbours that persists in the next readings "
                         f"(z = {h['step_z'][i]:.1f} over {h['count'][i]} campaigns): a reference-point or datum change? "
                         "check the reference elevation")
        if flags["after"][i]:
            parts.append(f"carries the step that started in {labels[campaign_code[h['after_step'][i]]]}")
        if flags["outside"][i]:
            parts.append(f"far outside this well's own range ({abs(h['range_z'][i]):.1f} robust sd from its median, "
                         f"beyond all its other {h['count'][i] - 1} readings)")
        if flags["copied"][i]:
            src = h["copied_from"][i]
            parts.append(f"equal to the reading of {labels[campaign_code[src]]} ({values[src]:g}) to the last digit: a copied record?")
        if flags["constant"][i]:
            parts.append(f"same value {values[i]:g} in {h['constant_run'][i]} consecutive campaigns (constant series: a placeholder or a stuck record?)")
        if flags["broken"][i]:
            parts.append(f"seasonal pattern broken this year: difference between seasons {h['season_difference'][i]:+.3g}, "
                         f"usually {h['season_usual'][i]:+.3g} ({h['season_years'][i]} years)")
        if flags["capped"][i]:
            parts.append(f"but the neighbours changed together (median {_g(c['nb_median'][i])}): evidence of a real change "
                         "(for example a new pumping centre), so review at most; check before correcting")
        if camp["status"][i] in (SUSPECT, REVIEW, OK):
            sentence = f"campaign screen: {camp['reasons'][i]}"
            if flags["persistent"][i]:
                sentence += (f"; but this well sits as far from its neighbours in most campaigns (median z = {typical_z[i]:.1f}): "
                             "a persistent local feature or a location/reference error, not this reading alone")
            elif flags["in_line"][i]:
                sentence += ("; but its change is in line with its neighbours' and its own history shows nothing at this "
                             "reading: a lasting difference from the neighbours (check the location and reference point), "
                             "not a new mistake")
            parts.append(sentence)
        elif camp["reasons"][i]:
            parts.append(f"campaign screen not run: {camp['reasons'][i]}")
        if not flags["change_review"][i] and not flags["returning"][i]:
            if np.isfinite(c["change_z"][i]):
                parts.append(f"change since {labels[c['change_from'][i]]} {_g(c['change'][i])}, neighbours {_g(c['nb_median'][i])} "
                             f"+- {_g(c['nb_sd'][i])} (z = {c['change_z'][i]:.1f})")
            elif prev_row[i] < 0:
                parts.append("first reading of this well: no change to screen")
            else:
                parts.append("change not screened (too few neighbours measured in both campaigns, or too long since the previous reading)")
        if not h["judged"][i]:
            parts.append(f"history not judged: only {h['count'][i]} campaign{'s' if h['count'][i] != 1 else ''} of this well "
                         f"(at least {min_campaigns} needed)")
        elif not any(flags[k][i] for k in ("spike", "step", "after", "outside", "copied", "constant", "broken")):
            parts.append(f"history: no rule fired over {h['count'][i]} campaigns")
        out[i] = "; ".join(parts)
    return out
