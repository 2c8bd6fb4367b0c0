"""Planted-circuit recovery, time and peak memory of the whole job, in one run.

For planted Dale's-law circuits (eidecomp.datasets.make_planted_circuit:
N excitatory units on a feature ring, 5 untuned interneurons with dense
pools, N/4 - 5 tuned ones pooling 8 neighbours and inhibiting 8 units of
the opposite feature, like-to-like J_EE of density 8 %), each (N, seed) row
runs in a fresh child process (this script, re-executed with a hidden
--child flag) that builds W and then, timed one by one:

1. the split, ``robust_pca(W, seed=seed)``;
2. the assembly, ``assemble(dec, ei_ratio="4:1", seed=seed,
   baselines=False)`` (given the decomposition, so W = L + S);
3. the baselines, ``eidecomp.assemble.baselines`` on W with the circuit's
   n_I, error and J_EE density: the call that ``assemble(baselines=True)``
   makes, less the "circuit@density" line it adds (one pruning of J_EE);
4. the stability, ``eidecomp.dynamics.stability_summary(circuit, W)``.

Per row it prints: the times (split, assembly, baselines, stability, their
total, and assembly / split), the peak resident memory, the relative error
||W - W_eff||_F / ||W||_F (the assembly report's), the F1 score of the
recovered J_EE support, the mean Jaccard index of the tuned input pools
matched one to one to the planted ones (scipy's linear_sum_assignment), the
silent interneurons (no input or no target: an all-zero column of J_EI or
row of J_IE), the error of the nmf baseline, a plain nonnegative factorisation
with the same n_I, and the J_EE density that the global baseline needs at the
circuit's error.

Peak memory is VmHWM of the child (benchmarks/_peak.py). The high-water mark
is reset (/proc/self/clear_refs, Linux >= 4.0) after the planted matrices are
built, and again before each step, so "peak GB" is the largest resident size
of the four steps, with W and the planted truth in memory, and "at" names the
step; the generator's own peak is left out (where the reset is refused, the
peak is the child's whole life and the table says so).

Targets (issue 15), with PASS/FAIL and the measured figure printed at the end:

* at N = 10,000, 4:1: split + assembly + baselines + stability within
  5 minutes and 6 GB on this 2-core machine;
* the assembly no more than 3x the split's time at every size;
* at N = 200-800, seeds 0-2: planted error below 1 %, J_EE F1 >= 0.97,
  tuned-pool Jaccard >= 0.95;
* zero silent interneurons on every (planted) row.

A row that fails or times out fails every target that names it.

The children run with OPENBLAS_NUM_THREADS (and OMP_, MKL_NUM_THREADS and a
threadpoolctl limit) set to --threads, 2 by default, whatever the caller's
environment says; the header prints the value and the BLAS the child found.

--rows real runs the real rows of benchmarks/_real_rows.py instead (in
this process, with this process's BLAS threads: set OPENBLAS_NUM_THREADS);
--rows planted,real runs both; --rows real --held-out runs other members of
the real rows' families, for re-checking the targets on matrices the work
was not tuned on.

Usage: python benchmarks/assemble.py [--sizes 200,400,800] [--seeds 0,1,2]
       [--big 2000,5000,10000 | --big 0] [--timeout 1800] [--threads 2]
       [--no-baselines-above N] [--rows planted|real|planted,real]
       [--held-out]
"""

import argparse
import json
import os
import subprocess
import sys
import time
import warnings

import numpy as np
from _peak import PEAK
from scipy import sparse
from scipy.optimize import linear_sum_assignment

GB = 1e9
TARGET_N = 10_000
TARGET_SECONDS = 300.0
TARGET_GB = 6.0
TARGET_RATIO = 3.0
QUALITY_SIZES = (200, 400, 800)
QUALITY_SEEDS = (0, 1, 2)
TARGET_ERROR = 0.01
TARGET_F1 = 0.97
TARGET_JACCARD = 0.95
THREAD_VARS = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


