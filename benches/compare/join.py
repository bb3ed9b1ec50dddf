#!/usr/bin/env python3
"""Peers of weir's join benchmark: the same inner join on the same .npy data.

Loads PREFIX-{build,probe}-{key,payload}.npy (written by
`weir bench join --save-npy PREFIX`), joins L to S on key with pandas (merge),
polars (join) and DuckDB (SQL), materialising (probe payload, build payload)
pairs, checks every peer gives the same pair count, and prints median times and
ratios to the fastest peer and to weir's median (from `weir bench join --out`).
A peer that is not installed is skipped with a note.

Usage: join.py --npy PREFIX [--runs 5] [--weir-json PATH] [--threads N]
"""

import argparse
import json
import statistics
import sys
import time

import numpy as np


def parse_args(argv):
    p = argparse.ArgumentParser(description="Time pandas, polars and DuckDB on weir's join data.")
    p.add_argument("--npy", required=True, metavar="PREFIX", help="prefix given to weir bench join --save-npy")
    p.add_argument("--runs", type=int, default=5, help="timed runs after one warm-up (default 5)")
    p.add_argument("--weir-json", metavar="PATH", help="PREFIX.json of weir bench join --out PREFIX")
    p.add_argument("--threads", type=int, default=None, help="threads for polars and DuckDB (default: all)")
    args = p.parse_args(argv)
    if args.runs < 1:
        p.error(f"--runs must be at least 1, got {args.runs}")
    return args


def load(prefix):
    cols = {}
    for side in ("build", "probe"):
        for c in ("key", "payload"):
            path = f"{prefix}-{side}-{c}.npy"
            try:
                cols[f"{side}_{c}"] = np.load(path, allow_pickle=False)
            except (OSError, ValueError) as e:
                raise SystemExit(f"{path}: {e}")
    return cols


def timed(f, runs):
    f()
    times, n = [], None
    for _ in range(runs):
        t = time.perf_counter()
        n = f()
        times.append(time.perf_counter() - t)
    return statistics.median(times), min(times), max(times), n


def peers(cols, threads):
    out = []
    try:
        import pandas as pd
        s = pd.DataFrame({"key": cols["build_key"], "sp": cols["build_payload"]})
        l = pd.DataFrame({"key": cols["probe_key"], "lp": cols["probe_payload"]})
        out.append(("pandas merge", lambda: len(l.merge(s, on="key", how="inner")[["lp", "sp"]])))
    except ImportError:
        print("skipped: pandas not installed")
    try:
        import polars as pl
        s = pl.DataFrame({"key": cols["build_key"], "sp": cols["build_payload"]})
        l = pl.DataFrame({"key": cols["probe_key"], "lp": cols["probe_payload"]})
        out.append(("polars join", lambda: l.join(s, on="key", how="inner").select(["lp", "sp"]).height))
    except ImportError:
        print("skipped: polars not installed")
    try:
        import duckdb
        con = duckdb.connect()
        if threads:
            con.execute(f"set threads = {threads}")
        s = {"key": cols["build_key"], "sp": cols["build_payload"]}
        l = {"key": cols["probe_key"], "lp": cols["probe_payload"]}
        con.register("s", __import__("pandas").DataFrame(s))
        con.register("l", __import__("pandas").DataFrame(l))
        # The result is fetched as numpy arrays, so the pairs are materialised.
        q = "select l.lp, s.sp from l join s on l.key = s.key"
        out.append(("duckdb sql", lambda: len(con.execute(q).fetchnumpy()["lp"])))
    except ImportError:
        print("skipped: duckdb not installed")
    return out


def main(argv):
    args = parse_args(argv)
    cols = load(args.npy)
    results = []
    for name, f in peers(cols, args.threads):
        med, lo, hi, n = timed(f, args.runs)
        results.append((name, med, lo, hi, n))
        print(f"{name:14s} median {med * 1e3:9.1f} ms (min {lo * 1e3:.1f}, max {hi * 1e3:.1f}), {n} pairs")
    counts = {n for *_, n in results}
    if len(counts) > 1:
        raise SystemExit(f"peers disagree on the pair count: {sorted(counts)}")
    if not results:
        raise SystemExit("no peer installed (pandas, polars, duckdb)")
    best = min(results, key=lambda r: r[1])
    print(f"fastest peer: {best[0]} ({best[1] * 1e3:.1f} ms)")
    if args.weir_json:
        with open(args.weir_json) as fh:
            pts = json.load(fh)["points"]
        for p in pts:
            if p["pairs"] != best[4]:
                raise SystemExit(f"weir has {p['pairs']} pairs, the peers {best[4]}")
            print(f"weir fast join, {p['threads']} threads: median {p['fast']['median_s'] * 1e3:.1f} ms, "
                  f"{best[1] / p['fast']['median_s']:.2f}x the fastest peer")


if __name__ == "__main__":
    main(sys.argv[1:])
