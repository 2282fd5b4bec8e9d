"""Planted-error benchmark of ``pointsift campaigns`` on the real shared programme (seeded).

Reads the public DWR water levels from ``<repo>/../shared/data/dwr-sacramento``
(or ``$POINTSIFT_SHARED_DATA/dwr-sacramento``), never copies them, and plants
mistakes into chosen readings (each in a different well, each a reading that
represents its well in a screened campaign and has a previous reading):

* decimal slip (value x 10), feet entered as metres (x 0.3048), two adjacent
  digits of the whole part transposed;
* a datum step that persists (every reading of the well from the chosen
  campaign on moved by 3 to 6 x the well's typical change, at least 2 ft;
  counted at its first reading);
* a copied earlier reading (the well's reading 2 to 6 campaigns earlier,
  one whose level differs by more than twice the typical change: a closer
  copy is right within the noise);
* a lone jump of 5 x the well's typical change (1.4826 MAD of its changes);
* a well whose coordinates changed (this reading placed 3 to 10 km away);

and, in a second run, two sound changes that must not be ``suspect``: a
regional decline over the last eight campaigns (every well, 2 to 16 ft,
steeper to the south) and a new local pumping centre (wells within 6 km of a
chosen well drawn down by up to 40 ft, growing over six campaigns).

Recall and false alarms are printed beside the single-campaign screen (the
``campaign_status`` column of the same run) and beside a per-well rule (a
reading more than 3.5 robust sd of its well's series from the series
median). The share of the publisher's pumping-coded readings called
suspect/review with and without history comes from the unplanted run.

Run: ``python benchmarks/campaigns_planted.py [--jobs 2] [--seed 7]``
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd

from pointsift.campaigns import CampaignConfig, screen_campaigns
from pointsift.config import ScreenConfig

ROOT = Path(__file__).resolve().parents[1]
KINDS = ("decimal slip", "feet as metres", "transposed digits", "datum step", "copied reading", "lone jump", "moved well")


def shared_data() -> Path:
    """Folder of the shared programme (env var POINTSIFT_SHARED_DATA, else beside the repository)."""
    base = os.environ.get("POINTSIFT_SHARED_DATA")
    # beside the repository; a git worktree one level deeper looks beside its parent folder too
    candidates = [Path(base), Path(base) / "dwr-sacramento"] if base else [
        ROOT.parent / "shared" / "data" / "dwr-sacramento", ROOT.parent.parent / "shared" / "data" / "dwr-sacramento"]
    for folder in candidates:
        if (folder / "measurements.csv.gz").exists():
            return folder
    sys.exit(f"The shared programme is not at {candidates[0]}; set POINTSIFT_SHARED_DATA to the dwr-sacramento folder (or the folder holding it).")


def load_programme() -> gpd.GeoDataFrame:
    """Long-form readings (one row per reading) with each station's location (NAD83)."""
    folder = shared_data()
    readings = pd.read_csv(folder / "measurements.csv.gz", low_memory=False)
    stations = pd.read_csv(folder / "stations.csv")[["STN_ID", "LATITUDE", "LONGITUDE", "WELL_DEPTH"]]
    frame = readings.merge(stations, on="STN_ID", how="left")
    return gpd.GeoDataFrame(frame, geometry=gpd.points_from_xy(frame.LONGITUDE, frame.LATITUDE), crs="EPSG:4269")


def config(jobs: int) -> CampaignConfig:
    return CampaignConfig(screen=ScreenConfig(value="WSE", id="STN_ID"), date="MSMT_DATE", jobs=jobs)


def _transpose(value: float) -> float | None:
    whole = str(int(abs(value)))
    for i in range(len(whole) - 1):
        if whole[i] != whole[i + 1] and abs(int(whole[i]) - int(whole[i + 1])) >= 2:
            swapped = whole[:i] + whole[i + 1] + whole[i] + whole[i + 2:]
            return float(np.sign(value) * (int(swapped) + (abs(value) - int(abs(value)))))
    return None


