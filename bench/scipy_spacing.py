#!/usr/bin/env python3
"""Times scipy.stats.differential_entropy on the sample bench/spacing.ts writes, for comparison.

Usage: python3 bench/scipy_spacing.py VALUES.f64 [--correa-n N]

VALUES.f64 holds little-endian float64 values. Each method runs on all of them with the default window,
best of 3 by time.perf_counter. SciPy's 'correa' builds (2m+1) x n index arrays (16 GB at n = 10^6 with
m = 1000), so it runs on the first N values only (default 100000). Prints one JSON object.
"""
import argparse
import json
import time

import numpy as np
import scipy
from scipy.stats import differential_entropy

METHODS = {"vasicek": "vasicek", "van-es": "van es", "ebrahimi": "ebrahimi", "correa": "correa"}


def best_of_3(values, method):
    times = []
    value = None
    for _ in range(3):
        start = time.perf_counter()
        value = float(differential_entropy(values, method=method))
        times.append(time.perf_counter() - start)
    return {"n": int(values.size), "seconds": min(times), "value": value}


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("path")
    parser.add_argument("--correa-n", type=int, default=100_000)
    args = parser.parse_args()
    values = np.fromfile(args.path, dtype="<f8")
    results = {}
    for ours, theirs in METHODS.items():
        sample = values[: args.correa_n] if ours == "correa" else values
        results[ours] = best_of_3(sample, theirs)
    print(json.dumps({"scipy": scipy.__version__, "numpy": np.__version__, "results": results}))


if __name__ == "__main__":
    main()