def f1(a, b):
    """F1 of the supports of a (dense) and b (dense, or a sparse support)."""
    a = a > 0
    if sparse.issparse(b):
        b = b.tocoo()
        hits = a[b.row[b.data > 0], b.col[b.data > 0]].sum()
        return 2 * hits / (a.sum() + (b.data > 0).sum())
    b = b > 0
    return 2 * (a & b).sum() / (a.sum() + b.sum())


def mean_jaccard(P, Q):
    P, Q = (P > 0).astype(float), (Q > 0).astype(float)
    inter = P @ Q.T
    J = inter / np.maximum(P.sum(1)[:, None] + Q.sum(1)[None, :] - inter, 1)
    r, c = linear_sum_assignment(-J)
    return J[r, c].mean()


def silent_count(c):
    """Interneurons with no input (all-zero row of J_IE) or no target
    (all-zero column of J_EI), untuned and tuned."""
    silent = ~c.J_EI.any(axis=0) | ~c.J_IE.any(axis=1)
    return int(silent[:c.n_untuned].sum()), int(silent[c.n_untuned:].sum())


# --- the child: one (N, seed) row ----------------------------------------------

_ns = {}
exec(PEAK, _ns)  # defines peak_rss(), the one reader of VmHWM
peak_rss = _ns["peak_rss"]


def reset_peak():
    """Set VmHWM to the current resident size; False where refused."""
    try:
        with open("/proc/self/clear_refs", "w") as fh:
            fh.write("5")
    except OSError:
        return False
    return True


class _Steps:
    """Times each step and the peak resident memory while it ran."""

    def __init__(self, can_reset):
        self.can_reset = can_reset
        self.seconds, self.peak = {}, {}

    def run(self, name, fn, *args, **kwargs):
        if self.can_reset:
            reset_peak()
        t = time.perf_counter()
        out = fn(*args, **kwargs)
        self.seconds[name] = time.perf_counter() - t
        self.peak[name] = peak_rss() / GB
        return out


def _blas(threads):
    """Limit the BLAS pools to ``threads``; name what was found."""
    try:
        from threadpoolctl import threadpool_info, threadpool_limits
    except ImportError:
        return None, "threadpoolctl missing"
    limiter = threadpool_limits(threads)
    found = sorted({f"{p['internal_api']} {p.get('version') or '?'} x "
                    f"{p['num_threads']}" for p in threadpool_info()})
    return limiter, ", ".join(found) or "none found"


def _score(c, truth, W, baselines, steps):
    from eidecomp.assemble import baselines as score_baselines

    r = c.report
    out = {"n_u": c.n_untuned, "n_t": c.n_tuned, "error": r.relative_error,
           "ee_density": r.ee_density, "f1": float(f1(c.J_EE, truth["ee"])),
           "jaccard": float(mean_jaccard(c.J_TE, truth["te"])),
           "silent": silent_count(c), "converged": bool(r.converged),
           "n_iter": int(r.n_iter), "restarted": int(r.restarted),
           "notes": list(r.notes)}
    if baselines:
        base = steps.run("baselines", score_baselines, W, c.n_inhibitory,
                         circuit_error=r.relative_error,
                         circuit_density=r.ee_density,
                         max_iter=c.params["max_iter"])
        b = {x.name: x for x in base}
        # the nmf baseline is not scored above NMF_MAX_UNITS (its own cost)
        out["nmf_error"] = b["nmf"].relative_error if "nmf" in b else None
        out["global_density"] = b["global@error"].ee_density
    return out


