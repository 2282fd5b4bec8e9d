"""Speed of ``pointsift campaigns``: the real shared programme, and invented programmes of growing size.

* the shared DWR programme (45,472 readings, every campaign) read from
  ``<repo>/../shared/data/dwr-sacramento`` (or ``$POINTSIFT_SHARED_DATA``),
  skipped with a message when absent;
* invented programmes (``benchmarks/programme.py``, seeded) of W wells x C
  campaigns, to show the cost grows linearly with the number of readings.

Prints wall time, time per reading, the time of each step and the peak
resident memory. Run: ``python benchmarks/campaigns_speed.py [--jobs 2]
[--sizes 2500x40,5000x40,10000x40] [--skip-real]``
"""

from __future__ import annotations

import argparse
import resource
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from campaigns_planted import config as real_config  # noqa: E402
from campaigns_planted import load_programme  # noqa: E402
from programme import make_programme  # noqa: E402

from pointsift.campaigns import CampaignConfig, screen_campaigns  # noqa: E402
from pointsift.config import ScreenConfig  # noqa: E402


def _peak_mb() -> float:
    own = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    children = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    return max(own, children) / 1024.0


def _line(name: str, readings: int, seconds: float, timings: dict) -> None:
    steps = ", ".join(f"{k[:-2]} {v:.1f}" for k, v in timings.items() if k != "total_s")
    print(f"{name:<22}{readings:>9}{seconds:>9.1f}{1e6 * seconds / readings:>10.0f}   {steps}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--jobs", type=int, default=2)
    parser.add_argument("--sizes", default="2500x40,5000x40,10000x40")
    parser.add_argument("--skip-real", action="store_true")
    args = parser.parse_args()
    print(f"{'programme':<22}{'readings':>9}{'seconds':>9}{'us/read':>10}   steps (s)")
    if not args.skip_real:
        frame = load_programme()
        started = time.perf_counter()
        result = screen_campaigns(frame, real_config(args.jobs))
        _line("shared DWR", len(frame), time.perf_counter() - started, result.run_info["timings_s"])
    for size in args.sizes.split(","):
        wells, campaigns = (int(v) for v in size.lower().split("x"))
        frame = make_programme(wells, campaigns, seed=11)
        config = CampaignConfig(screen=ScreenConfig(value="level_m", id="well_id"), date="date", jobs=args.jobs)
        started = time.perf_counter()
        result = screen_campaigns(frame, config)
        seconds = time.perf_counter() - started
        _line(f"invented {wells}x{campaigns}", len(frame), seconds, result.run_info["timings_s"])
        print(f"{'':<22}graphs built {result.run_info['neighbour_graphs']['built']}, "
              f"reused {result.run_info['neighbour_graphs']['reused']}")
    print(f"peak resident memory: {_peak_mb():.0f} MB (largest process)")


if __name__ == "__main__":
    main()
