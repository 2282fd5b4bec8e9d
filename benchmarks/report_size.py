"""Size and cost of the HTML report: the bundled demo (2,000 invented wells) and an invented 100,000-well network.

Prints, for each layer, the rows, the suspects and review points, the bytes of
the page (and of its figures), of the JSON summary, and the seconds the
report took beyond the screen. The networks are invented
(``data_demo/make_demo.py``, ``benchmarks/networks.py``); nothing real is used.

    python benchmarks/report_size.py            # both
    python benchmarks/report_size.py --n 20000  # the invented network at another size
"""

from __future__ import annotations

import argparse
import re
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))


def measure(frame, value: str, ident: str, label: str) -> None:
    from pointsift.config import ScreenConfig
    from pointsift.pipeline import screen_frame
    from pointsift.report import build_report

    t = time.perf_counter()
    result = screen_frame(frame, ScreenConfig(value=value, id=ident))
    screened = time.perf_counter() - t
    t, cpu = time.perf_counter(), time.process_time()
    report = build_report(result)
    made, made_cpu = time.perf_counter() - t, time.process_time() - cpu
    html = report.html.encode("utf-8")
    images = sum(len(m) for m in re.findall(rb"data:image/png;base64,[A-Za-z0-9+/=]+", html))
    counts = result.counts
    print(f"{label}: {len(frame):,} rows, {counts['suspect']:,} suspect, {counts['review']:,} review; "
          f"page {len(html) / 1e6:.2f} MB ({images / 1e6:.2f} MB of it figures), "
          f"JSON {len(report.summary_json().encode('utf-8')) / 1e6:.2f} MB; "
          f"screen {screened:.1f} s, report {made:.1f} s ({made_cpu:.1f} s of CPU)")


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=100_000, help="records of the invented 'large' network")
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--skip-demo", action="store_true")
    args = parser.parse_args(argv)
    import geopandas as gpd

    if not args.skip_demo:
        demo = gpd.read_file(HERE.parent / "data_demo" / "wells.gpkg")
        measure(demo, "level_m", "well_id", "demo (data_demo/wells.gpkg)")
    from networks import make_network

    wells, _ = make_network("large", args.n, args.seed)
    measure(wells, "level_m", "well_id", f"invented 'large' network (seed {args.seed})")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