def child(n, seed, baselines, threads):
    """Run one row and return what the parent prints, as a dict."""
    from eidecomp.assemble import assemble
    from eidecomp.datasets import make_planted_circuit
    from eidecomp.decompose import robust_pca
    from eidecomp.dynamics import stability_summary

    _limiter, blas = _blas(threads)
    t = time.perf_counter()
    W, truth, _ = make_planted_circuit(n, n_untuned=5, n_tuned=n // 4 - 5,
                                       seed=seed)
    # the scores need only the planted J_EE's support: keep it sparse, so the
    # child holds what a user's job would (W, then L and S, then the circuit)
    truth = {"ee": sparse.csr_matrix(truth.J_EE > 0), "te": truth.J_TE}
    data_s, data_gb = time.perf_counter() - t, peak_rss() / GB
    steps = _Steps(reset_peak())
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("default")
        dec = steps.run("split", robust_pca, W, seed=seed)
        c = steps.run("assembly", assemble, dec, ei_ratio="4:1", seed=seed,
                      baselines=False)
        rank, split_converged = int(dec.rank), bool(dec.converged)
        del dec                          # L and S are not needed any more
        out = _score(c, truth, W, baselines, steps)
        stab = steps.run("stability", stability_summary, c, W)
    at = max(steps.peak, key=steps.peak.get)
    out.update(seconds=steps.seconds, peaks=steps.peak, peak_gb=steps.peak[at],
               peak_at=at if steps.can_reset else "whole", data_s=data_s,
               data_gb=data_gb, rank=rank,
               split_converged=split_converged, blas=blas,
               stability={k: stab[k] for k in (
                   "original_spectral_abscissa",
                   "circuit_spectral_abscissa_equal_taus",
                   "max_stable_tau_ratio", "eigenvalue_method")},
               warnings=sorted({f"{w.category.__name__}: {w.message}"
                                for w in caught}))
    return out


# --- the parent: rows, table, targets ------------------------------------------

COLUMNS = (("N", 6), ("seed", 4), ("n_u", 3), ("n_t", 5), ("split s", 8),
           ("asm s", 8), ("base s", 7), ("stab s", 7), ("total s", 8),
           ("asm/spl", 7), ("peak GB", 7), ("at", 9), ("error", 7),
           ("F1 J_EE", 7), ("Jaccard", 7), ("silent", 6), ("dens", 6),
           ("(d) err", 7), ("(b) dens", 8))


def _header():
    return " ".join(f"{name:>{w}}" for name, w in COLUMNS)


def _s(x):
    return f"{x:.2f}" if x < 10 else f"{x:.1f}"


def _cells(n, seed, r):
    s = r["seconds"]
    base = s.get("baselines")
    total = sum(s.values())
    silent = sum(r["silent"])
    nmf, glob = r.get("nmf_error"), r.get("global_density")
    return (n, seed, r["n_u"], r["n_t"], _s(s["split"]), _s(s["assembly"]),
            "skip" if base is None else _s(base), _s(s["stability"]), _s(total),
            f"{s['assembly'] / s['split']:.2f}", f"{r['peak_gb']:.2f}",
            r["peak_at"], f"{r['error']:.4f}", f"{r['f1']:.3f}",
            f"{r['jaccard']:.3f}", silent, f"{r['ee_density']:.3f}",
            "-" if nmf is None else f"{nmf:.4f}",
            "-" if glob is None else f"{glob:.3f}")


def _line(cells):
    return " ".join(f"{str(v):>{w}}" for v, (_, w) in zip(cells, COLUMNS,
                                                           strict=False))


def run_row(n, seed, baselines, args):
    """One row in a fresh process: (status, result or message)."""
    env = dict(os.environ, **{v: str(args.threads) for v in THREAD_VARS})
    cmd = [sys.executable, os.path.abspath(__file__), "--child",
           f"{n},{seed},{int(baselines)}", "--threads", str(args.threads)]
    t = time.perf_counter()
    try:
        p = subprocess.run(cmd, env=env, capture_output=True, text=True,
                           timeout=args.timeout)
    except subprocess.TimeoutExpired:
        return "TIMEOUT", f"no result within {args.timeout:g} s (killed)"
    wall = time.perf_counter() - t
    lines = [x for x in p.stdout.splitlines() if x.startswith("RESULT ")]
    if p.returncode or not lines:
        tail = (p.stderr.strip().splitlines() or ["no message"])[-1]
        return "FAILED", f"exit {p.returncode} after {wall:.0f} s: {tail}"
    r = json.loads(lines[-1][len("RESULT "):])
    r["wall_s"] = wall
    return "ok", r


