"""Accuracy benchmark: how many planted mistakes each screen finds, and at what cost.

For each network kind of ``benchmarks/networks.py`` and several seeds, the
wells are screened by ``pointsift.screen`` (the public API, default options
unless ``--option`` says otherwise) and by three baselines defined here:

``tukey``
    Global Tukey fences: ``suspect`` when a value lies below Q1 - 1.5 IQR or
    above Q3 + 1.5 IQR of all values (quartiles by linear interpolation,
    ``numpy.percentile``'s default).
``zscore``
    Global z-score: ``suspect`` when ``|v - mean| / sd > 3`` (sd with ddof=1).
``median8``
    Plain 8-nearest-median rule: for each record take its 8 nearest other
    records (by distance in the UTM zone of the data, then by row; the record
    itself left out by row, coincident records kept), their median ``m`` and
    ``MAD = median |v_j - m|`` over those 8; ``suspect`` when
    ``|v - m| > 3 * 1.4826 * MAD`` (when MAD is 0, when ``v != m``).

The baselines only say ``suspect`` or ``ok``. Printed per network and method:
recall of each planted kind at ``suspect``; recall of all planted mistakes at
``suspect`` and at ``suspect`` or ``review``; the share of sound wells called
``suspect`` and ``review``; the share of pumping-cone wells called
``suspect``. Targets: recall >= 0.97 at ``suspect`` with <= 1 % of sound wells
and <= 5 % of cone wells called ``suspect``, on every network. Counts are
pooled over the seeds.

Run ``python benchmarks/accuracy.py`` (all networks but ``large``; seeds 0-4,
and 0-19 for the sparse network);
``--json results.json`` writes every figure, per seed too.
"""

from __future__ import annotations

import argparse
import json
import platform
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
from scipy.spatial import cKDTree

sys.path.insert(0, str(Path(__file__).resolve().parent))

from networks import ERROR_KINDS, NETWORK_KINDS, make_network  # noqa: E402

__all__ = ["tukey_fences", "global_z", "nearest_median", "score", "run", "main"]

BASELINES = ("tukey", "zscore", "median8")
METHODS = ("pointsift",) + BASELINES
TARGET_RECALL, TARGET_SOUND, TARGET_CONE = 0.97, 0.01, 0.05
#: The sparse network has 300 wells and 2 mistakes of each kind: more seeds.
DEFAULT_SEEDS = {"sparse": list(range(20))}
#: Bands of the size of a value change, in local sd, for recall by size.
SIZE_BANDS = ((0, 2), (2, 4), (4, 6), (6, 8), (8, 20), (20, np.inf))


def _band(low: float, high: float) -> str:
    return f"size_{low:g}_to_{high:g}_sd"
SHORT = {"decimal_slip": "decimal", "feet_as_metres": "feet", "depth_as_level": "depth",
         "transposed_digits": "transp", "spike": "spike", "misplaced": "moved", "duplicate_conflict": "dup"}


def tukey_fences(values: np.ndarray, factor: float = 1.5) -> np.ndarray:
    """True where a value lies outside Tukey's fences ``[Q1 - f IQR, Q3 + f IQR]``."""
    q1, q3 = np.nanpercentile(values, [25, 75])
    spread = factor * (q3 - q1)
    return (values < q1 - spread) | (values > q3 + spread)


def global_z(values: np.ndarray, limit: float = 3.0) -> np.ndarray:
    """True where ``|v - mean| / sd`` exceeds ``limit`` (sd with ddof=1)."""
    z = (values - np.nanmean(values)) / np.nanstd(values, ddof=1)
    return np.abs(z) > limit


