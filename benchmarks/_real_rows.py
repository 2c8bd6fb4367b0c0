"""The real rows of benchmarks/assemble.py (``--rows real``).

Matrices users bring, not planted ones: two signed C. elegans connectomes
from the registry package cect (eidecomp.datasets.signed_connectome, which
already obey Dale's law), two lateral matrices from scikit-learn's sample
photographs (eidecomp.datasets: partial correlations of 12x12 patches, a
sparse-coding dictionary's lateral weights), and the demo's example matrix.
Each is assembled in this process at its defaults (``assemble(W,
ei_ratio="4:1")``: the split, the circuit and the baselines), and
scikit-learn's NMF (solver "cd", the circuit's interneuron count, tol 1e-4,
init "nndsvda") is timed on max(-W, 0), the factorisation the assembly
generalises.

Per row: N, n_I, the assembly's time and NMF's, their ratio, the relative
error ||W - W_eff||_F / ||W||_F, the best baseline's error at the circuit's
J_EE density (the report's "@density" lines), autapses (J_EE's nonzero
diagonal where W's diagonal is zero), the cancelling share (J_EE's weight
where W <= 0, over J_EE's weight), whether W's linear rate dynamics are
stable (spectral abscissa of -I + W below 0) and whether the circuit's are
at the default tau_I / tau_E (params.TAU_I_MS / TAU_E_MS), and the silent
interneurons (no input or no target).

Targets (issue 27), PASS/FAIL: no autapse where W has none; cancelling
share <= 5 %; a stable W gives a stable circuit; a Dale-compliant W
(every column one sign) reproduced to 1e-9.
"""

import time
import warnings

import numpy as np

TARGETS = ("no autapse where W has none", "cancelling share <= 5 %",
           "a stable W gives a stable circuit",
           "a Dale-compliant W reproduced to 1e-9")


def real_cases():
    """(label, W) of the real rows; a family whose package is missing is
    skipped with a line that says so."""
    from eidecomp.datasets import (
        example_lateral,
        patch_partial_correlations,
        signed_connectome,
        sparse_coding_lateral,
    )

    try:
        for reader in ("Cook2019HermReader", "VarshneyDataReader"):
            yield f"cect {reader[:-6]}", signed_connectome(reader)[0]
    except ImportError as exc:
        print(f"(connectome rows skipped: {exc})")
    yield "photo pcorr 12x12", patch_partial_correlations(12)
    yield "sparse coding 256", sparse_coding_lateral()
    yield "demo example", example_lateral()[0]


def _timed(f):
    t = time.perf_counter()
    out = f()
    return time.perf_counter() - t, out


def _nmf_time(W, n_components):
    from sklearn.decomposition import NMF

    M = np.maximum(-W, 0.0)
    model = NMF(n_components=n_components, solver="cd", tol=1e-4,
                init="nndsvda", max_iter=2000, random_state=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t, _ = _timed(lambda: model.fit_transform(M))
    return t


def _dale(W):
    return not ((W > 0).any(axis=0) & (W < 0).any(axis=0)).any()


def _row(label, W):
    from eidecomp import assemble
    from eidecomp.dynamics import circuit_abscissa, spectral_abscissa
    from eidecomp.params import TAU_E_MS, TAU_I_MS

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t, c = _timed(lambda: assemble(W, ei_ratio="4:1"))
    J = c.J_EE
    total = float(J.sum())
    cancel = float(J[W <= 0].sum()) / total if total > 0 else 0.0
    autapses = int(np.count_nonzero(np.diag(J)[np.diag(W) == 0]))
    w_stable = spectral_abscissa(W) - 1.0 < 0
    c_stable = circuit_abscissa(c, tau_e=TAU_E_MS, tau_i=TAU_I_MS) < 0
    A = np.hstack([c.J_EU, c.J_ET])
    B = np.vstack([c.J_UE, c.J_TE])
    silent = int(np.count_nonzero(~A.any(axis=0) | ~B.any(axis=1)))
    dens = [b.relative_error for b in c.report.baselines
            if b.name.endswith("@density") and not b.name.startswith("circuit")]
    return {"label": label, "n": W.shape[0], "n_i": c.n_inhibitory, "t": t,
            "nmf": _nmf_time(W, c.n_inhibitory), "err": c.report.relative_error,
            "base": min(dens) if dens else None, "autapses": autapses,
            "cancel": cancel, "w_stable": w_stable, "c_stable": c_stable,
            "silent": silent, "dale": _dale(W)}


def real_table():
    """Print the real rows and their targets; return the number failed."""
    import os

    print("real rows, in this process: OPENBLAS_NUM_THREADS="
          f"{os.environ.get('OPENBLAS_NUM_THREADS', 'unset')}, "
          f"{os.cpu_count()} CPUs", flush=True)
    print(f"{'case':<24} {'N':>4} {'n_I':>4} {'asm s':>7} {'nmf s':>6} "
          f"{'x nmf':>6} {'error':>7} {'base@d':>7} {'aut':>4} {'cancel':>6} "
          f"{'W st':>5} {'C st':>5} {'silent':>6}", flush=True)
    rows = []
    for label, W in real_cases():
        r = _row(label, W)
        rows.append(r)
        base = "-" if r["base"] is None else f"{r['base']:.4f}"
        print(f"{label:<24} {r['n']:4d} {r['n_i']:4d} {r['t']:7.1f} "
              f"{r['nmf']:6.2f} {r['t'] / max(r['nmf'], 1e-9):6.2f} "
              f"{r['err']:7.4f} {base:>7} {r['autapses']:4d} "
              f"{100 * r['cancel']:5.1f}% {r['w_stable']!s:>5} "
              f"{r['c_stable']!s:>5} {r['silent']:6d}", flush=True)
    checks = [
        [r["autapses"] == 0 for r in rows],
        [r["cancel"] <= 0.05 for r in rows],
        [r["c_stable"] for r in rows if r["w_stable"]],
        [r["err"] <= 1e-9 for r in rows if r["dale"]],
    ]
    failed = 0
    for name, ok in zip(TARGETS, checks, strict=True):
        verdict = "PASS" if all(ok) else "FAIL"
        failed += verdict == "FAIL"
        print(f"{verdict}  {name}: {sum(ok)}/{len(ok)}")
    return failed
