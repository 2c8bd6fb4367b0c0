"""Time and peak memory of the in-memory robust PCA against N.

Planted problems in the setting of Candes et al. (2011): rank N / 200,
5 % of entries corrupted by random signs. Each size runs in a fresh process
that loads W from a .npy file and reports its own time and peak resident
memory (VmHWM, read before the planted L0 is loaded to score the
result). Beside each, one full numpy SVD of a matrix of that size: measured
up to --svd-max, above it extrapolated as n^3 from the largest measured
(marked "est").

Targets (issue 7): N = 10,000 (rank 50) recovers L to 1e-5 in under 2
full-SVD times and 6 GB; float32 to 1e-4 in under 3.5 GB; N = 20,000 in
float32 completes.

With --dask N[,N...] it also runs the dask engine (a local cluster of
decompose.LOCAL_WORKERS single-threaded workers limited to 1.5 GB each) on
the float32 matrix of each size read from disk, and prints its time, the
peak memory of this process and the workers' limit, and whether its rank
matches the in-memory engine's. S and Y live in .npy files beside the
output (4 files of the size of W), so the run needs that much free disk.

Usage: python benchmarks/scale.py [--sizes 1000,2000,5000,10000]
       [--float32 10000,20000] [--svd-max 5000] [--dask 20000]
"""

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from _peak import PEAK

from eidecomp.decompose import LOCAL_WORKERS

CHILD = PEAK + r"""
import json, sys, time
import numpy as np
from eidecomp import robust_pca
path, dtype = sys.argv[1], sys.argv[2]
W = np.load(path + "_W.npy")
t = time.perf_counter()
dec = robust_pca(W, dtype=dtype)
t = time.perf_counter() - t
peak = peak_rss()
del W
L0 = np.load(path + "_L0.npy", mmap_mode="r")
num = den = 0.0
for s in range(0, L0.shape[0], 1000):
    a = np.asarray(L0[s:s + 1000], dtype=np.float64)
    d = dec.low_rank[s:s + 1000] - a
    num += float(np.vdot(d, d)); den += float(np.vdot(a, a))
print(json.dumps({"time": t, "peak": peak, "n_iter": dec.n_iter, "rank": dec.rank,
                  "converged": dec.converged, "err": (num / den) ** 0.5}))
"""


DASK_CHILD = PEAK + r"""
import json, sys, tempfile, time
import numpy as np
from eidecomp.decompose import robust_pca_dask
base = sys.argv[1]
if __name__ == "__main__":
    with tempfile.TemporaryDirectory() as tmp:
        t = time.perf_counter()
        dec = robust_pca_dask(base + "_W.npy", dtype="float32",
                              memory_limit="1.5GB", chunks=(2500, 2500),
                              sparse_out=tmp + "/s.npy")
        t = time.perf_counter() - t
        peak = peak_rss()
        U, s, Vt = dec.low_rank_factors
        L0 = np.load(base + "_L0.npy", mmap_mode="r")
        num = den = 0.0
        for a in range(0, L0.shape[0], 1000):
            ref = np.asarray(L0[a:a + 1000], dtype=np.float64)
            d = (U[a:a + 1000] * s) @ Vt - ref
            num += float(np.vdot(d, d)); den += float(np.vdot(ref, ref))
        print(json.dumps({"time": t, "peak": peak, "n_iter": dec.n_iter,
                          "rank": dec.rank, "err": (num / den) ** 0.5}))
"""


def planted(n, dtype, seed=0):
    """W, L0 of the planted setting of Candes et al. (2011), built in
    ``dtype`` to save memory."""
    rng = np.random.default_rng(seed)
    r = max(1, n // 200)
    X = (rng.standard_normal((n, r)) / np.sqrt(n)).astype(dtype)
    Y = (rng.standard_normal((n, r)) / np.sqrt(n)).astype(dtype)
    L0 = X @ Y.T
    W = L0.copy()
    for s in range(0, n, 1000):  # 5 % random signs, block by block
        block = W[s:s + 1000]
        hit = rng.random(block.shape) < 0.05
        block[hit] += rng.choice(np.array([-1.0, 1.0], dtype), hit.sum())
    return W, L0


def child(code, *args):
    """Run one measurement in a fresh process; its JSON line, or None after
    printing why it failed (the tail of its stderr)."""
    out = subprocess.run([sys.executable, "-c", code, *args],
                         capture_output=True, text=True)
    if out.returncode != 0:
        tail = "\n".join(out.stderr.strip().splitlines()[-15:])
        print(f"  run failed with status {out.returncode}:\n{tail}", flush=True)
        return None
    return json.loads(out.stdout.strip().splitlines()[-1])


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--sizes", default="1000,2000,5000,10000")
    ap.add_argument("--float32", default="10000,20000")
    ap.add_argument("--svd-max", type=int, default=5000)
    ap.add_argument("--dask", default="")
    args = ap.parse_args()
    runs = [(int(n), "float64") for n in args.sizes.split(",") if n] + \
           [(int(n), "float32") for n in args.float32.split(",") if n]
    svd = {}
    print(f"{'N':>6} {'dtype':>8} {'rank':>5} {'iters':>5} {'time s':>8} "
          f"{'peak GB':>8} {'err L':>8} {'svd s':>9} {'x svd':>6}")
    with tempfile.TemporaryDirectory() as tmp:
        for n, dtype in runs:
            W, L0 = planted(n, np.float32 if dtype == "float32" else np.float64)
            base = str(Path(tmp) / f"p{n}")
            np.save(base + "_W.npy", W)
            np.save(base + "_L0.npy", L0)
            if n not in svd and n <= args.svd_max:
                A = W.astype(np.float64)
                t = time.perf_counter()
                np.linalg.svd(A)
                svd[n] = (time.perf_counter() - t, "")
                del A
            del W, L0
            if n not in svd:
                top = max(svd) if svd else None
                svd[n] = ((svd[top][0] * (n / top) ** 3, " est") if top
                          else (float("nan"), " -"))
            r = child(CHILD, base, dtype)
            if r is None:
                continue
            t_svd, tag = svd[n]
            print(f"{n:6d} {dtype:>8} {r['rank']:5d} {r['n_iter']:5d} "
                  f"{r['time']:8.1f} {r['peak'] / 1e9:8.2f} {r['err']:8.1e} "
                  f"{t_svd:8.1f}{tag:4s} {r['time'] / t_svd:6.2f}"
                  + ("" if r["converged"] else "  (not converged)"), flush=True)
            if dtype == "float32" and str(n) in args.dask.split(","):
                q = child(DASK_CHILD, base)
                if q is None:
                    continue
                print(f"{n:6d} {'dask f32':>8} {q['rank']:5d} {q['n_iter']:5d} "
                      f"{q['time']:8.1f} {q['peak'] / 1e9:8.2f} {q['err']:8.1e} "
                      f"   {LOCAL_WORKERS} workers x 1.5 GB; rank "
                      f"{'matches' if q['rank'] == r['rank'] else 'DIFFERS'}",
                      flush=True)
            for f in (base + "_W.npy", base + "_L0.npy"):
                Path(f).unlink()


if __name__ == "__main__":
    main()
