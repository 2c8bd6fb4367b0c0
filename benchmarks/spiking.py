"""The exported spiking circuit on NEST and on Brian2 against its rate model.

For each circuit the PyNN export (``eidecomp.export.pynn_script``: integrate-
and-fire units at an operating point set from their own rheobase, the
mapping of docs/simulators.md) is written twice, with two seeded drives h_a
and h_b of the E units (``eidecomp.simulation.random_drive``, seeds 0 and 1),
and each script is run standalone on PyNN's NEST backend and on its Brian2
backend. The script prints every unit's rate; the rate model predicts

* each population's mean rate: r0 + rate_per_drive (I - W_full)^-1 H, with
  r0 the operating point's rate of each unit (``rate_hz`` at its bias);
* the change of the E rates between the two drives:
  rate_per_drive [(I - W_full)^-1 (H_b - H_a)]_E (the linear model), and
  rate_per_drive [r_tl(H_b) - r_tl(H_a)]_E with r_tl the threshold-linear
  model's settled rates (E units [.]_+: eidecomp.simulation's internal
  runner), to say which rate model the spiking export follows.

The table gives, per circuit and simulator, the predicted and measured mean
rate of each population, the number of units that never fired, and the
Pearson correlation of the measured E rate changes with the rate model's
prediction, beside their correlation with the drive change alone (the
feed-forward part: how much the recurrent prediction adds), and the slope
of the measured changes regressed on the predicted ones (1 when their size
matches too).

Targets (issue 16): every population fires; r >= 0.8 on the demo circuit and
on a planted one, on both simulators. Issue 29: r and slope against the
threshold-linear model too (columns "r tl", "slope tl").

    OPENBLAS_NUM_THREADS=2 python benchmarks/spiking.py [--t-stop 3000]
"""

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from eidecomp import assemble
from eidecomp.datasets import make_planted_circuit
from eidecomp.dynamics import spectral_abscissa
from eidecomp.export._lists import population_taus
from eidecomp.export.pynn_script import (
    BIAS_RATIO,
    RATE_PER_DRIVE_HZ,
    rate_hz,
    rheobase_nA,
    write_pynn,
)
from eidecomp.io import read_circuit
from eidecomp.params import TAU_E_MS, TAU_I_MS
from eidecomp.simulation import random_drive

TARGET_R = 0.8
SIMULATORS = ("nest", "brian2")


def demo_circuit(folder):
    """The demo's circuit, as ``eidecomp demo`` builds it."""
    from eidecomp.pipeline import run_demo

    run_demo(folder / "demo")
    return read_circuit(folder / "demo")[0]


def planted_circuit():
    """A planted 200-unit circuit (5 untuned, 45 tuned pools), W scaled so
    that the original network's linear dynamics are stable, assembled at 4:1."""
    W, _, _ = make_planted_circuit(200, n_untuned=5, n_tuned=45, seed=3)
    W = 0.6 * W / max(1.0, spectral_abscissa(W))
    return assemble(W, ei_ratio="4:1", seed=3, baselines=False)


def threshold_linear_change(c, h_a, h_b):
    """The threshold-linear model's settled E rate change between the two
    drives, in Hz (eidecomp.simulation's internal runner, 40 time
    constants of the slowest mode)."""
    from eidecomp.dynamics import circuit_abscissa
    from eidecomp.simulation import get_simulator, rectified_units, settle_time

    n, n_i = c.n_excitatory, c.n_inhibitory
    tau = np.r_[np.full(n, TAU_E_MS), np.full(n_i, TAU_I_MS)]
    a = circuit_abscissa(c, tau_e=TAU_E_MS, tau_i=TAU_I_MS)
    H = np.column_stack([np.r_[h_a, np.zeros(n_i)], np.r_[h_b, np.zeros(n_i)]])
    run = get_simulator("internal").load()
    rates = run(c.signed_weights(), H, tau, settle_time(a, a, TAU_E_MS, TAU_I_MS),
                rectified_units(c, "threshold-linear"))
    return RATE_PER_DRIVE_HZ * (rates[:n, 1] - rates[:n, 0])


def predictions(c, h_a, h_b):
    """(per-population predicted mean rates for h_a, predicted E change)."""
    taus = population_taus(c, TAU_E_MS, TAU_I_MS)
    sizes = [p.size for p in c.populations]
    r0 = rate_hz(np.repeat(BIAS_RATIO * rheobase_nA(taus), sizes),
                 np.repeat(taus, sizes))
    W = c.signed_weights()
    solve = np.linalg.solve
    n, n_i = c.n_excitatory, c.n_inhibitory
    base = r0 + RATE_PER_DRIVE_HZ * solve(np.eye(n + n_i) - W,
                                          np.r_[h_a, np.zeros(n_i)])
    change = RATE_PER_DRIVE_HZ * solve(np.eye(n + n_i) - W,
                                       np.r_[h_b - h_a, np.zeros(n_i)])[:n]
    means, start = {}, 0
    for p in c.populations:
        means[p.name] = float(base[start:start + p.size].mean()) if p.size else 0.0
        start += p.size
    return means, change


