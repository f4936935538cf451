#!/usr/bin/env python3
"""Peer for the measurement benchmark: the same clock statistics with NumPy, end to end
(reading the raw little-endian u64 edge ticks, first edge rising, tick 8 ns).
Needs NumPy (`pip install numpy`; not needed by the tests or CI).
`cargo bench --bench peer` writes the file and runs this script beside the engine; by hand:
    python3 benches/peer_numpy.py /tmp/slackmeter-peer-edges.u64 [--json]
"""
import json, sys, time
import numpy as np

def stats(path, tick_ns=8.0):
    t = np.fromfile(path, dtype="<u8").astype(np.int64)
    rises, falls = t[0::2], t[1::2]
    period = np.diff(rises)
    # complete cycles only (rise, fall, next rise): their high and low times
    n = min(len(period), len(falls))
    high = falls[:n] - rises[:n]
    low = rises[1:n + 1] - falls[:n]
    c2c = np.diff(period)
    p1, p50, p99 = np.percentile(period, [1, 50, 99], method="inverted_cdf") * tick_ns
    return {
        "period_mean_ns": float(period.mean() * tick_ns),
        "period_min_ns": float(period.min() * tick_ns),
        "period_max_ns": float(period.max() * tick_ns),
        "high_mean_ns": float(high.mean() * tick_ns),
        "high_min_ns": float(high.min() * tick_ns),
        "low_min_ns": float(low.min() * tick_ns),
        "duty": float(high.mean() / period.mean()),
        "period_jitter_rms_ns": float(period.std(ddof=1) * tick_ns),
        "cycle_to_cycle_rms_ns": float(np.sqrt(np.mean(c2c.astype(np.float64) ** 2)) * tick_ns),
        "period_p1_ns": float(p1),
        "period_p50_ns": float(p50),
        "period_p99_ns": float(p99),
        "edges": int(len(t)),
        "periods": int(period.size),
    }

if __name__ == "__main__":
    args = [a for a in sys.argv[1:] if a != "--json"]
    path = args[0] if args else "/tmp/slackmeter-peer-edges.u64"
    best = float("inf")
    for _ in range(5):
        t0 = time.perf_counter()
        s = stats(path)
        best = min(best, time.perf_counter() - t0)
    if "--json" in sys.argv:
        print(json.dumps({"best_ms": best * 1e3, **s}))
    else:
        print(f"numpy: {s['edges']} edges in {best * 1e3:.1f} ms (best of 5): "
              f"{s['edges'] / best / 1e6:.1f} M edges/s")
        for k, v in s.items():
            print(f"  {k}: {v}")
