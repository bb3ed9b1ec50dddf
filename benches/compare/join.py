#!/usr/bin/env python3
"""weir's fast join beside its peers, interleaved in one run, on the same data.

Runs `weir bench join --save-npy` once to write the benchmark's tables as .npy
files (S: unique u64 keys + u64 payload; L: u64 key + u64 payload, every row
matching), loads them, then in each round runs every peer once and weir once:
pandas (merge), polars (join) and DuckDB (SQL), each materialising the
(probe payload, build payload) pairs, and `weir bench join --runs 1`. All must
give the same pair count. Prints per-engine medians with min..max and, per
peer, the median of the per-round ratios peer time / weir time (above 1: weir
is faster), with their spread. A peer that is not installed is skipped with a
note.

Usage: join.py [--weir BIN] [--shape a|b] [--rounds 5] [--threads N] [--json OUT]
"""

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time

import numpy as np


def parse_args(argv):
    p = argparse.ArgumentParser(description="Interleave weir's join with pandas, polars and DuckDB.")
    p.add_argument("--weir", default="target/release/weir", help="weir binary (default target/release/weir)")
    p.add_argument("--shape", default="a", choices=["a", "b"], help="benchmark shape (default a)")
    p.add_argument("--rounds", type=int, default=5, help="interleaved rounds after one warm-up (default 5)")
    p.add_argument("--threads", type=int, default=os.cpu_count(), help="threads for weir, polars and DuckDB")
    p.add_argument("--json", metavar="OUT", help="also write the results as JSON to OUT")
    args = p.parse_args(argv)
    if args.rounds < 1 or args.threads < 1:
        p.error("--rounds and --threads must be at least 1")
    return args


def weir_round(args, tmp, save=False):
    """One `weir bench join` run; returns (seconds of the fast join, pairs)."""
    prefix = os.path.join(tmp, "weir")
    cmd = [args.weir, "bench", "join", "--shape", args.shape, "--runs", "1",
           "--threads", str(args.threads), "--out", prefix, "--force"]
    if save:
        cmd += ["--save-npy", os.path.join(tmp, "data")]
    r = subprocess.run(cmd, capture_output=True, text=True)
    if r.returncode != 0:
        raise SystemExit(f"{' '.join(cmd)}: exit {r.returncode}: {r.stderr.strip()}")
    with open(prefix + ".json") as fh:
        p = json.load(fh)["points"][-1]
    return p["fast"]["median_s"], p["pairs"]


def load(tmp):
    cols = {}
    for side in ("build", "probe"):
        for c in ("key", "payload"):
            cols[f"{side}_{c}"] = np.load(os.path.join(tmp, f"data-{side}-{c}.npy"), allow_pickle=False)
    return cols


def peers(cols, threads):
    # Each lambda binds its own frames (default arguments): the names are reused.
    out = []
    try:
        import pandas as pd
        s = pd.DataFrame({"key": cols["build_key"], "sp": cols["build_payload"]})
        l = pd.DataFrame({"key": cols["probe_key"], "lp": cols["probe_payload"]})
        out.append(("pandas merge", lambda l=l, s=s: len(l.merge(s, on="key", how="inner")[["lp", "sp"]])))
    except ImportError:
        print("skipped: pandas not installed")
    try:
        import polars as pl
        s = pl.DataFrame({"key": cols["build_key"], "sp": cols["build_payload"]})
        l = pl.DataFrame({"key": cols["probe_key"], "lp": cols["probe_payload"]})
        out.append(("polars join", lambda l=l, s=s: l.join(s, on="key", how="inner").select(["lp", "sp"]).height))
    except ImportError:
        print("skipped: polars not installed")
    try:
        import duckdb
        con = duckdb.connect()
        con.execute(f"set threads = {threads}")
        import pandas as pd
        con.register("sv", pd.DataFrame({"key": cols["build_key"], "sp": cols["build_payload"]}))
        con.register("lv", pd.DataFrame({"key": cols["probe_key"], "lp": cols["probe_payload"]}))
        # Copied into DuckDB's own tables, so the timed query does not scan pandas frames.
        con.execute("create table s as select * from sv")
        con.execute("create table l as select * from lv")
        # Fetched as numpy arrays, so the pairs are materialised in the client.
        q = "select l.lp, s.sp from l join s on l.key = s.key"
        out.append(("duckdb sql", lambda: len(con.execute(q).fetchnumpy()["lp"])))
    except ImportError:
        print("skipped: duckdb not installed")
    return out


def spread(xs):
    return statistics.median(xs), min(xs), max(xs)


def main(argv):
    args = parse_args(argv)
    if "POLARS_MAX_THREADS" not in os.environ:
        os.environ["POLARS_MAX_THREADS"] = str(args.threads)
    with tempfile.TemporaryDirectory() as tmp:
        weir_round(args, tmp, save=True)
        cols = load(tmp)
        engines = peers(cols, args.threads)
        if not engines:
            raise SystemExit("no peer installed (pandas, polars, duckdb)")
        for _, f in engines:
            f()  # warm-up
        times = {name: [] for name, _ in engines}
        times["weir fast join"] = []
        counts = {}
        for _ in range(args.rounds):
            for name, f in engines:
                t = time.perf_counter()
                counts.setdefault(name, set()).add(f())
                times[name].append(time.perf_counter() - t)
            w, pairs = weir_round(args, tmp)
            counts.setdefault("weir fast join", set()).add(pairs)
            times["weir fast join"].append(w)
    all_counts = set().union(*counts.values())
    if len(all_counts) != 1:
        raise SystemExit(f"engines disagree on the pair count: { {k: sorted(v) for k, v in counts.items()} }")
    pairs = all_counts.pop()
    rows = len(cols["probe_key"])
    print(f"join shape {args.shape}: |S| = {len(cols['build_key'])}, |L| = {rows}, {pairs} pairs, "
          f"{args.threads} threads, {args.rounds} interleaved rounds")
    print(f"{'engine':16s} {'median ms':>10s} {'min..max ms':>17s} {'M probes/s':>11s} {'peer/weir (min..max)':>22s}")
    result = {"shape": args.shape, "threads": args.threads, "pairs": pairs, "engines": {}}
    wt = times["weir fast join"]
    for name, ts in times.items():
        med, lo, hi = spread(ts)
        ratios = [t / w for t, w in zip(ts, wt)]
        rm, rlo, rhi = spread(ratios)
        rel = "" if name == "weir fast join" else f"{rm:.2f}x ({rlo:.2f}..{rhi:.2f})"
        print(f"{name:16s} {med * 1e3:10.1f} {lo * 1e3:8.1f}..{hi * 1e3:<8.1f} {rows / med / 1e6:11.1f} {rel:>22s}")
        result["engines"][name] = {"median_s": med, "min_s": lo, "max_s": hi, "ratio_to_weir": rm,
                                   "ratio_min": rlo, "ratio_max": rhi}
    if args.json:
        with open(args.json, "w") as fh:
            json.dump(result, fh, indent=2)


if __name__ == "__main__":
    main(sys.argv[1:])
