#!/usr/bin/env python3
"""The SciPy side of bench/cli.ts: a whole-process estimate of a .npy sample, as a user would script it.

Usage:
  python3 bench/scipy_cli.py knn SAMPLE.npy K      Kozachenko–Leonenko with the K-th neighbour (Euclidean):
                                                 cKDTree(X).query(X, k=K+1), then
                                                 ψ(n) − ψ(K) + log V_d + d·mean(log ε_K)
  python3 bench/scipy_cli.py vasicek SAMPLE.npy   scipy.stats.differential_entropy(x, method='vasicek')

Prints the estimate. The process as a whole (interpreter start, imports, reading, computing) is what
bench/cli.ts times, against hhat's whole process on the same file.
"""
import sys

import numpy as np


def main():
    kind, path = sys.argv[1], sys.argv[2]
    x = np.load(path)
    if kind == "knn":
        from scipy.spatial import cKDTree
        from scipy.special import digamma, gammaln

        k = int(sys.argv[3])
        x = x.reshape(len(x), -1)
        n, d = x.shape
        distances, _ = cKDTree(x).query(x, k=k + 1)
        log_volume = (d / 2) * np.log(np.pi) - gammaln(d / 2 + 1)
        print(digamma(n) - digamma(k) + log_volume + d * np.mean(np.log(distances[:, k])))
    elif kind == "vasicek":
        from scipy.stats import differential_entropy

        print(differential_entropy(x.ravel(), method="vasicek"))
    else:
        raise SystemExit(f"unknown kind {kind}")


main()
