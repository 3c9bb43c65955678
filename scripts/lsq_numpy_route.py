#!/usr/bin/env python3
"""By-hand general-purpose route for restricted least squares, for benches/lsq.rs:
QR of C^T (numpy), null-space basis Z, then numpy.linalg.lstsq of F·Z.

Usage: lsq_numpy_route.py DIR REPS   (DIR holds F.bin p×n row-major, g.bin, C.bin q×n,
d.bin, beta.bin (the exact solution by design) and shape.txt "p n q").
Prints one JSON line: median seconds, all times, max relative error against beta.bin.
"""
import json
import sys
import time

import numpy as np
from scipy.linalg import solve_triangular


def route(F, g, C, d):
    q = C.shape[0]
    Q, R = np.linalg.qr(C.T, mode="complete")
    Q1, Z = Q[:, :q], Q[:, q:]
    u = solve_triangular(R[:q, :q].T, d, lower=True)
    beta_p = Q1 @ u
    v = np.linalg.lstsq(F @ Z, g - F @ beta_p, rcond=None)[0]
    return beta_p + Z @ v


def main():
    d_ = sys.argv[1]
    reps = int(sys.argv[2])
    p, n, q = map(int, open(f"{d_}/shape.txt").read().split())
    F = np.fromfile(f"{d_}/F.bin").reshape(p, n)
    g = np.fromfile(f"{d_}/g.bin")
    C = np.fromfile(f"{d_}/C.bin").reshape(q, n)
    d = np.fromfile(f"{d_}/d.bin")
    beta_star = np.fromfile(f"{d_}/beta.bin")
    times = []
    for _ in range(reps):
        t = time.perf_counter()
        beta = route(F, g, C, d)
        times.append(time.perf_counter() - t)
    err = float(np.max(np.abs(beta - beta_star)) / np.max(np.abs(beta_star)))
    try:
        from threadpoolctl import threadpool_info
        blas = [(i.get("internal_api"), i.get("num_threads"), i.get("architecture")) for i in threadpool_info()]
    except Exception:  # threadpoolctl is optional
        blas = None
    print(json.dumps({"median_s": float(np.median(times)), "times_s": times, "max_rel_err": err, "blas": blas}))


if __name__ == "__main__":
    main()
