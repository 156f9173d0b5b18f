#!/usr/bin/env python3
"""Times SciPy's cKDTree on the point sets bench/knn.ts writes, for comparison with our k-NN index.

Usage:
  python3 bench/scipy_knn.py knn POINTS.f64 DIM K NORM OUT.f64 [RUNS]
  python3 bench/scipy_knn.py count POINTS.f64 DIM RADII.f64 NORM OUT.i64 [RUNS]

POINTS.f64 holds little-endian float64 points, row-major, DIM columns; NORM is 'euclidean' (p = 2) or
'max' (p = inf). Every time is the best of RUNS (default 3) by time.perf_counter, tree build included, one
worker.

knn:   cKDTree(X).query(X, k=K + 1) -- K + 1 because the query points are the indexed points and each finds
       itself first. Writes the K distances to the other points (columns 1..K) to OUT.f64.
count: cKDTree(X).query_ball_point(X, r, return_length=True): for each point, the number of points
       (itself included) at distance <= r_i. Writes the counts to OUT.i64.

Prints one JSON object with the versions and the time.
"""
import json
import sys
import time

import numpy as np
import scipy
from scipy.spatial import cKDTree


def best_of(runs, run):
    times = []
    result = None
    for _ in range(runs):
        start = time.perf_counter()
        result = run()
        times.append(time.perf_counter() - start)
    return min(times), result


def main():
    mode, path, dim = sys.argv[1], sys.argv[2], int(sys.argv[3])
    points = np.fromfile(path, dtype="<f8").reshape(-1, dim)
    norm, out_path = sys.argv[5], sys.argv[6]
    p = 2 if norm == "euclidean" else np.inf
    runs = int(sys.argv[7]) if len(sys.argv) > 7 else 3
    if mode == "knn":
        k = int(sys.argv[4])
        seconds, (distances, _indices) = best_of(runs, lambda: cKDTree(points).query(points, k=k + 1, p=p, workers=1))
        np.ascontiguousarray(distances[:, 1:], dtype="<f8").tofile(out_path)
    elif mode == "count":
        radii = np.fromfile(sys.argv[4], dtype="<f8")
        seconds, counts = best_of(
            runs,
            lambda: cKDTree(points).query_ball_point(points, radii, p=p, return_length=True, workers=1)
        )
        np.asarray(counts, dtype="<i8").tofile(out_path)
    else:
        raise SystemExit(f"unknown mode {mode!r}; expected knn or count")
    print(json.dumps({"scipy": scipy.__version__, "numpy": np.__version__, "n": int(points.shape[0]), "seconds": seconds}))


if __name__ == "__main__":
    main()