def nearest_median(xy: np.ndarray, values: np.ndarray, k: int = 8, limit: float = 3.0) -> np.ndarray:
    """True where a value is more than ``limit`` scaled MADs from its ``k`` nearest records' median.

    Parameters
    ----------
    xy : ndarray, shape (n, 2)
        Metric coordinates.
    values : ndarray, shape (n,)
        Values (finite).
    k : int
        Neighbours: the ``k`` nearest other records, by distance then row;
        the record itself is left out by row, never as "the first neighbour".
    limit : float
        Flag when ``|v - m| > limit * 1.4826 * MAD``.

    Returns
    -------
    ndarray of bool
    """
    n = xy.shape[0]
    distance, index = cKDTree(xy).query(xy, k=k + 1, workers=-1)
    own = index == np.arange(n)[:, None]
    # order by (is self, distance, row) and keep the first k
    order = np.lexsort((index, distance, own), axis=1)
    index = np.take_along_axis(index, order, axis=1)[:, :k]
    neighbour_values = values[index]
    median = np.median(neighbour_values, axis=1)
    mad = np.median(np.abs(neighbour_values - median[:, None]), axis=1)
    gap = np.abs(values - median)
    return np.where(mad > 0, gap > limit * 1.4826 * mad, gap > 0)


def _baseline_status(method: str, wells, value: str) -> np.ndarray:
    values = wells[value].to_numpy(dtype=float)
    if method == "tukey":
        flagged = tukey_fences(values)
    elif method == "zscore":
        flagged = global_z(values)
    else:
        metric = wells.to_crs(wells.estimate_utm_crs()) if wells.crs.is_geographic else wells
        xy = np.column_stack([metric.geometry.x.to_numpy(), metric.geometry.y.to_numpy()])
        flagged = nearest_median(xy, values)
    return np.where(flagged, "suspect", "ok")


def score(status: np.ndarray, truth: pd.DataFrame) -> dict:
    """Counts of each truth kind by status: ``{kind: {"n", "suspect", "review", "ok", "unscreened"}}``.

    ``"all_errors"`` pools every planted kind.
    """
    status = np.asarray(status, dtype=object)
    out = {}
    kinds = truth["kind"].to_numpy(dtype=object)
    groups = {kind: kinds == kind for kind in ("sound", "cone") + ERROR_KINDS}
    groups["all_errors"] = truth["is_error"].to_numpy()
    # spikes by size, from the generator's detail ("+5.3 local sd")
    size = pd.to_numeric(truth["detail"].str.extract(r"([-+]\d+\.\d+) local sd")[0], errors="coerce").abs()
    groups["spike_4_to_6_sd"] = groups["spike"] & (size < 6).to_numpy()
    groups["spike_6_to_8_sd"] = groups["spike"] & (size >= 6).to_numpy()
    # every mistake that changed the value, by the size of the change in local sd
    change = ((truth["planted_level_m"] - truth["clean_level_m"]).abs() / truth["local_sd_m"]).to_numpy()
    changed = groups["all_errors"] & (change > 0)
    for low, high in SIZE_BANDS:
        groups[_band(low, high)] = changed & (change >= low) & (change < high)
    for kind, mask in groups.items():
        out[kind] = {"n": int(mask.sum())}
        for word in ("suspect", "review", "ok", "unscreened"):
            out[kind][word] = int((status[mask] == word).sum())
    return out


def _pool(counts: list[dict]) -> dict:
    pooled = {}
    for kind in counts[0]:
        pooled[kind] = {key: sum(c[kind][key] for c in counts) for key in counts[0][kind]}
    return pooled


def _share(c: dict, *words: str) -> float:
    return sum(c[w] for w in words) / c["n"] if c["n"] else float("nan")


def summarise(pooled: dict) -> dict:
    """Rates from pooled counts, and whether the targets are met."""
    rates = {f"recall_{kind}": _share(pooled[kind], "suspect") for kind in ERROR_KINDS}
    rates["recall_suspect"] = _share(pooled["all_errors"], "suspect")
    rates["recall_suspect_or_review"] = _share(pooled["all_errors"], "suspect", "review")
    rates["sound_suspect"] = _share(pooled["sound"], "suspect")
    rates["sound_review"] = _share(pooled["sound"], "review")
    rates["cone_suspect"] = _share(pooled["cone"], "suspect")
    rates["cone_review"] = _share(pooled["cone"], "review")
    for group in ("spike_4_to_6_sd", "spike_6_to_8_sd") + tuple(_band(*b) for b in SIZE_BANDS):
        rates[f"recall_{group}"] = _share(pooled[group], "suspect")
        rates[f"recall_{group}_or_review"] = _share(pooled[group], "suspect", "review")
    rates["meets_targets"] = bool(
        rates["recall_suspect"] >= TARGET_RECALL
        and rates["sound_suspect"] <= TARGET_SOUND
        and (np.isnan(rates["cone_suspect"]) or rates["cone_suspect"] <= TARGET_CONE)
    )
    return rates


