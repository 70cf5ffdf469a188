"""``python -m bench [--quick] [--json-out PATH] [--rows 1,2,3,4]``: see :mod:`bench`."""
from __future__ import annotations

import argparse
import json
import os
import sys
import time

ROWS = ("1", "2", "3", "4", "robust", "plane", "delay", "sampled", "frequency")  # row 5 comes with row 3


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="python -m bench", description="Loopwright speed table "
                                     "(reported, never asserted).")
    parser.add_argument("--quick", action="store_true", help="fewer repeats and shorter caps (about a minute)")
    parser.add_argument("--json-out", metavar="PATH", help="also write every figure and raw time as JSON")
    parser.add_argument("--rows", default=",".join(ROWS),
                        help="comma-separated rows to run (1 stable range, 2 reduction, 3 pole paths and "
                             "5 their floor, 4 app, robust the robust range, plane the stability plane, delay a "
                             "loop with dead time, sampled the sampled-data loop, frequency the frequency "
                             "response); default all")
    return parser


def main(argv: list[str] | None = None) -> int:
    args = build_parser().parse_args(argv)
    chosen = [r.strip() for r in args.rows.split(",") if r.strip()]
    unknown = sorted(set(chosen) - set(ROWS))
    if unknown:
        print(f"bench: unknown row {', '.join(unknown)} (choose from {', '.join(ROWS)})", file=sys.stderr)
        return 2
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    from bench import (
        app_row,
        delay_row,
        frequency_row,
        plane_row,
        pole_paths_row,
        reduction_row,
        robust_row,
        sampled_row,
        stable_range_row,
    )
    from bench.table import format_table, machine
    runners = {"1": stable_range_row.run, "2": reduction_row.run, "3": pole_paths_row.run, "4": app_row.run,
               "robust": robust_row.run, "plane": plane_row.run, "delay": delay_row.run,
               "sampled": sampled_row.run, "frequency": frequency_row.run}
    info = machine()
    start = time.perf_counter()
    rows = []
    for key in ROWS:
        if key in chosen:
            print(f"bench: row {key}…", file=sys.stderr, flush=True)
            rows += runners[key](args.quick)
    info["total_s"] = round(time.perf_counter() - start, 1)
    info["mode"] = "quick" if args.quick else "full"
    print(format_table(rows, info))
    print(f"\n{info['mode']} run, {info['total_s']} s in all; medians of repeated runs; targets are reported, "
          "never asserted.")
    if args.json_out:
        with open(args.json_out, "w", encoding="utf-8") as f:
            json.dump({"machine": info, "rows": [r.to_dict() for r in rows]}, f, indent=1)
    return 0


if __name__ == "__main__":
    sys.exit(main())
