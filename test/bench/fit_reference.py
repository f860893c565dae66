"""numpy reference for the baseline-fit benchmark (test/bench/engine.bench.ts).

Reads the smoothed curves the benchmark wrote (raw little-endian float64, V vignettes x N curves x
D values) and the quadrature weights (D values), and times the same fit the engine does for each
vignette: mean, centring and sqrt-weighting, covariance Y^T Y / (N - 1), a full symmetric
eigendecomposition (numpy.linalg.eigh, LAPACK), and the number of components reaching the
variance fraction. Prints JSON: per-vignette seconds and the leading eigenvalues, so the benchmark
can check that both computed the same thing before it reports a ratio.
"""
import json
import sys
import time

import numpy as np


def fit(curves, weights, fraction):
    mean = curves.mean(axis=0)
    sw = np.sqrt(weights)
    y = (curves - mean) * sw
    cov = y.T @ y / (curves.shape[0] - 1)
    vals, vecs = np.linalg.eigh(cov)
    vals = vals[::-1]
    vecs = vecs[:, ::-1]
    total = np.trace(cov)
    k = int(np.searchsorted(np.cumsum(vals), fraction * total) + 1)
    phi = vecs[:, :k] / sw[:, None]
    scores = y @ vecs[:, :k]
    return vals[:k], phi, scores


def main():
    path, wpath, v, n, d, fraction = sys.argv[1], sys.argv[2], int(sys.argv[3]), int(sys.argv[4]), int(sys.argv[5]), float(sys.argv[6])
    data = np.fromfile(path, dtype="<f8").reshape(v, n, d)
    weights = np.fromfile(wpath, dtype="<f8")
    fit(data[0], weights, fraction)  # warm-up
    seconds = []
    eigenvalues = []
    for i in range(v):
        t0 = time.perf_counter()
        vals, _, _ = fit(data[i], weights, fraction)
        seconds.append(time.perf_counter() - t0)
        eigenvalues.append(vals[:5].tolist())
    print(json.dumps({"numpy": np.__version__, "seconds": seconds, "eigenvalues": eigenvalues}))


if __name__ == "__main__":
    main()
