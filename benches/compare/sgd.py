#!/usr/bin/env python3
"""numpy side of weir's SGD benchmark, interleaved with weir's own runs.

Runs one epoch of minibatch squared-loss SGD (step 1e-3, no L2, bias, input order,
zero start; the parameters of `weir bench sgd`) in float32 numpy, vectorised per
minibatch, on the dataset `weir bench sgd --save-npy` writes. The two alternate:
each round runs `weir bench sgd` for one point (one engine, f32, 16-lane tree) and
then times numpy's epoch, so a change in the host's load between rounds moves both
sides. Prints each round's times and ratio, the ratio of medians with the spread of
the per-round ratios, and checks that weir's final model agrees with numpy's.

Usage: sgd.py --weir target/release/weir [--dims 64] [--batch 16] [--rounds 5]
"""

import argparse
import json
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ETA = 1e-3


class CompareError(Exception):
    """A problem with the inputs or with weir's run, reported as one line."""


def epoch(x, y, batch):
    n, d = x.shape
    w = np.zeros(d, dtype=np.float32)
    b = np.float32(0.0)
    for lo in range(0, n, batch):
        xb, yb = x[lo:lo + batch], y[lo:lo + batch]
        g = xb @ w + b - yb
        s = np.float32(ETA / len(yb))
        w -= s * (xb.T @ g)
        b -= s * g.sum()
    return np.append(w, b)


def weir_point(a, out, save_npy=None):
    """Runs `weir bench sgd` for the one point; returns its JSON point."""
    cmd = [a.weir, "bench", "sgd", "--dims", str(a.dims), "--batch", str(a.batch),
           "--threads", "1", "--modes", "f32", "--rows", str(a.rows),
           "--runs", str(a.weir_runs), "--out", str(out), "--force"]
    if save_npy is not None:
        cmd += ["--save-npy", str(save_npy)]
    r = subprocess.run(cmd, capture_output=True, text=True)
    if r.returncode != 0:
        raise CompareError(f"{' '.join(cmd)} exited with {r.returncode}: {r.stderr.strip()}")
    with open(f"{out}.json", encoding="utf-8") as f:
        points = json.load(f)["points"]
    match = [q for q in points if q["dims"] == a.dims and q["batch"] == a.batch
             and q["threads"] == 1 and q["mode"].startswith("f32 L=16")]
    if len(match) != 1:
        raise CompareError(f"{out}.json: expected one 1-thread f32 point with d={a.dims}, B={a.batch}")
    return match[0]


def quartiles(v):
    q = statistics.quantiles(v, n=4, method="inclusive") if len(v) > 1 else [v[0]] * 3
    return q[0], q[2]


def main(argv):
    p = argparse.ArgumentParser(description="numpy minibatch SGD interleaved with weir bench sgd")
    p.add_argument("--weir", required=True, help="path of the weir binary (a release build)")
    p.add_argument("--dims", type=int, default=64, help="features d (default 64)")
    p.add_argument("--batch", type=int, default=16, help="minibatch size (default 16)")
    p.add_argument("--rows", type=int, default=1 << 20, help="samples (default 2^20)")
    p.add_argument("--rounds", type=int, default=5, help="rounds of (weir, numpy) after a warm-up (default 5)")
    p.add_argument("--weir-runs", type=int, default=3, help="timed weir runs per round (default 3)")
    p.add_argument("--tol", type=float, default=1e-3, help="max |w_numpy - w_weir| / (1 + |w|)")
    a = p.parse_args(argv)
    if a.rounds < 1 or a.weir_runs < 1:
        p.error("--rounds and --weir-runs must be at least 1")
    with tempfile.TemporaryDirectory(prefix="weir-sgd-compare-") as tmp:
        tmp = Path(tmp)
        # The warm-up round saves the dataset; weir's generator is seeded, so every
        # later round trains on the same bytes.
        first = weir_point(a, tmp / "warm", save_npy=tmp / "data")
        stem = tmp / f"data-d{a.dims}"
        x = np.load(f"{stem}.x.npy")
        y = np.load(f"{stem}.y.npy")
        if x.dtype != np.float32 or x.shape != (first["rows"], a.dims) or y.shape != (x.shape[0],):
            raise CompareError(f"{stem}.x.npy: expected {first['rows']} x {a.dims} float32 data")
        n, d = x.shape
        model = epoch(x, y, a.batch)
        gb = n * (d + 1) * 4 / 1e9
        print(f"n={n} d={d} B={a.batch}, {gb:.3f} GB per epoch; {a.rounds} rounds of (weir, numpy)")
        print("round  weir ms  weir GB/s  numpy ms  numpy GB/s  numpy/weir")
        wt, nt, ratios, worst = [], [], [], 0.0
        for i in range(a.rounds):
            q = weir_point(a, tmp / f"round{i}")
            w = np.array(q["model"])
            worst = max(worst, float(np.max(np.abs(w - model) / (1 + np.abs(model)))))
            t = time.perf_counter()
            epoch(x, y, a.batch)
            t = time.perf_counter() - t
            wt.append(q["median_s"])
            nt.append(t)
            ratios.append(t / q["median_s"])
            print(f"{i:5}  {q['median_s'] * 1e3:7.1f}  {gb / q['median_s']:9.2f}  {t * 1e3:8.1f}  {gb / t:10.3f}  {ratios[-1]:10.1f}")
    lo, hi = quartiles(ratios)
    wm, nm = statistics.median(wt), statistics.median(nt)
    print(f"weir {gb / wm:.2f} GB/s, numpy {gb / nm:.3f} GB/s (medians): weir is {nm / wm:.1f}x numpy "
          f"(per-round ratios {min(ratios):.1f}-{max(ratios):.1f}, quartiles {lo:.1f}-{hi:.1f})")
    ok = worst <= a.tol
    print(f"models agree: max relative difference {worst:.2e} (tolerance {a.tol:g}): {'ok' if ok else 'MISMATCH'}")
    return 0 if ok else 1


if __name__ == "__main__":
    try:
        sys.exit(main(sys.argv[1:]))
    except (CompareError, OSError) as e:
        print(f"sgd.py: {e}", file=sys.stderr)
        sys.exit(1)
