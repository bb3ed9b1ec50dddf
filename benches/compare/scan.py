#!/usr/bin/env python3
"""numpy side of weir's predicate-scan benchmark.

Times np.flatnonzero((a >= lo) & (a < hi)) over a 1-D uint32 .npy file held in
memory, prints the timings, and optionally writes them as JSON and compares them
with the median from weir's own scan benchmark.

Usage: scan.py --npy PATH --lo LO --hi HI [--runs 5] [--json OUT] [--weir-json PATH]
"""

import argparse
import json
import statistics
import sys
import time

import numpy as np

U32_MAX = 2**32 - 1


class ScanError(Exception):
    """A problem with the inputs, reported as one line without a traceback."""


def parse_args(argv):
    p = argparse.ArgumentParser(
        description="Time numpy's half-open range scan lo <= a < hi over a uint32 .npy file."
    )
    p.add_argument("--npy", required=True, help="1-D uint32 .npy file")
    p.add_argument("--lo", required=True, type=int, help="inclusive lower bound")
    p.add_argument("--hi", required=True, type=int, help="exclusive upper bound")
    p.add_argument("--runs", type=int, default=5, help="timed runs after one warm-up (default 5)")
    p.add_argument("--json", metavar="OUT", help="write the result as a JSON object to OUT")
    p.add_argument(
        "--weir-json", metavar="PATH", help="weir bench JSON (PREFIX.json of weir bench scan --out PREFIX) or any JSON with a median_s field, to compare"
    )
    args = p.parse_args(argv)
    if not 0 <= args.lo <= args.hi <= U32_MAX:
        p.error(f"need 0 <= lo <= hi <= {U32_MAX}, got lo={args.lo} hi={args.hi}")
    if args.runs < 1:
        p.error(f"--runs must be at least 1, got {args.runs}")
    return args


def load_u32(path):
    # mmap_mode=None reads the whole file now, so disk time is never timed.
    try:
        a = np.load(path, mmap_mode=None, allow_pickle=False)
    except (OSError, ValueError) as e:
        raise ScanError(f"{path}: cannot load as .npy: {e}") from e
    if a.ndim != 1 or a.dtype != np.dtype("<u4"):
        raise ScanError(
            f"{path}: expected a 1-D little-endian uint32 array, found shape {a.shape} dtype {a.dtype.str}"
        )
    return a


def scan(a, lo, hi):
    # numpy scalars keep the comparisons in uint32 under every numpy version's
    # promotion rules.
    return np.flatnonzero((a >= np.uint32(lo)) & (a < np.uint32(hi)))


def time_scan(a, lo, hi, runs):
    """Returns (match count, per-run seconds) after one untimed warm-up."""
    matches = scan(a, lo, hi).size
    times = []
    for _ in range(runs):
        start = time.perf_counter()
        found = scan(a, lo, hi)
        times.append(time.perf_counter() - start)
        if found.size != matches:
            raise ScanError(f"match count changed between runs: {matches} then {found.size}")
    return matches, times


def weir_median(path):
    try:
        with open(path, encoding="utf-8") as f:
            doc = json.load(f)
    except OSError as e:
        raise ScanError(f"{path}: cannot read: {e}") from e
    except json.JSONDecodeError as e:
        raise ScanError(f"{path}: invalid JSON at line {e.lineno} column {e.colno}: {e.msg}") from e
    # `weir bench scan --out PREFIX` writes {"points": [...]}: compare with the point that
    # used the most threads (all cores, as numpy's whole-array work is on one).
    if isinstance(doc, dict) and isinstance(doc.get("points"), list) and doc["points"]:
        doc = max(doc["points"], key=lambda p: p.get("threads", 0) if isinstance(p, dict) else 0)
    median = doc.get("median_s") if isinstance(doc, dict) else None
    if isinstance(median, bool) or not isinstance(median, (int, float)) or not median > 0:
        raise ScanError(f"{path}: needs a positive number in field median_s, found {median!r}")
    return float(median)


def main(argv):
    args = parse_args(argv)
    # Read the comparison file first so a bad path fails before a long run.
    weir_s = weir_median(args.weir_json) if args.weir_json else None
    a = load_u32(args.npy)
    matches, times = time_scan(a, args.lo, args.hi, args.runs)
    median_s = statistics.median(times)  # even count: mean of the middle two
    result = {
        "tool": "numpy",
        "numpy_version": np.__version__,
        "rows": int(a.size),
        "bytes": int(a.nbytes),
        "matches": int(matches),
        "median_s": median_s,
        "min_s": min(times),
        "max_s": max(times),
        "gbps": a.nbytes / median_s / 1e9,
    }
    print(f"rows {result['rows']}  bytes {result['bytes']}  matches {result['matches']}  runs {args.runs}")
    print(f"median_s {result['median_s']:.6f}")
    print(f"min_s {result['min_s']:.6f}")
    print(f"max_s {result['max_s']:.6f}")
    print(f"gbps {result['gbps']:.2f}  (input bytes / median, 1 GB = 1e9 bytes)")
    if args.json:
        try:
            with open(args.json, "w", encoding="utf-8") as f:
                json.dump(result, f, indent=2)
                f.write("\n")
        except OSError as e:
            raise ScanError(f"{args.json}: cannot write: {e}") from e
    if weir_s is not None:
        print(f"weir is {median_s / weir_s:.2f}x faster than numpy")


if __name__ == "__main__":
    try:
        main(sys.argv[1:])
    except ScanError as e:
        print(f"scan.py: {e}", file=sys.stderr)
        sys.exit(1)