def _typical_change(g: pd.DataFrame) -> float:
    """1.4826 MAD of the well's changes between consecutive readings (unplanted)."""
    changes = np.diff(g.WSE.to_numpy())
    return float(1.482602218505602 * np.median(np.abs(changes - np.median(changes))))


def plant_errors(frame: gpd.GeoDataFrame, base: pd.DataFrame, rng, per_kind: int):
    """Plant the mistakes; return the planted frame, {row: kind} and the rows carrying a step after its start."""
    out = frame.copy()
    # each well's representative readings in time order (the file is not sorted by date)
    series = base[base.reading_role == "represents the well"].assign(_t=pd.to_datetime(base.MSMT_DATE, utc=True))
    series = series.sort_values(["STN_ID", "_t"], kind="stable")
    eligible = series[(series.history_campaigns >= 10) & (series.campaign_status != "") & series.change_z.notna()]
    wells = rng.permutation(eligible.STN_ID.unique())
    planted, carried = {}, []
    by_well = {w: g for w, g in series.groupby("STN_ID")}
    well_iter = iter(wells)
    for kind in KINDS:
        done = 0
        while done < per_kind:
            w = next(well_iter)
            g = by_well[w]
            choices = g.index[(g.index.isin(eligible.index)) & (np.arange(len(g)) >= 6)]
            if len(choices) == 0:
                continue
            row = int(rng.choice(choices))
            v = float(out.at[row, "WSE"])
            position = int(np.flatnonzero(g.index == row)[0])
            if kind == "decimal slip":
                if abs(v) < 10:
                    continue
                new = v * 10
            elif kind == "feet as metres":
                if abs(v) < 30:
                    continue
                new = round(v * 0.3048, 2)
            elif kind == "transposed digits":
                new = _transpose(v)
                if new is None or abs(v) < 10:
                    continue
            elif kind == "datum step":
                shift = float(rng.choice([-1, 1]) * rng.uniform(3, 6) * max(_typical_change(g), 2.0))
                later = g.index[position:]
                out.loc[later, "WSE"] = (out.loc[later, "WSE"] + shift).round(2)
                carried.extend(int(r) for r in later[1:])
                planted[row] = kind
                done += 1
                continue
            elif kind == "copied reading":
                # a copy that matters: from an earlier campaign (2 to 6 back) whose level differs from
                # this one by more than twice the well's typical change (a closer copy is right within the noise)
                new = float(out.at[int(g.index[position - int(rng.integers(2, 7))]), "WSE"])
                if abs(new - v) <= 2 * _typical_change(g):
                    continue
            elif kind == "lone jump":
                new = round(v + float(rng.choice([-1, 1])) * 5 * max(_typical_change(g), 0.5), 2)
            else:  # moved well
                angle, distance = rng.uniform(0, 2 * np.pi), rng.uniform(3000, 10000)
                lat = out.at[row, "LATITUDE"] + distance * np.sin(angle) / 111_000
                lon = out.at[row, "LONGITUDE"] + distance * np.cos(angle) / (111_000 * np.cos(np.radians(38.5)))
                out.loc[row, "geometry"] = gpd.points_from_xy([lon], [lat])[0]
                planted[row] = kind
                done += 1
                continue
            out.at[row, "WSE"] = new
            planted[row] = kind
            done += 1
    return out, planted, carried


