#!/usr/bin/env python3
"""numpy side of weir's SGD benchmark.

Runs one epoch of minibatch squared-loss SGD (step 1e-3, no L2, bias, input order,
zero start; the parameters of `weir bench sgd`) in float32 numpy, vectorised per
minibatch, on PREFIX.x.npy / PREFIX.y.npy as written by `weir bench sgd --save-npy`,
prints the timings, checks that weir's final model (from the JSON of
`weir bench sgd --out`) agrees within a tolerance, and prints the speed ratio.

Usage: sgd.py --prefix PREFIX --batch 16 --weir-json BENCH.json [--runs 3]
"""

import argparse
import json
import statistics
import sys
import time

import numpy as np

ETA = 1e-3


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


def main(argv):
    p = argparse.ArgumentParser(description="numpy minibatch SGD against weir bench sgd")
    p.add_argument("--prefix", required=True, help="PREFIX of PREFIX.x.npy and PREFIX.y.npy")
    p.add_argument("--batch", type=int, default=16, help="minibatch size (default 16)")
    p.add_argument("--runs", type=int, default=3, help="timed runs after one warm-up (default 3)")
    p.add_argument("--weir-json", help="PREFIX.json of weir bench sgd --out PREFIX")
    p.add_argument("--tol", type=float, default=1e-3, help="max |w_numpy - w_weir| / (1 + |w|)")
    a = p.parse_args(argv)
    try:
        x = np.load(a.prefix + ".x.npy")
        y = np.load(a.prefix + ".y.npy")
    except OSError as e:
        sys.exit(f"sgd.py: {e}")
    if x.dtype != np.float32 or x.ndim != 2 or y.shape != (x.shape[0],):
        sys.exit("sgd.py: expected an n x d float32 .x.npy and an n float32 .y.npy")
    n, d = x.shape
    model = epoch(x, y, a.batch)
    times = []
    for _ in range(a.runs):
        t = time.perf_counter()
        epoch(x, y, a.batch)
        times.append(time.perf_counter() - t)
    med = statistics.median(times)
    gb = n * (d + 1) * 4 / 1e9
    print(f"numpy: n={n} d={d} B={a.batch}: median {med * 1e3:.1f} ms (min {min(times) * 1e3:.1f}, max {max(times) * 1e3:.1f}), {gb / med:.3f} GB/s")
    if a.weir_json:
        with open(a.weir_json) as f:
            points = json.load(f)["points"]
        match = [q for q in points if q["dims"] == d and q["batch"] == a.batch and q["threads"] == 1 and q["mode"].startswith("f32 L=16") and q["rows"] == n]
        if not match:
            sys.exit(f"sgd.py: no 1-thread f32 point with d={d}, B={a.batch}, rows={n} in {a.weir_json}")
        q = match[0]
        w = np.array(q["model"])
        err = float(np.max(np.abs(w - model) / (1 + np.abs(model))))
        ok = err <= a.tol
        print(f"weir:  median {q['median_s'] * 1e3:.1f} ms, {q['gbps']:.3f} GB/s; weir is {med / q['median_s']:.1f}x numpy")
        print(f"models agree: max relative difference {err:.2e} (tolerance {a.tol:g}): {'ok' if ok else 'MISMATCH'}")
        return 0 if ok else 1
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