def run(networks: list[str], seeds: list[int], methods: list[str], options: dict, n: int | None = None,
        log=print) -> dict:
    """Screen every network and seed with every method; return counts, rates and timings."""
    pointsift_error = None
    if "pointsift" in methods:
        try:
            import pointsift

            screen = pointsift.screen
        except Exception as error:  # missing, or half-written while the pipeline is being built
            pointsift_error = (f"pointsift.screen is not available yet ({type(error).__name__}: {error}); "
                               "only the baselines ran.")
            log(pointsift_error)
            methods = [m for m in methods if m != "pointsift"]
    results = {}
    for network in networks:
        per_method = {m: {"per_seed": [], "seconds": 0.0, "errors": []} for m in methods}
        sizes = []
        for seed in seeds:
            wells, truth = make_network(network, n, seed)
            sizes.append(len(wells))
            for method in methods:
                started = time.perf_counter()
                try:
                    if method == "pointsift":
                        status = screen(wells, value="level_m", id="well_id", **options)["screen_status"]
                    else:
                        status = _baseline_status(method, wells, "level_m")
                except Exception as error:  # a benchmark reports failures and carries on
                    per_method[method]["errors"].append(f"seed {seed}: {type(error).__name__}: {error}")
                    log(f"  {network} seed {seed} {method} failed: {type(error).__name__}: {error}")
                    continue
                per_method[method]["seconds"] += time.perf_counter() - started
                counts = score(np.asarray(status, dtype=object), truth)
                per_method[method]["per_seed"].append({"seed": seed, "counts": counts,
                                                       "rates": summarise(counts)})
        for method, record in per_method.items():
            if record["per_seed"]:
                record["pooled"] = _pool([s["counts"] for s in record["per_seed"]])
                record["rates"] = summarise(record["pooled"])
        results[network] = {"seeds": seeds, "records": sizes, "methods": per_method}
    return {"results": results, "pointsift_unavailable": pointsift_error}


def _seed_text(seeds: list[int]) -> str:
    if len(seeds) > 2 and list(seeds) == list(range(seeds[0], seeds[-1] + 1)):
        return f"{seeds[0]}-{seeds[-1]}"
    return ", ".join(map(str, seeds))


def format_table(results: dict) -> str:
    """The printed report: one block per network, one line per method."""
    kinds = [SHORT[k] for k in ERROR_KINDS]
    head = (f"{'method':<10}" + "".join(f"{k:>8}" for k in kinds)
            + f"{'all S':>8}{'all S+R':>9}{'sound S':>9}{'sound R':>9}{'cone S':>8}  targets")
    lines = []
    for network, block in results.items():
        any_rates = next((r["rates"] for r in block["methods"].values() if "rates" in r), None)
        pooled = next((r["pooled"] for r in block["methods"].values() if "pooled" in r), None)
        if any_rates is None:
            lines.append(f"\n{network}: every method failed")
            continue
        lines.append(
            f"\n{network}: seeds {_seed_text(block['seeds'])}; {block['records'][0]:,} records each; "
            f"pooled: {pooled['all_errors']['n']} planted mistakes "
            f"({pooled[ERROR_KINDS[0]]['n']} per kind), {pooled['sound']['n']:,} sound, "
            f"{pooled['cone']['n']} cone wells"
        )
        lines.append(head)
        for method, record in block["methods"].items():
            if "rates" not in record:
                lines.append(f"{method:<10}failed: {record['errors'][0]}")
                continue
            r = record["rates"]
            cells = "".join(f"{r[f'recall_{k}']:>8.2f}" for k in ERROR_KINDS)
            review = f"{r['recall_suspect_or_review']:>9.3f}" if method == "pointsift" else f"{'-':>9}"
            sound_review = f"{r['sound_review']:>9.2%}" if method == "pointsift" else f"{'-':>9}"
            cone = f"{r['cone_suspect']:>8.1%}" if not np.isnan(r["cone_suspect"]) else f"{'-':>8}"
            lines.append(
                f"{method:<10}{cells}{r['recall_suspect']:>8.3f}{review}{r['sound_suspect']:>9.2%}"
                f"{sound_review}{cone}  {'met' if r['meets_targets'] else 'missed'}"
            )
        record = block["methods"].get("pointsift", {})
        if "rates" in record:
            r, pooled_counts = record["rates"], record["pooled"]
            cells = []
            for low, high in SIZE_BANDS:
                band = _band(low, high)
                if pooled_counts[band]["n"]:
                    cells.append(f"{low:g}-{high:g}: {r[f'recall_{band}']:.2f} "
                                 f"({r[f'recall_{band}_or_review']:.2f}, n={pooled_counts[band]['n']})")
            lines.append("pointsift recall at suspect (suspect or review) by size of the value change in "
                         "local sd: " + "; ".join(cells))
    legend = (
        "\nColumns: recall at 'suspect' per planted kind (decimal slip, feet as metres, depth to water as "
        "level, transposed digits, spike, misplaced well, conflicting duplicate); all S / all S+R: recall of "
        "every planted mistake at 'suspect' / at 'suspect' or 'review'; sound S / R: share of sound wells "
        "called 'suspect' / 'review'; cone S: share of pumping-cone wells called 'suspect'. Targets: "
        f"all S >= {TARGET_RECALL}, sound S <= {TARGET_SOUND:.0%}, cone S <= {TARGET_CONE:.0%}."
    )
    return "\n".join(lines) + "\n" + legend


