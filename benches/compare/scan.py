#!/usr/bin/env python3
"""Peers of weir's predicate-scan benchmark: numpy, polars and DuckDB.

Each peer finds the row ids of lo <= a < hi over a 1-D uint32 .npy file held in
memory (numpy: np.flatnonzero; polars: a filtered row index; DuckDB: a SQL query
over the same arrays). Every peer must return the same row ids as numpy, or the
script fails. Prints each peer's timings, optionally writes them as JSON, and
with --weir-json prints each peer's time over weir's median (a ratio above 1 means
weir is faster).

Usage: scan.py --npy PATH --lo LO --hi HI [--runs 5] [--json OUT] [--weir-json PATH]
"""

import argparse
import json
import statistics
import sys
import time

import numpy as np

try:  # optional peers: a missing one is reported and skipped
    import polars as pl
except ImportError:
    pl = None
try:
    import duckdb
except ImportError:
    duckdb = None

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


def polars_scan(a):
    """A polars scan of the same column: the row index of the matching rows."""
    df = pl.DataFrame({"v": a}).with_row_index("i")

    def run(lo, hi):
        out = df.filter((pl.col("v") >= lo) & (pl.col("v") < hi))
        return out.get_column("i").to_numpy()

    return run


def duckdb_scan(a):
    """A DuckDB query over the same arrays (no copy into a table)."""
    con = duckdb.connect()
    con.register("t", {"i": np.arange(a.size, dtype=np.uint64), "v": a})

    def run(lo, hi):
        q = "select i from t where v >= ? and v < ? order by i"
        return con.execute(q, [lo, hi]).fetchnumpy()["i"]

    return run


def peers(a):
    """(name, version, run) of each peer available here; numpy first, the oracle."""
    found = [("numpy", np.__version__, lambda lo, hi: scan(a, lo, hi))]
    if pl is not None:
        found.append(("polars", pl.__version__, polars_scan(a)))
    else:
        print("polars not installed: skipped", file=sys.stderr)
    if duckdb is not None:
        found.append(("duckdb", duckdb.__version__, duckdb_scan(a)))
    else:
        print("duckdb not installed: skipped", file=sys.stderr)
    return found


def time_scan(run, lo, hi, runs):
    """Returns (row ids, per-run seconds) after one untimed warm-up."""
    ids = np.asarray(run(lo, hi))
    times = []
    for _ in range(runs):
        start = time.perf_counter()
        found = run(lo, hi)
        times.append(time.perf_counter() - start)
        if len(found) != ids.size:
            raise ScanError(f"match count changed between runs: {ids.size} then {len(found)}")
    return ids, times


def weir_median(path, matches):
    try:
        with open(path, encoding="utf-8") as f:
            doc = json.load(f)
    except OSError as e:
        raise ScanError(f"{path}: cannot read: {e}") from e
    except json.JSONDecodeError as e:
        raise ScanError(f"{path}: invalid JSON at line {e.lineno} column {e.colno}: {e.msg}") from e
    # `weir bench scan --out PREFIX` writes {"points": [...]}: compare with the point that
    # found the same number of rows (the same .npy) with the most threads.
    if isinstance(doc, dict) and isinstance(doc.get("points"), list) and doc["points"]:
        pts = [p for p in doc["points"] if isinstance(p, dict)]
        same = [p for p in pts if p.get("matches") == matches]
        if not same:
            raise ScanError(f"{path}: no point found {matches} rows; was it run on this .npy?")
        doc = max(same, key=lambda p: p.get("threads", 0))
    median = doc.get("median_s") if isinstance(doc, dict) else None
    if isinstance(median, bool) or not isinstance(median, (int, float)) or not median > 0:
        raise ScanError(f"{path}: needs a positive number in field median_s, found {median!r}")
    return float(median)


def main(argv):
    args = parse_args(argv)
    a = load_u32(args.npy)
    matches = int(scan(a, args.lo, args.hi).size)
    weir_s = weir_median(args.weir_json, matches) if args.weir_json else None
    print(f"rows {a.size}  bytes {a.nbytes}  runs {args.runs}  (GB/s = input bytes / median, 1 GB = 1e9 bytes)")
    oracle = None
    results = []
    for name, version, run in peers(a):
        ids, times = time_scan(run, args.lo, args.hi, args.runs)
        if oracle is None:
            oracle = ids
        elif not np.array_equal(ids.astype(np.uint64), oracle.astype(np.uint64)):
            raise ScanError(f"{name} found {ids.size} rows, numpy {oracle.size}: the row ids differ")
        median_s = statistics.median(times)  # even count: mean of the middle two
        r = {
            "tool": name,
            "version": version,
            "rows": int(a.size),
            "bytes": int(a.nbytes),
            "matches": int(ids.size),
            "median_s": median_s,
            "min_s": min(times),
            "max_s": max(times),
            "gbps": a.nbytes / median_s / 1e9,
        }
        results.append(r)
        line = f"{name:7} {version:10} matches {r['matches']}  median_s {median_s:.6f}  min_s {r['min_s']:.6f}  max_s {r['max_s']:.6f}  gbps {r['gbps']:.2f}"
        if weir_s is not None:
            line += f"  {name}/weir {median_s / weir_s:.2f}x"
        print(line)
    print(f"all {len(results)} peers found the same {oracle.size} row ids")
    if args.json:
        try:
            with open(args.json, "w", encoding="utf-8") as f:
                json.dump({"peers": results}, f, indent=2)
                f.write("\n")
        except OSError as e:
            raise ScanError(f"{args.json}: cannot write: {e}") from e


if __name__ == "__main__":
    try:
        main(sys.argv[1:])
    except ScanError as e:
        print(f"scan.py: {e}", file=sys.stderr)
        sys.exit(1)
