#!/usr/bin/env python3
"""A Kozachenko–Leonenko entropy estimator that speaks hhat's estimator protocol.

Written for a soil-science group that logs moisture at several depths and summarises each field's readings
by their differential entropy with its own Python code: before trusting it, the group benchmarks it against
hhat's built-ins on hhat's seeded scenarios, and gates every change to it with `hhat compare`.

    hhat bench --estimator-command 'soil-kl=python3 examples/knn_entropy.py' --scenario normal --n 200,1000

The protocol (README, "Estimators in other languages"): one JSON object per line on stdin and stdout.
hhat sends a hello, {"hhat": 1, "estimator": ..., "quantity": ..., "settings": {...}}, answered by
{"ready": true}; then requests {"request": K, "npy": PATH, "n": N, "dim": D, "settings": {...}}, each answered
by {"request": K, "value": V} (nats) or {"request": K, "error": "..."}. Diagnostics go to stderr, never stdout.

The estimate (Kozachenko and Leonenko 1987; in the form of Kraskov, Stögbauer and Grassberger 2004, eq. 20):
    H = psi(n) - psi(k) + log V_d + (d / n) * sum_i log eps_i
with eps_i the Euclidean distance from point i to its k-th nearest neighbour and V_d = pi^(d/2) / Gamma(d/2 + 1)
the volume of the unit ball. NumPy only; SciPy's cKDTree finds the neighbours when SciPy is installed.
"""
import json
import math
import sys

import numpy as np

try:
    from scipy.spatial import cKDTree
except ImportError:  # NumPy alone: brute force, fine up to a few thousand points
    cKDTree = None

EULER_GAMMA = 0.57721566490153286061


def digamma_of_integer(m):
    """psi(m) = -gamma + sum_{j=1}^{m-1} 1/j for a positive integer m, summed exactly by math.fsum."""
    if DIGAMMA_AS_LOG:
        return math.log(m)
    return -EULER_GAMMA + math.fsum(1.0 / j for j in range(1, m))


# A change under consideration, to try with `hhat compare` (README, "Estimators in other languages"): psi(m)
# replaced by log m, which is cheaper and close for large m, but not for m = k.
DIGAMMA_AS_LOG = "--digamma-as-log" in sys.argv[1:]


def kth_neighbour_distances(x, k):
    if cKDTree is not None:
        distances, _ = cKDTree(x).query(x, k=k + 1)
        return distances[:, k]
    n = x.shape[0]
    out = np.empty(n)
    for start in range(0, n, 256):
        block = x[start:start + 256]
        squared = ((block[:, None, :] - x[None, :, :]) ** 2).sum(axis=2)
        squared[np.arange(block.shape[0]), np.arange(start, start + block.shape[0])] = np.inf  # not itself
        out[start:start + block.shape[0]] = np.sqrt(np.partition(squared, k - 1, axis=1)[:, k - 1])
    return out


def entropy(x, k):
    n, d = x.shape
    if n <= k:
        raise ValueError(f"too few points: n = {n} needs more than k = {k}")
    eps = kth_neighbour_distances(x, k)
    if np.any(eps == 0):
        raise ValueError(f"{int(np.sum(eps == 0))} points have their k-th neighbour at distance 0 (repeated values)")
    log_unit_ball = (d / 2) * math.log(math.pi) - math.lgamma(d / 2 + 1)
    return digamma_of_integer(n) - digamma_of_integer(k) + log_unit_ball + d * float(np.mean(np.log(eps)))


def reply(message):
    sys.stdout.write(json.dumps(message) + "\n")
    sys.stdout.flush()


def main():
    for line in sys.stdin:
        message = json.loads(line)
        if "hhat" in message:
            if message.get("quantity") != "entropy":
                reply({"error": f"this estimator measures entropy, not {message.get('quantity')}"})
                return
            reply({"ready": True})
            continue
        number = message["request"]
        try:
            k = int(message["settings"].get("k", 3))
            x = np.load(message["npy"])
            reply({"request": number, "value": entropy(x, k)})
        except ValueError as error:
            reply({"request": number, "error": str(error)})


if __name__ == "__main__":
    main()