def _rows_of(args):
    sizes = [int(x) for x in args.sizes.split(",") if x.strip()]
    seeds = [int(x) for x in args.seeds.split(",") if x.strip()]
    big = [int(x) for x in args.big.split(",") if x.strip() and int(x) > 0]
    return [(n, s) for n in sizes for s in seeds] + [(n, seeds[0]) for n in big]


# --- the targets -----------------------------------------------------------------

def _verdict(ok):
    return "PASS" if ok else "FAIL"


def _bad_rows(results, names):
    """Rows that did not finish among ``names`` (all rows when None)."""
    return [f"N={n} seed {s}: {st}" for (n, s), (st, _) in results.items()
            if st != "ok" and (names is None or (n, s) in names)]


def target_big(results):
    key = next((k for k in results if k[0] == TARGET_N), None)
    what = (f"N = {TARGET_N:,}: split + assembly + baselines + stability "
            f"<= {TARGET_SECONDS:g} s and <= {TARGET_GB:g} GB")
    if key is None:
        return "NOT RUN", what, f"no N = {TARGET_N} row (--big {TARGET_N})"
    status, r = results[key]
    if status != "ok":
        return "FAIL", what, f"{status}: {r}"
    total, peak = sum(r["seconds"].values()), r["peak_gb"]
    ok = total <= TARGET_SECONDS and peak <= TARGET_GB
    if ok and "baselines" not in r["seconds"]:
        return ("NOT MEASURED", what, f"{total:.0f} s without baselines "
                f"(--no-baselines-above), {peak:.2f} GB")
    skipped = "" if "baselines" in r["seconds"] else " (baselines skipped)"
    return _verdict(ok), what, f"{total:.0f} s, {peak:.2f} GB{skipped}"


def target_ratio(results):
    what = f"assembly <= {TARGET_RATIO:g} x split at every size"
    done = {k: r for k, (st, r) in results.items() if st == "ok"}
    bad = _bad_rows(results, None)
    if not done:
        return "FAIL", what, "no row finished"
    ratio = {k: r["seconds"]["assembly"] / r["seconds"]["split"]
             for k, r in done.items()}
    worst = max(ratio, key=ratio.get)
    over = [f"N={n} seed {s}: {v:.1f}x" for (n, s), v in ratio.items()
            if v > TARGET_RATIO]
    got = (f"largest {ratio[worst]:.2f}x (N = {worst[0]}, seed {worst[1]})"
           + (f"; over: {', '.join(over)}" if over else "")
           + (f"; unfinished: {', '.join(bad)}" if bad else ""))
    return _verdict(not over and not bad), what, got


def target_quality(results):
    names = {(n, s) for n in QUALITY_SIZES for s in QUALITY_SEEDS}
    what = (f"N = 200-800, seeds 0-2: error < {TARGET_ERROR:.0%}, F1 >= "
            f"{TARGET_F1}, Jaccard >= {TARGET_JACCARD}")
    done = {k: r for k, (st, r) in results.items()
            if st == "ok" and k in names}
    bad = _bad_rows(results, names)
    if not done:
        return ("FAIL" if bad else "NOT RUN", what,
                "no row of N = 200-800, seeds 0-2 finished"
                + (f": {', '.join(bad)}" if bad else ""))
    err = max(r["error"] for r in done.values())
    f = min(r["f1"] for r in done.values())
    jac = min(r["jaccard"] for r in done.values())
    ok = (err < TARGET_ERROR and f >= TARGET_F1 and jac >= TARGET_JACCARD
          and not bad)
    got = (f"worst error {err:.4f}, F1 {f:.3f}, Jaccard {jac:.3f} over "
           f"{len(done)} of the {len(names)} rows"
           + (f"; unfinished: {', '.join(bad)}" if bad else ""))
    return _verdict(ok), what, got


