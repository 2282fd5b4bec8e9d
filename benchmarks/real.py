"""Benchmark on real monitoring data: the fall campaigns 2012-2019 of the shared DWR extract.

Reads ``<repo>/../shared/data/dwr-sacramento`` (or ``$POINTSIFT_SHARED_DATA``);
prints a clear message and exits 0 when it is absent. Nothing is copied into
the repository. One reading per well per campaign (``realdata.fall_campaign``).

Part 1, the campaigns as published: counts per status; the share of readings
the publisher coded as taken while pumping or just after ("Pumping", "Pumped
recently", "Nearby pump operating") called ``suspect`` and ``suspect`` or
``review``; the share of uncoded readings called ``suspect``; without and with
the context columns (ground elevation ``WLM_GSE``, well depth, site = the site
code without its completion suffix, units ft, the publisher's flowing codes as
the flowing marker).

Part 2, realistic mistakes planted by this script (seeded) into uncoded
readings, no two among each other's 8 nearest wells, a mistake kept only when
it moves the value by at least 2 local sd (the invented networks' rule,
``networks.local_sd``): ``decimal`` (x10 or /10), ``ft_m`` (the level in
metres, x 0.3048), ``transposed`` (two adjacent digits of the value written to
the hundredth, ``networks.transpose_digits``), ``sign``, ``depth_as_level``
(the well's own depth to water in the level field), ``far_well`` (the level of
a well at least 20 km away), ``duplicate`` (a second record of the well, same
id, site and depth, 6-12 local sd off; the extra record is the mistake),
``misplaced`` (coordinates moved 2-10 km, level, ground and depth kept, where
the level differs by at least 3 local sd from the nearest well there). About
5 % of the wells per campaign. Recall at ``suspect`` by kind, and false alarms
(uncoded, unplanted readings called ``suspect``), for pointsift without and
with context, the 8-nearest-neighbour median rule and global Tukey fences
(both from ``accuracy.py``); and recall at ``suspect`` by the size of the
planted change in local sd (the value kinds), which says how many mistakes
are too small for any screen at this false-alarm rate.

Run ``python benchmarks/real.py`` (seeds 0-2); ``--seeds 0 1 2 3 4`` for more.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
from scipy.spatial import cKDTree

sys.path.insert(0, str(Path(__file__).resolve().parent))

from accuracy import nearest_median, tukey_fences  # noqa: E402
from networks import local_sd, transpose_digits  # noqa: E402
from realdata import CAMPAIGN_YEARS, data_dir, fall_campaign  # noqa: E402

import pointsift  # noqa: E402

KINDS = ("decimal", "ft_m", "transposed", "sign", "depth_as_level", "far_well", "duplicate", "misplaced")
CONTEXT = dict(ground_elevation="WLM_GSE", well_depth="WELL_DEPTH", site="site", units="ft", flowing="flowing")
WORK_CRS = "EPSG:32610"
#: Bins of the planted change in local sd for the recall-by-size table.
SIZE_BINS = (2.0, 3.0, 3.5, 4.0, 6.0, 8.0, np.inf)


def _screen(layer, context: bool, **options):
    extra = CONTEXT if context else {}
    return pointsift.screen(layer, value="WSE", id="STN_ID", **extra, **options)["screen_status"].to_numpy()


def plant(layer: gpd.GeoDataFrame, seed: int, share: float = 0.05):
    """Plant mistakes; returns the new layer, the kind per row ("" clean) and the change in local sd (NaN: none or not a value change)."""
    rng = np.random.default_rng([seed, int(layer["MSMT_DATE"].str[:4].iloc[0])])
    work = layer.to_crs(WORK_CRS)
    xy = np.column_stack([work.geometry.x, work.geometry.y]) / 1000.0  # km
    level = layer["WSE"].to_numpy(float)
    usable = np.isfinite(level) & layer["uncoded"].to_numpy()
    rows_ok = np.flatnonzero(usable)
    tree = cKDTree(xy[rows_ok])
    sd = np.full(len(layer), np.nan)
    sd[rows_ok] = local_sd(xy[rows_ok], level[rows_ok])
    per_kind = max(1, round(share * usable.sum() / len(KINDS)))
    # spaced rows: none among another's 8 nearest
    chosen: list[int] = []
    blocked: set[int] = set()
    for r in rng.permutation(rows_ok):
        if r in blocked:
            continue
        chosen.append(int(r))
        _, near = tree.query(xy[r], k=9)
        blocked.update(rows_ok[near].tolist())
        if len(chosen) >= per_kind * len(KINDS) * 2:
            break
    out = layer.copy()
    kind = np.full(len(layer), "", dtype=object)
    size = np.full(len(layer), np.nan)
    extra_rows = []
    pool = iter(chosen)
    for k in KINDS:
        done = 0
        for r in pool:
            v, s = level[r], sd[r]
            new = None
            if k == "decimal":
                new = round(v * rng.choice([10.0, 0.1]), 2)
            elif k == "ft_m":
                new = round(v * 0.3048, 2)
            elif k == "transposed":
                swap = transpose_digits(v, rng, 2.0 * s)
                new = None if swap is None else swap[0]
            elif k == "sign":
                new = -v
            elif k == "depth_as_level":
                new = float(layer["GSE_WSE"].iloc[r])
            elif k == "far_well":
                far = rows_ok[np.hypot(*(xy[rows_ok] - xy[r]).T) >= 20.0]
                new = float(level[rng.choice(far)]) if far.size else None
            elif k == "duplicate":
                gap = max(2.0, rng.uniform(6.0, 12.0) * s) * rng.choice([-1.0, 1.0])
                twin = out.iloc[[r]].copy()
                twin["WSE"] = round(v + gap, 2)
                extra_rows.append(twin)
                done += 1
            elif k == "misplaced":
                for _ in range(32):
                    angle, step = rng.uniform(0, 2 * np.pi), rng.uniform(2.0, 10.0)
                    spot = xy[r] + step * np.array([np.cos(angle), np.sin(angle)])
                    _, j = tree.query(spot)
                    if abs(level[rows_ok[j]] - v) >= 3.0 * sd[rows_ok[j]]:
                        from pyproj import Transformer

                        lon, lat = Transformer.from_crs(WORK_CRS, layer.crs, always_xy=True).transform(*(spot * 1000.0))
                        out.loc[out.index[r], "geometry"] = gpd.points_from_xy([lon], [lat])[0]
                        kind[r] = k
                        done += 1
                        break
            if new is not None and k not in ("duplicate", "misplaced"):
                if np.isfinite(new) and abs(new - v) >= 2.0 * s:
                    out.loc[out.index[r], "WSE"] = new
                    kind[r] = k
                    size[r] = abs(new - v) / s
                    done += 1
            if done >= per_kind:
                break
    if extra_rows:
        out = pd.concat([out, *extra_rows], ignore_index=True)
        kind = np.concatenate([kind, np.full(len(extra_rows), "duplicate", dtype=object)])
        size = np.concatenate([size, np.full(len(extra_rows), np.nan)])
    return gpd.GeoDataFrame(out, geometry="geometry", crs=layer.crs), kind, size


def _baseline(layer, method):
    work = layer.to_crs(WORK_CRS)
    v = layer["WSE"].to_numpy(float)
    status = np.full(v.size, "unscreened", dtype=object)
    ok = np.isfinite(v)
    xy = np.column_stack([work.geometry.x, work.geometry.y])[ok]
    flag = tukey_fences(v[ok]) if method == "tukey" else nearest_median(xy, v[ok])
    status[ok] = np.where(flag, "suspect", "ok")
    return status


def part1(years, options):
    rows = []
    for context in (False, True):
        total = {"suspect": 0, "review": 0, "ok": 0, "unscreened": 0}
        pump_s = pump_sr = pump_n = unc_s = unc_n = 0
        for year in years:
            layer = fall_campaign(year)
            status = _screen(layer, context, **options)
            for s in total:
                total[s] += int((status == s).sum())
            p = layer["pumping"].to_numpy() & np.isfinite(layer["WSE"].to_numpy(float))
            u = layer["uncoded"].to_numpy() & (status != "unscreened")
            pump_n += p.sum()
            pump_s += (status[p] == "suspect").sum()
            pump_sr += np.isin(status[p], ("suspect", "review")).sum()
            unc_n += u.sum()
            unc_s += (status[u] == "suspect").sum()
        rows.append({"context": context, **total, "pumping readings with a value": int(pump_n),
                     "pumping S": pump_s / max(pump_n, 1), "pumping S+R": pump_sr / max(pump_n, 1),
                     "uncoded judged": int(unc_n), "uncoded S": unc_s / max(unc_n, 1)})
    return pd.DataFrame(rows)


def part2(years, seeds, options):
    methods = ("pointsift", "pointsift+context", "median8", "tukey")
    hits = {m: dict.fromkeys(KINDS, 0) for m in methods}
    hits_sr = dict.fromkeys(methods, 0)
    review_false = dict.fromkeys(methods, 0)
    planted = dict.fromkeys(KINDS, 0)
    false = dict.fromkeys(methods, 0)
    clean_n = 0
    by_size = {m: np.zeros((len(SIZE_BINS) - 1, 2), dtype=int) for m in methods}
    for seed in seeds:
        for year in years:
            layer, kind, size = plant(fall_campaign(year), seed)
            sized = np.isfinite(size)
            which = np.digitize(size[sized], SIZE_BINS) - 1
            clean = (kind == "") & layer["uncoded"].to_numpy() & np.isfinite(layer["WSE"].to_numpy(float))
            clean_n += clean.sum()
            for k in KINDS:
                planted[k] += int((kind == k).sum())
            for m in methods:
                if m.startswith("pointsift"):
                    status = _screen(layer, m.endswith("context"), **options)
                else:
                    status = _baseline(layer, m)
                for k in KINDS:
                    hits[m][k] += int((status[kind == k] == "suspect").sum())
                false[m] += int((status[clean] == "suspect").sum())
                review_false[m] += int((status[clean] == "review").sum())
                hits_sr[m] += int(np.isin(status[kind != ""], ("suspect", "review")).sum())
                caught = status[sized] == "suspect"
                for b in range(len(SIZE_BINS) - 1):
                    by_size[m][b] += (int((which == b).sum()), int(caught[which == b].sum()))
    table = []
    for m in methods:
        row = {"method": m, **{k: hits[m][k] / max(planted[k], 1) for k in KINDS}}
        row["all S"] = sum(hits[m].values()) / max(sum(planted.values()), 1)
        row["all S+R"] = hits_sr[m] / max(sum(planted.values()), 1)
        row["false S"] = false[m] / max(clean_n, 1)
        row["false R"] = review_false[m] / max(clean_n, 1)
        table.append(row)
    sizes = pd.DataFrame(
        {"change in local sd": [f"{a:g}-{b:g}" if np.isfinite(b) else f">= {a:g}" for a, b in zip(SIZE_BINS[:-1], SIZE_BINS[1:])],
         "planted": by_size[methods[0]][:, 0],
         **{m: by_size[m][:, 1] / np.maximum(by_size[m][:, 0], 1) for m in methods}})
    return pd.DataFrame(table), planted, int(clean_n), sizes


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seeds", type=int, nargs="+", default=[0, 1, 2])
    parser.add_argument("--years", type=int, nargs="+", default=list(CAMPAIGN_YEARS))
    parser.add_argument("--permutations", type=int, default=199)
    parser.add_argument("--part", choices=("1", "2", "both"), default="both")
    parser.add_argument("--option", action="append", default=[], help="a pointsift.screen option KEY=VALUE (text or true/false)")
    args = parser.parse_args(argv)
    if data_dir() is None:
        print("The shared DWR data (../shared/data/dwr-sacramento or $POINTSIFT_SHARED_DATA) is absent: nothing to run.")
        return 0
    options = {"permutations": args.permutations}
    for text in args.option:
        key, _, value = text.partition("=")
        options[key] = {"true": True, "false": False}.get(value.lower(), value)
    started = time.perf_counter()
    pd.set_option("display.width", 200)
    if args.part in ("1", "both"):
        print("Part 1: the fall campaigns as published (counts pooled over", len(args.years), "campaigns)")
        print(part1(args.years, options).to_string(index=False, float_format=lambda v: f"{v:.3f}"))
    if args.part in ("2", "both"):
        table, planted, clean_n, sizes = part2(args.years, args.seeds, options)
        print(f"\nPart 2: planted mistakes, seeds {args.seeds}; planted per kind {planted}; clean uncoded readings {clean_n}")
        print(table.to_string(index=False, float_format=lambda v: f"{v:.3f}"))
        print("\nRecall at suspect by the size of the value change (local sd of the levels; value kinds only, "
              "not duplicate or misplaced)")
        print(sizes.to_string(index=False, float_format=lambda v: f"{v:.2f}"))
    print(f"\n{time.perf_counter() - started:.0f} s; pointsift {pointsift.__version__}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