def plant_sound(frame: gpd.GeoDataFrame, base: pd.DataFrame, rng):
    """A regional decline over the last eight campaigns and a new pumping centre; returns rows of each."""
    out = frame.copy()
    rep = base.reading_role == "represents the well"
    labels = sorted(base.loc[rep, "campaign_label"].unique(), key=lambda c: (c[:4], c[5:] != "spring"))
    last = labels[-8:]
    lat = out.LATITUDE.to_numpy()
    south = (lat.max() - lat) / max(np.ptp(lat), 1e-9)
    decline_rows = []
    for k, label in enumerate(last):
        rows = np.flatnonzero(rep & (base.campaign_label == label))
        out.loc[rows, "WSE"] = (out.loc[rows, "WSE"] - 2.0 * (k + 1) * (0.5 + south[rows])).round(2)
        decline_rows.extend(rows.tolist())
    # the pumping centre: in campaigns before the decline
    centre_campaigns = labels[-16:-10]
    centre = base.loc[rep & (base.campaign_label.isin(centre_campaigns))].STN_ID.value_counts().index
    well = rng.choice(np.asarray(centre[:200]))
    where = base.loc[base.STN_ID == well, ["LATITUDE", "LONGITUDE"]].iloc[0]
    dy = (out.LATITUDE - where.LATITUDE) * 111_000
    dx = (out.LONGITUDE - where.LONGITUDE) * 111_000 * np.cos(np.radians(38.5))
    r = np.hypot(dx, dy).to_numpy()
    centre_rows = []
    for k, label in enumerate(labels[-16:]):
        depth = 40.0 * (1 - np.exp(-(min(k, 5) + 1) / 2.5)) * np.exp(-((r / 4000.0) ** 2))
        rows = np.flatnonzero(rep & (base.campaign_label == label) & (r < 6000) & (depth >= 1.0))
        out.loc[rows, "WSE"] = (out.loc[rows, "WSE"] - depth[rows]).round(2)
        centre_rows.extend(rows.tolist())
    return out, np.array(decline_rows), np.array(centre_rows), well


def _causes(run: pd.DataFrame) -> pd.Series:
    """The evidence behind each reading's status, in words (for the false-alarm breakdown)."""
    flags = run.history_flags.fillna("")
    cause = np.where(run.location_shift_m.fillna(0) > 0.5, "location", "")
    cause = np.where((cause == "") & flags.str.contains("spike"), "spike", cause)
    cause = np.where((cause == "") & flags.str.contains(r"\bstep", regex=True), "step", cause)
    cause = np.where((cause == "") & flags.str.contains("outside"), "range", cause)
    cause = np.where((cause == "") & (run.campaign_status == "suspect"), "campaign screen", cause)
    cause = np.where((cause == "") & (run.change_z.abs() >= 3.5), "change", cause)
    return pd.Series(np.where(cause == "", "other", cause), index=run.index)