def _git_commit() -> str | None:
    import subprocess

    try:
        done = subprocess.run(["git", "rev-parse", "--short", "HEAD"], cwd=Path(__file__).parent,
                              capture_output=True, text=True, check=True)
    except (OSError, subprocess.CalledProcessError):
        return None
    return done.stdout.strip()


def _parse_option(text: str):
    key, _, raw = text.partition("=")
    if not key or not _:
        raise argparse.ArgumentTypeError(f"--option takes KEY=VALUE (e.g. k=12), got {text!r}.")
    for cast in (int, float):
        try:
            return key, cast(raw)
        except ValueError:
            pass
    return key, raw


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--networks", nargs="+", default=["dense", "clustered", "sparse", "trended"],
                        choices=NETWORK_KINDS)
    parser.add_argument("--seeds", nargs="+", type=int, default=None,
                        help="seeds of every network (default: 0-4, and 0-19 for the small sparse one)")
    parser.add_argument("--methods", nargs="+", default=list(METHODS), choices=METHODS)
    parser.add_argument("--n", type=int, default=None, help="records per network (default: the kind's own)")
    parser.add_argument("--option", action="append", type=_parse_option, default=[],
                        help="a pointsift.screen option, KEY=VALUE (repeatable), e.g. --option k=12")
    parser.add_argument("--json", dest="json_path", default=None, help="also write every figure to this file")
    args = parser.parse_args(argv)

    options = dict(args.option)
    report = {"results": {}, "pointsift_unavailable": None}
    for network in args.networks:
        seeds = args.seeds if args.seeds is not None else DEFAULT_SEEDS.get(network, list(range(5)))
        part = run([network], seeds, args.methods, options, args.n)
        report["results"].update(part["results"])
        report["pointsift_unavailable"] = part["pointsift_unavailable"]
    print(format_table(report["results"]))
    if args.json_path:
        try:
            import pointsift

            version = getattr(pointsift, "__version__", None)
        except ImportError:
            version = None
        payload = {
            "command": "python benchmarks/accuracy.py " + " ".join(argv if argv is not None else sys.argv[1:]),
            "pointsift_version": version,
            "git_commit": _git_commit(),
            "pointsift_options": options,
            "python": platform.python_version(),
            "targets": {"recall_suspect": TARGET_RECALL, "sound_suspect": TARGET_SOUND,
                        "cone_suspect": TARGET_CONE},
            **report,
        }
        Path(args.json_path).write_text(json.dumps(payload, indent=1, default=float) + "\n")
        print(f"\nwrote {args.json_path}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