def run_script(c, h, simulator, t_stop, folder):
    write_pynn(c, folder, h)
    env = {**os.environ, "PYNEST_QUIET": "1"}
    t = time.perf_counter()
    out = subprocess.run([sys.executable, str(folder / "circuit_pynn.py"),
                          "--simulator", simulator, "--t-stop", str(t_stop)],
                         capture_output=True, text=True, env=env)
    if out.returncode:
        raise RuntimeError(f"{simulator}: {out.stderr[-2000:]}")
    return json.loads(out.stdout.strip().splitlines()[-1])["rates_hz"], \
        time.perf_counter() - t


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--t-stop", type=float, default=3000.0,
                    help="simulated ms per run (default 3000)")
    ap.add_argument("--simulators", default=",".join(SIMULATORS))
    args = ap.parse_args()
    sims = [s for s in args.simulators.split(",") if s]
    rows, ok = [], True
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        circuits = {"demo": demo_circuit(tmp), "planted 200": planted_circuit()}
        for cname, c in circuits.items():
            h_a = random_drive(c.n_excitatory, 0).values[:, 0]
            h_b = random_drive(c.n_excitatory, 1).values[:, 0]
            means, change = predictions(c, h_a, h_b)
            tl_change = threshold_linear_change(c, h_a, h_b)
            print(f"{cname}: the two rate models' predicted E changes "
                  f"correlate {np.corrcoef(change, tl_change)[0, 1]:.3f}; "
                  f"E units whose threshold-linear change is 0: "
                  f"{int((np.abs(tl_change) < 1e-9).sum())}", flush=True)
            for sim in sims:
                where = tmp / f"{cname.replace(' ', '-')}-{sim}"
                ra, ta = run_script(c, h_a, sim, args.t_stop, where.with_name(
                    where.name + "-a"))
                rb, tb = run_script(c, h_b, sim, args.t_stop, where.with_name(
                    where.name + "-b"))
                dr = np.array(rb["E"]) - np.array(ra["E"])
                r = float(np.corrcoef(dr, change)[0, 1])
                r_ff = float(np.corrcoef(dr, h_b - h_a)[0, 1])
                slope = float(np.polyfit(change, dr, 1)[0])
                r_tl = float(np.corrcoef(dr, tl_change)[0, 1])
                slope_tl = float(np.polyfit(tl_change, dr, 1)[0])
                silent = {p: int(sum(x == 0 for x in v)) for p, v in ra.items()}
                fires = all(np.mean(v) > 0 for v in ra.values())
                ok &= fires and r >= TARGET_R
                rows.append((cname, sim, means, ra, silent, r, r_ff, slope,
                             r_tl, slope_tl, ta + tb))
                print(f"{cname:12} {sim:7} r = {r:.3f} (drive alone {r_ff:.3f}), "
                      f"slope {slope:.2f}; threshold-linear r = {r_tl:.3f}, "
                      f"slope {slope_tl:.2f}; {ta + tb:.0f} s", flush=True)
    print(f"\nt_stop {args.t_stop:g} ms per run; rates in Hz, predicted | "
          "measured (silent units)")
    print(f"{'circuit':12} {'sim':7} {'E':>19} {'I_untuned':>19} "
          f"{'I_tuned':>19} {'r':>6} {'r drive':>7} {'slope':>6} "
          f"{'r tl':>6} {'slope tl':>8} {'s':>5}")
    for cname, sim, means, ra, silent, r, r_ff, slope, r_tl, s_tl, secs in rows:
        cells = [f"{means[p]:6.1f} | {np.mean(ra[p]):6.1f} ({silent[p]})"
                 if p in ra else "-" for p in ("E", "I_untuned", "I_tuned")]
        print(f"{cname:12} {sim:7} {cells[0]:>19} {cells[1]:>19} "
              f"{cells[2]:>19} {r:6.3f} {r_ff:7.3f} {slope:6.2f} "
              f"{r_tl:6.3f} {s_tl:8.2f} {secs:5.0f}")
    print(f"\n{'PASS' if ok else 'FAIL'}  every population fires and r >= "
          f"{TARGET_R} on every circuit and simulator")


if __name__ == "__main__":
    main()