def per_well_rule(frame: pd.DataFrame, rep: np.ndarray) -> np.ndarray:
    """Reading more than 3.5 robust sd of its well's series from the series median (representative readings)."""
    flagged = np.zeros(len(frame), dtype=bool)
    sub = frame.loc[rep, ["STN_ID", "WSE"]]
    med = sub.groupby("STN_ID").WSE.transform("median")
    mad = (sub.WSE - med).abs().groupby(sub.STN_ID).transform("median") * 1.482602218505602
    flagged[np.flatnonzero(rep)] = ((sub.WSE - med).abs() > 3.5 * mad.clip(lower=0.01)).to_numpy()
    return flagged


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--jobs", type=int, default=2)
    parser.add_argument("--seed", type=int, default=7)
    parser.add_argument("--per-kind", type=int, default=25)
    args = parser.parse_args()
    rng = np.random.default_rng(args.seed)
    frame = load_programme()
    t = time.perf_counter()
    base = screen_campaigns(frame, config(args.jobs)).readings
    print(f"unplanted run: {time.perf_counter() - t:.1f} s, {len(frame)} readings")
    rep = (base.reading_role == "represents the well").to_numpy()

    # the publisher's quality codes (unplanted run)
    pumping = rep & base.WLM_QA_DESC.isin(["Pumping", "Pumped recently", "Nearby pump operating"]).to_numpy()
    uncoded = rep & base.WLM_QA_DESC.isna().to_numpy() & (base.reading_status != "unscreened").to_numpy()
    flagged_with = base.reading_status.isin(["suspect", "review"]).to_numpy()
    flagged_without = base.campaign_status.isin(["suspect", "review"]).to_numpy()
    print(f"\npumping-coded representative readings: {pumping.sum()}")
    for name, f in (("with history (campaigns)", flagged_with), ("without history (campaign screen)", flagged_without)):
        print(f"  {name}: suspect/review {f[pumping].mean():.1%} of pumping-coded, {f[uncoded].mean():.1%} of uncoded; "
              f"suspect {((base.reading_status if 'with' in name and 'out' not in name else base.campaign_status) == 'suspect').to_numpy()[pumping].mean():.1%} of pumping-coded")

    planted_frame, planted, carried = plant_errors(frame, base, rng, args.per_kind)
    t = time.perf_counter()
    run = screen_campaigns(planted_frame, config(args.jobs)).readings
    print(f"\nplanted run: {time.perf_counter() - t:.1f} s")
    rule = per_well_rule(planted_frame, rep)
    rows = np.array(list(planted))
    kinds = np.array([planted[r] for r in rows])
    status = run.reading_status.to_numpy()
    single = run.campaign_status.to_numpy()
    print(f"\n{'mistake':<20}{'n':>4}{'suspect':>9}{'flagged':>9}{'single':>9}{'per-well':>10}")
    for kind in KINDS + ("all",):
        sel = rows if kind == "all" else rows[kinds == kind]
        print(f"{kind:<20}{sel.size:>4}{(status[sel] == 'suspect').mean():>9.2f}{np.isin(status[sel], ['suspect', 'review']).mean():>9.2f}"
              f"{(single[sel] == 'suspect').mean():>9.2f}{rule[sel].mean():>10.2f}")
    untouched = rep & ~np.isin(np.arange(len(run)), np.concatenate([rows, np.array(carried, dtype=int)]))
    judged = untouched & (status != "unscreened")
    judged_single = untouched & np.isin(single, ["suspect", "review", "ok"])
    print(f"\nuntouched judged readings: {judged.sum()}")
    print(f"  suspect: campaigns {(status[judged] == 'suspect').mean():.2%}, single screen {(single[judged_single] == 'suspect').mean():.2%}, "
          f"per-well rule {rule[judged].mean():.2%}")
    print(f"  review:  campaigns {(status[judged] == 'review').mean():.2%}, single screen {(single[judged_single] == 'review').mean():.2%}")
    print(f"  readings after a planted step (not counted above): {len(carried)}, suspect {(status[carried] == 'suspect').mean():.2%}")
    causes = _causes(run)
    false = judged & (status == "suspect")
    print("  untouched suspects by evidence: " + ", ".join(f"{k} {v}" for k, v in causes[false].value_counts().items()))
    coded = run.WLM_QA_DESC.notna().to_numpy()
    print(f"  suspect among untouched readings without a publisher's quality code: "
          f"{(status[judged & ~coded] == 'suspect').mean():.2%} (campaigns), "
          f"{(single[judged_single & ~coded] == 'suspect').mean():.2%} (single screen)")
    for r in np.random.default_rng(1).choice(np.flatnonzero(false), size=min(6, int(false.sum())), replace=False):
        print(f"  untouched suspect: {run.reading_reasons[r][:260]}")
    missed = rows[status[rows] != "suspect"]
    for r in missed[:16]:
        print(f"  missed {planted[r]:<18} {run.reading_status[r]:<8} {run.reading_reasons[r][:220]}")

    sound_frame, decline, centre, well = plant_sound(frame, base, rng)
    t = time.perf_counter()
    sound = screen_campaigns(sound_frame, config(args.jobs)).readings
    print(f"\nsound-change run: {time.perf_counter() - t:.1f} s (pumping centre at well {well})")
    s_status = sound.reading_status.to_numpy()
    b_status = base.reading_status.to_numpy()
    for name, sel in (("regional decline", decline), ("new pumping centre", centre)):
        print(f"  {name}: {sel.size} readings, suspect {(s_status[sel] == 'suspect').mean():.2%} "
              f"(unplanted run {(b_status[sel] == 'suspect').mean():.2%}), review {(s_status[sel] == 'review').mean():.2%}, "
              f"single screen suspect {(sound.campaign_status.to_numpy()[sel] == 'suspect').mean():.2%}, "
              f"per-well rule {per_well_rule(sound_frame, rep)[sel].mean():.2%}")


if __name__ == "__main__":
    main()
