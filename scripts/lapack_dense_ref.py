#!/usr/bin/env python3
"""LAPACK called directly on the dense benchmark problems, beside tangency's dense timings.

For each problem directory (H.mtx, A.mtx, c.mtx, b.mtx as written by
`cargo run --release --example dense_compare`), and for each thread count, this times:

  * dsytrf + dsytrs on K = [H A'; A 0] (Bunch-Kaufman, LAPACK's symmetric-indefinite
    factorization and solve, through scipy.linalg.get_lapack_funcs);
  * for convex problems, a Schur-complement solve written by hand with LAPACK/BLAS:
    dpotrf(H) = L L', dtrsm W = L^-1 A', dsyrk S = W'W, dpotrf(S), then the solve
    u = L^-1 f, S y = W'u - g, x = L^-T (u - W y);
  * the f64 GEMM rate (dgemm, 2 N^3 flops at N = 4000), measured in the same process, as
    the peak the fractions below refer to.

Thread counts are set with OPENBLAS_NUM_THREADS, which OpenBLAS reads at load time, so
every count runs in its own child process. Prints one JSON object per line:
  {"threads": t, "gemm_gflops": ...}
  {"threads": t, "name": ..., "N": ..., "sytrf_sytrs_s": [...], "schur_s": [...],
   "sytrf_backward_error": ..., "schur_backward_error": ...}
Times are lists of every repeat (seconds, factor + one solve, matrix copies excluded).

Needs numpy and scipy (pip install numpy scipy); the Rust tests never need them.
Usage: lapack_dense_ref.py DIR [DIR ...] [--threads 1,2] [--repeat 5]
"""
import argparse
import json
import os
import subprocess
import sys
import time


def child(dirs, repeat):
    import numpy as np
    import scipy.io as sio
    import scipy.linalg as sla
    import scipy.linalg.blas as blas
    import scipy.sparse as sp

    threads = int(os.environ.get("OPENBLAS_NUM_THREADS", "0"))

    def dense(path):
        m = sio.mmread(path)
        return np.asarray(m.toarray() if sp.issparse(m) else m, dtype=float)

    # GEMM peak: best of 3 at N = 4000 (2 N^3 flops).
    g = 4000
    x = np.random.default_rng(1).standard_normal((g, g))
    y = np.asfortranarray(x.T.copy())
    x = np.asfortranarray(x)
    best = float("inf")
    for _ in range(3):
        t0 = time.perf_counter()
        blas.dgemm(1.0, x, y)
        best = min(best, time.perf_counter() - t0)
    print(json.dumps({"threads": threads, "gemm_gflops": 2 * g**3 / best / 1e9}), flush=True)

    sytrf, sytrs = sla.get_lapack_funcs(("sytrf", "sytrs"), dtype=np.float64)
    potrf, = sla.get_lapack_funcs(("potrf",), dtype=np.float64)
    for d in dirs:
        H = dense(os.path.join(d, "H.mtx"))
        n = H.shape[0]
        A = dense(os.path.join(d, "A.mtx")) if os.path.exists(os.path.join(d, "A.mtx")) else np.zeros((0, n))
        m = A.shape[0]
        c = dense(os.path.join(d, "c.mtx")).reshape(-1)
        b = dense(os.path.join(d, "b.mtx")).reshape(-1) if m else np.zeros(0)
        K = np.zeros((n + m, n + m), order="F")
        K[:n, :n] = H
        K[n:, :n] = A
        K[:n, n:] = A.T
        r = np.concatenate([-c, b])
        normk = np.abs(K).sum(axis=1).max()

        def bwd(z):
            return float(np.abs(r - K @ z).max() / (normk * np.abs(z).max() + np.abs(r).max()))

        lwork = int(sla.lapack.dsytrf_lwork(n + m, lower=1)[0]) if hasattr(sla.lapack, "dsytrf_lwork") else None
        times = []
        z = None
        for _ in range(repeat):
            Kc = np.array(K, order="F")
            t0 = time.perf_counter()
            if lwork is not None:
                lu, ipiv, info = sytrf(Kc, lower=1, overwrite_a=1, lwork=max(lwork, 1))
            else:
                lu, ipiv, info = sytrf(Kc, lower=1, overwrite_a=1)
            z, info2 = sytrs(lu, ipiv, r, lower=1)
            times.append(time.perf_counter() - t0)
            if info != 0 or info2 != 0:
                raise RuntimeError(f"{d}: dsytrf info {info}, dsytrs info {info2}")
        out = {"threads": threads, "name": os.path.basename(d.rstrip("/")), "N": n + m, "n": n, "m": m,
               "sytrf_sytrs_s": times, "sytrf_backward_error": bwd(z)}

        # Hand-written Schur complement solve (only defined for H positive definite).
        Hf = np.asfortranarray(H)
        L, info = potrf(np.array(Hf, order="F"), lower=1)
        if info == 0 and m:
            times = []
            for _ in range(repeat):
                Hc = np.array(Hf, order="F")
                At = np.array(A.T, order="F")
                t0 = time.perf_counter()
                L, info = potrf(Hc, lower=1, overwrite_a=1, clean=0)
                W = blas.dtrsm(1.0, L, At, side=0, lower=1, trans_a=0, diag=0, overwrite_b=1)
                S = blas.dsyrk(1.0, W, trans=1, lower=1)
                Ls, info_s = potrf(S, lower=1, overwrite_a=1, clean=0)
                u = blas.dtrsv(L, r[:n], lower=1, trans=0)
                t = W.T @ u - r[n:]
                t = blas.dtrsv(Ls, t, lower=1, trans=0)
                yv = blas.dtrsv(Ls, t, lower=1, trans=1)
                xv = blas.dtrsv(L, u - W @ yv, lower=1, trans=1)
                times.append(time.perf_counter() - t0)
                if info_s != 0:
                    raise RuntimeError(f"{d}: dpotrf(S) info {info_s}")
            out["schur_s"] = times
            out["schur_backward_error"] = bwd(np.concatenate([xv, yv]))
        print(json.dumps(out), flush=True)


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("dirs", nargs="+")
    ap.add_argument("--threads", default="1,2")
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--child", action="store_true", help=argparse.SUPPRESS)
    a = ap.parse_args()
    if a.child:
        child(a.dirs, a.repeat)
        return
    for t in a.threads.split(","):
        env = dict(os.environ, OPENBLAS_NUM_THREADS=t, OMP_NUM_THREADS=t)
        env.pop("OPENBLAS_CORETYPE", None)
        env.pop("OPENBLAS_L2_SIZE", None)
        subprocess.run([sys.executable, __file__, "--child", "--repeat", str(a.repeat), *a.dirs], env=env, check=True)


if __name__ == "__main__":
    main()