def target_silent(results):
    what = "zero silent interneurons on every planted row"
    done = {k: r for k, (st, r) in results.items() if st == "ok"}
    bad = _bad_rows(results, None)
    if not done:
        return "FAIL", what, "no row finished"
    loud = [f"N={n} seed {s}: {sum(r['silent'])} ({r['silent'][0]} untuned, "
            f"{r['silent'][1]} tuned)" for (n, s), r in done.items()
            if sum(r["silent"])]
    rows = f"{len(done)} row{'s' * (len(done) != 1)}"
    got = ("; ".join(loud) if loud else f"none, {rows}") + (
        f"; unfinished: {', '.join(bad)}" if bad else "")
    return _verdict(not loud and not bad), what, got


def summary(results):
    print("\nTargets (issue 15):")
    for check in (target_big, target_ratio, target_quality, target_silent):
        verdict, what, got = check(results)
        print(f"  {verdict:<12} {what}\n  {'':<12} measured: {got}")


def _notes(results):
    """Warnings, report notes and failures, one line each, after the table."""
    out = []
    for (n, s), (status, r) in results.items():
        if status != "ok":
            out.append(f"N={n} seed {s}: {status}: {r}")
            continue
        for text in r["warnings"] + r["notes"]:
            out.append(f"N={n} seed {s}: {text}")
        if not r["split_converged"]:
            out.append(f"N={n} seed {s}: the split did not converge")
    return out


def _parser():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--sizes", default="200,400,800",
                    help="sizes run at every seed")
    ap.add_argument("--seeds", default="0,1,2")
    ap.add_argument("--big", default="2000,5000,10000",
                    help="sizes run at the first seed only ('0' to skip)")
    ap.add_argument("--timeout", type=float, default=1800.0,
                    help="seconds a row may take before it is killed")
    ap.add_argument("--threads", type=int, default=2,
                    help="BLAS threads of each child (OPENBLAS_NUM_THREADS)")
    ap.add_argument("--no-baselines-above", type=int, default=None,
                    metavar="N", help="skip the baselines on rows above N")
    ap.add_argument("--rows", default="planted",
                    help="planted, real (benchmarks/_real_rows.py), or both")
    ap.add_argument("--held-out", action="store_true",
                    help="with --rows real: other members of the same "
                    "families (other connectomes, image statistics, planted "
                    "sizes and seeds)")
    ap.add_argument("--child", help=argparse.SUPPRESS)
    return ap


def main(argv=None):
    args = _parser().parse_args(argv)
    if args.child:
        n, seed, base = (int(x) for x in args.child.split(","))
        print("RESULT " + json.dumps(child(n, seed, bool(base), args.threads)),
              flush=True)
        return 0
    groups = args.rows.split(",")
    failed = 0
    if "real" in groups:
        from _real_rows import real_table

        failed = real_table(held_out=args.held_out)
        if "planted" not in groups:
            return 1 if failed else 0
    rows = _rows_of(args)
    print(f"children: OPENBLAS_NUM_THREADS={args.threads} (threadpoolctl "
          f"limit {args.threads}), timeout {args.timeout:g} s per row, "
          f"{os.cpu_count()} CPUs", flush=True)
    print(_header(), flush=True)
    results, blas = {}, None
    for n, seed in rows:
        base = args.no_baselines_above is None or n <= args.no_baselines_above
        status, r = run_row(n, seed, base, args)
        results[(n, seed)] = (status, r)
        if status == "ok":
            blas = blas or r["blas"]
            print(_line(_cells(n, seed, r)), flush=True)
        else:
            print(f"{n:>6} {seed:>4} {status}", flush=True)
    print(f"\nBLAS in the child: {blas or 'unknown (no row finished)'}; "
          "times in s; peak GB: VmHWM of the child, the largest of the four "
          "steps ('at'), the generator's peak left out ('whole' where the "
          "reset was refused)")
    for line in _notes(results):
        print("  " + line)
    summary(results)
    return 0


if __name__ == "__main__":
    sys.exit(main())
