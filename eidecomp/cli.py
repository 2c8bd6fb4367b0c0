"""The ``eidecomp`` command: a parser and ``main``; the work is in pipeline.

Exit statuses: :data:`EXIT_RULE`, the words the README and every --help
give (0, 1, 2, 3, 129, 130, 143).
"""

import argparse
import math
import os
import sys
import warnings

from ._version import __version__
from .errors import ConvergenceWarning, InputError, SolverError, WriteError
from .grammar import parse_integer, parse_number
from .io.staging import FORCE_RULE
from .params import (
    ALPHA_RULE,
    DEFAULT_EE_SUPPORT,
    DEFAULT_EI_RATIO,
    DEFAULT_PERIOD,
    EE_SUPPORTS,
    GAP_TOL,
    MAX_ITER,
    STOP_RULES,
    TAU_E_MS,
    TAU_I_MS,
    TOL,
    active_text,
    excitation_line,
    guard_line,
    labels_caveat,
    own_stability_line,
    resolve_tol,
    tau_ratio_text,
)

__all__ = ["main"]


class _Parser(argparse.ArgumentParser):
    """argparse, but a usage error is one line and exit status 2."""

    def error(self, message):
        raise InputError(f"{message} (see '{self.prog} --help')")


def _number(text):
    """An option's number, under the one grammar of text numbers
    (eidecomp.grammar)."""
    value = parse_number(text)
    if value is None:
        raise argparse.ArgumentTypeError(f"not a number: {text!r}")
    return value


def _positive_float(text):
    value = _number(text)
    if not value > 0 or value != value or value == float("inf"):
        raise argparse.ArgumentTypeError(f"must be a positive number: {text!r}")
    return value


def _count(text):
    value = parse_integer(text)
    if value is None:
        raise argparse.ArgumentTypeError(f"not a whole number: {text!r}")
    if value < 0:
        raise argparse.ArgumentTypeError(f"must be 0 or more: {text!r}")
    return value


def _add_matrix_options(p):
    """How the matrix is read, which entries count and how it is split:
    shared by every command that decomposes one (decompose, assemble, run)."""
    from .decompose import METHODS, SOLVERS

    p.add_argument("--key", help="array name in .npz / variable in .mat "
                   "(default: the file's only one)")
    p.add_argument("--transpose", action="store_true",
                   help="the file is stored [pre, post]")
    p.add_argument("--unobserved", metavar="FILE",
                   help="matrix of W's shape: 1 where an entry is unobserved, "
                   "0 where observed (default: every entry observed)")
    p.add_argument("--ignore-diagonal", action="store_true",
                   help="treat self-connections as unobserved")
    p.add_argument("--lam", type=_positive_float,
                   help="weight of ||S||_1 (default 1/sqrt(max(m, n)))")
    p.add_argument("--tol", type=_positive_float,
                   help="ALM tolerance on primal and dual residuals (default "
                   f"{TOL['float64']:g}, or {TOL['float32']:g} with --float32)")
    p.add_argument("--stop", choices=STOP_RULES,
                   help=f"{STOP_RULES[0]} (default): also stop once the "
                   "certified duality gap is below --gap-tol; residuals: "
                   "only when both residuals are below --tol (strict)")
    p.add_argument("--gap-tol", type=_positive_float,
                   help="bound on the certified relative duality gap "
                   f"(default {GAP_TOL['float64']:g}; needs --stop gap)")
    p.add_argument("--float32", action="store_true",
                   help="decompose in float32: half the memory, residuals to "
                   f"about {TOL['float32']:g} (the default tol then); the "
                   "circuit is assembled in float64")
    p.add_argument("--target-rank", type=_count, metavar="K",
                   help="search lam for a low-rank part of rank K (instead of "
                   "--lam; default: no search)")
    p.add_argument("--method", choices=METHODS, default=METHODS[0],
                   help=f"{METHODS[0]} (default): the fast ALM solver; "
                   "convex: the convex program, solved by cvxpy to its "
                   "solver's tolerance (small matrices)")
    p.add_argument("--solver", choices=SOLVERS, default=SOLVERS[0],
                   type=str.upper, help="cvxpy solver for --method convex "
                   f"(default {SOLVERS[0]})")


EXIT_RULE = ("exit status: 0 done; 1 a solver, a write or memory failed; 2 "
             "bad input or options; 3 the output was written but its summary "
             "could not be printed; 129, 130, 143 hung up, interrupted, "
             "terminated; whatever the status, no partly written output is left "
             "and an existing one is unchanged unless replaced as asked")
"""The exit statuses, the same words in README ("When something is wrong")
and at the end of every --help."""

QUIET_RULE = ("no progress lines and no summary: only warnings and errors, on "
              "standard error; the exit status tells the outcome")
"""What -q does for every command that writes an output (README, "Exit
statuses" and progress)."""


def _add_quiet(p, result_printed=False):
    """-q: the one switch of every command's progress lines and summary;
    a command whose printed lines are its result (simulate) keeps them."""
    p.add_argument("-q", "--quiet", action="store_true",
                   help="no progress lines; the comparison, this command's "
                   "result, is still printed" if result_printed else QUIET_RULE)


def _add_seed(p):
    """--seed: one name, help and default in every command."""
    p.add_argument("--seed", type=_count, default=0,
                   help="seed of every random choice (default 0): the same "
                   "inputs and seed give the same outputs")


def _add_drive(p):
    """--input and --seed of the drive of W's units: simulate and the script
    exports (the same drive, so an exported script responds as simulate)."""
    from .simulation import DRIVE_RANGE, RANDOM

    p.add_argument("--input", default=None, metavar=f"{RANDOM}|FILE",
                   help=f"drive of W's units: {RANDOM} (the default: uniform "
                   f"on [{DRIVE_RANGE[0]:g}, {DRIVE_RANGE[1]:g}], seeded by "
                   "--seed) or a file of N values, or N x T (T segments held "
                   "in turn: time along the columns)")
    _add_seed(p)


def _add_gain(p, where=""):
    """--gain: one name, help and default in simulate and export."""
    p.add_argument("--gain", type=_positive_float, default=1.0,
                   help="scale W by this gain (default 1), and the circuit "
                   "with it: J_EE by the gain, J_EI and J_IE by its square "
                   f"root (Dale's law kept){where}")


_SUGGESTED = {"simulate": ("simulator", "model", "input", "seed", "tau_e",
                           "tau_i", "gain", "duration"),
              "export": ("format", "output", "input", "seed", "tau_e", "tau_i",
                         "gain", "force")}
"""The options a suggested command repeats (when set away from their
default): the run as the user asked for it, with the changes advised."""


def _suggester(args):
    """``command(**changes)``: the command as given, with some options
    changed, as one shell line (eidecomp.simulation.advice prints it)."""
    import shlex

    sub = _get_parser().subcommands[args.command]

    def command(**changes):
        words = ["eidecomp", args.command, args.bundle]
        for dest in _SUGGESTED[args.command]:
            value = changes.get(dest, getattr(args, dest))
            if value is None or value is False or (
                    dest not in changes and value == sub.get_default(dest)):
                continue
            flag = "-o" if dest == "output" else "--" + dest.replace("_", "-")
            words += [flag] if value is True else [
                flag, f"{value:g}" if isinstance(value, float) else str(value)]
        return shlex.join(words)

    return command


def _add_job_options(p):
    """--seed, --force and -q: the same for every job that writes a folder."""
    _add_seed(p)
    _add_force(p)
    _add_quiet(p)


def _add_bundle_job(p, target, what):
    """A job that reads a circuit bundle and writes one output."""
    p.add_argument("bundle", metavar="CIRCUIT", help="a circuit bundle folder")
    _add_output(p, target, what)
    _add_force(p)
    _add_quiet(p)


def _add_output(p, metavar, what, default=None):
    """-o/--output: what the job writes; it must not exist (--force)."""
    p.add_argument("-o", "--output", required=default is None,
                   default=default, metavar=metavar,
                   help=f"{what} (" + ("" if default is None else
                                       f"default {default}; ")
                   + "must not exist, unless --force)")


def _add_force(p):
    p.add_argument("--force", action="store_true", help=FORCE_RULE)


def _add_input(p, matrix_help, kernel_help):
    """The input of a job: a matrix, or a kernel tiled over a grid."""
    p.add_argument("matrix", nargs="?", help=matrix_help + " (omit with --kernel)")
    p.add_argument("--kernel", metavar="K.npy",
                   help="a lateral kernel K[post_feature, pre_feature, dy, dx] "
                   f"(odd, centred) tiled over --grid, instead of a matrix "
                   f"(default: a matrix): {kernel_help}")
    p.add_argument("--grid", metavar="HxW", help="grid of the kernel, e.g. 64x64 "
                   "(no default: needed with --kernel)")


def _get_parser():
    from .decompose import LOCAL_WORKERS
    from .export import FORMATS
    from .io.units import POSITION_UNITS
    from .params import SETTLE_TIME_CONSTANTS as SETTLE
    from .pipeline import DECOMPOSE_ENGINES
    from .simulation import MODELS, SIMULATORS

    parser = _Parser(prog="eidecomp", description=(
        "Turn a signed lateral weight matrix W[post, pre] into low-rank and "
        "sparse parts (robust PCA) and into a Dale's-law circuit of excitatory, "
        "untuned-inhibitory and tuned-inhibitory populations."))
    parser.add_argument("--version", action="version",
                        version=f"eidecomp {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND",
                                parser_class=_Parser)
    parser.subcommands = sub.choices      # name -> its parser
    dec = sub.add_parser("decompose", help="robust PCA of a weight matrix",
                         description="Split W into low-rank L and sparse S "
                         "(Principal Component Pursuit) and write OUT/low_rank.npy, "
                         "OUT/sparse.npy and OUT/summary.json.")
    _add_input(dec, "W[post, pre] as .npy, .npz, .csv, .tsv, .txt or .mat; "
               "'example' for the built-in invented example",
               "decompose it in the Fourier domain, never forming the matrix")
    dec.add_argument("--boundary", choices=("periodic", "zero"), default="periodic",
                     help="periodic (default): structured solver on the "
                     "kernel; zero: expanded to the dense matrix (memory "
                     "permitting)")
    _add_output(dec, "OUT", "folder to write")
    _add_matrix_options(dec)
    dec.add_argument("--max-iter", type=_count, metavar="N",
                     help=f"iteration limit (default {MAX_ITER} for the ALM; "
                     "the cvxpy solver's own for --method convex)")
    dec.add_argument("--engine", choices=DECOMPOSE_ENGINES,
                     default=DECOMPOSE_ENGINES[0],
                     help="memory (default) or dask: the matrix read in blocks "
                     "from a .npy file or a .zarr array and decomposed on a "
                     "Dask cluster, S and Y kept on disk beside OUT")
    dec.add_argument("--scheduler", metavar="ADDRESS",
                     help="dask scheduler address (default: start a local "
                     f"cluster of {LOCAL_WORKERS} workers)")
    _add_job_options(dec)
    asm = sub.add_parser("assemble", help="Dale's-law circuit from a matrix",
                         description="Build an excitatory / untuned-inhibitory "
                         "/ tuned-inhibitory circuit that reproduces W at the "
                         "chosen E:I ratio, and write it as a bundle folder.")
    _add_input(asm, "W[post, pre] (as for decompose), 'example', or a folder "
               "written by 'eidecomp decompose'", "periodic: assemble a tiled "
               "circuit of translation-invariant kernels")
    asm.add_argument("--expand", action="store_true",
                     help="with --kernel: write the explicit circuit (a regular "
                     "bundle) instead of kernels, after a memory estimate")
    run = sub.add_parser("run", help="decompose and assemble in one go",
                         description="Robust PCA of W, then the Dale's-law "
                         "circuit, written as one bundle folder.")
    run.add_argument("matrix", help="W[post, pre] (as for decompose) or "
                     "'example'")
    for p in (asm, run):
        _add_output(p, "CIRCUIT", "bundle folder to write")
        p.add_argument("--ei-ratio", metavar="E:I",
                       help="excitatory units per interneuron, e.g. 9:2 "
                       f"(default {DEFAULT_EI_RATIO}; for a W that already "
                       "obeys Dale's law, W's own)")
        p.add_argument("--untuned-share", default="auto", metavar="auto|F",
                       help="fraction of interneurons that are untuned; 'auto' "
                       "(default) takes the rank of the low-rank part")
        p.add_argument("--alpha", type=_nonnegative_float,
                       help=f"weight of ||J_EE||_1 (default {ALPHA_RULE})")
        p.add_argument("--ee-support", choices=EE_SUPPORTS,
                       default=DEFAULT_EE_SUPPORT,
                       help="where J_EE may carry weight: 'positive' (default:"
                       " only where W > 0, no autapse where W has none) or "
                       "'any' (unconstrained; inhibition may cancel it)")
        p.add_argument("--no-own-neurons", action="store_true",
                       help="assemble a W that already obeys Dale's law (every "
                       "column one sign) like any W: all units excitatory, "
                       "interneurons added (default: its own inhibitory "
                       "neurons are the interneurons)")
        p.add_argument("--no-stability-guard", action="store_true",
                       help="keep the closest fit even when W is stable and "
                       "the circuit is not at the default time constants "
                       "(default: refit it stable and report the error "
                       "this costs, on circuits small enough for the "
                       "guard's dense eigenproblems: docs/assembly.md)")
        p.add_argument("--units", metavar="CSV",
                       help="unit table: a 'feature' column in degrees, "
                       "optional id, x, y; one row per unit of W (default: "
                       "none; then no profiles or tuning)")
        p.add_argument("--period", type=_positive_float, default=DEFAULT_PERIOD,
                       help="period of the feature in degrees (default "
                       f"{DEFAULT_PERIOD:g}: orientation; 360: direction)")
        p.add_argument("--position-unit", choices=POSITION_UNITS,
                       default=POSITION_UNITS[0],
                       help="unit of the x, y columns: um (default: micrometres "
                       "of cortex) or deg (degrees of visual field; then give "
                       "--magnification)")
        p.add_argument("--magnification", type=_positive_float, metavar="UM_PER_DEG",
                       help="cortical magnification, micrometres per degree "
                       "(needed with --position-unit deg; no default)")
        p.add_argument("--report", action="store_true",
                       help="also write CIRCUIT/report.html (and its "
                       "figures as SVG) in the same pass")
        _add_matrix_options(p)
        _add_job_options(p)
    exp = sub.add_parser("export", help="write a circuit in an export format",
                         description="Write a circuit bundle in one export "
                         "format (--format): the neuron-level graph (edges pre "
                         "-> post, nonnegative weights, synapse kind), a table "
                         "per population pair, NeuroML2, or a simulator script "
                         "with its data.")
    _add_bundle_job(exp, "FILE_OR_DIR", "the file (graph and model formats) or "
                    "folder (simulator scripts) to write")
    exp.add_argument("--format", required=True, choices=FORMATS,
                     help=_format_help())
    _add_time_constants(exp, " (simulator formats)")
    _add_drive(exp)
    _add_gain(exp, " (simulator formats)")
    exp.add_argument("--allow-unstable", action="store_true",
                     help="simulator formats: write a circuit whose linear "
                     "dynamics are unstable at this gain and these time "
                     "constants (refused otherwise), with a warning")
    exp.add_argument("--raw-csv", action="store_true",
                     help="csv: write text cells as they are, without "
                     "neutralising those a spreadsheet would run as formulas")
    rep = sub.add_parser("report", help="an HTML report of a circuit",
                         description="Write one self-contained HTML file with "
                         "the inputs, parameters, the assembly against the "
                         "baselines, connection profiles, tuning, stability and "
                         "figures, and each figure as an SVG file in the "
                         "folder FILE's name without its suffix + '-figures' "
                         "beside it (report.html: report-figures/).")
    _add_bundle_job(rep, "FILE", "the HTML file to write, and its figures "
                    "folder beside it")
    demo = sub.add_parser("demo", help="the whole job on invented demo data",
                          description="Write an invented demo matrix and unit "
                          "table, and run decompose, assemble and report on "
                          "them into one folder.")
    _add_output(demo, "DIR", "folder to write", default="eidecomp-demo")
    _add_force(demo)
    _add_quiet(demo)
    sim = sub.add_parser("simulate", help="run the circuit and the original "
                         "network", description="Simulate the circuit's rate "
                         "model and the original network on the same drive, "
                         "and print how closely the circuit's E rates match the "
                         "fixed points of W and of W_eff (linear) or the "
                         "original's final rates (threshold-linear).")
    sim.add_argument("bundle", metavar="CIRCUIT", help="a circuit bundle folder")
    sim.add_argument("--simulator", choices=[s.name for s in SIMULATORS],
                     default=SIMULATORS[0].name, help="; ".join(
                         f"{s.name}: {s.help}" for s in SIMULATORS)
                     + f" (default {SIMULATORS[0].name})")
    _add_drive(sim)
    _add_time_constants(sim, "")
    sim.add_argument("--model", choices=[m.name for m in MODELS],
                     default=MODELS[0].name, help="; ".join(
                         f"{m.name}: {m.help}" for m in MODELS)
                     + f" (default {MODELS[0].name})")
    _add_gain(sim)
    sim.add_argument("--duration", type=_positive_float, metavar="MS",
                     help="simulated time in ms, shared among the drive's "
                     f"segments (default: each segment lasts {SETTLE} time "
                     f"constants of the slowest mode; {SETTLE} of the slower "
                     "population's when the linear dynamics are unstable)")
    _add_quiet(sim, result_printed=True)
    for p in (parser, *sub.choices.values()):
        p.epilog = EXIT_RULE
    return parser


def _add_time_constants(p, where):
    p.add_argument("--tau-e", type=_positive_float, default=TAU_E_MS,
                   help=f"E time constant in ms (default {TAU_E_MS:g}){where}")
    p.add_argument("--tau-i", type=_positive_float, default=TAU_I_MS,
                   help=f"interneuron time constant in ms (default {TAU_I_MS:g}: "
                   f"faster than E cells, common practice){where}")


def _format_help():
    """Every export format with its registry line (export/registry.py)."""
    from .export import REGISTRY

    return "; ".join(f"{f.name}: {f.help}" for f in REGISTRY)


def _nonnegative_float(text):
    value = _number(text)
    if not value >= 0 or value == float("inf"):
        raise argparse.ArgumentTypeError(f"must be 0 or more: {text!r}")
    return value


def _progress(args, tol=None):
    """The command's Progress (eidecomp.progress), None with -q."""
    from .progress import Progress

    return Progress(sys.stderr, quiet=getattr(args, "quiet", False),
                    **({} if tol is None else {"tol": tol}))


def _num(value, spec):
    """A number of a summary table: '-' when there is none, 0 as 0."""
    if value is None or value != value:
        return "-"
    return "0" if value == 0 else format(value, spec)


def _table(rows):
    width = max(len(k) for k, _ in rows)
    return "\n".join(f"{k:<{width}}  {v}" for k, v in rows)


def _shape(s):
    return "x".join(map(str, s["input"]["shape"]))


def _kernel_rows(result):
    s = result.summary
    ranks = result.decomposition.ranks
    return [("kernel", "x".join(map(str, s["input"]["kernel_shape"]))),
            ("grid", "x".join(map(str, s["input"]["grid"])) + "  (periodic)"),
            ("units", str(s["n_units"])),
            ("lam", _num(s["lam"], ".6g")),
            ("rank of L", f"{s['rank']}  (at most {int(ranks.max())} per "
                          "frequency)"),
            ("objective", _num(s["objective"], ".10g"))]


def _dask_rows(result):
    s = result.summary
    return [("engine", f"dask ({s['engine']['scheduler']})"),
            ("shape", _shape(s)), ("lam", _num(s["lam"], ".6g")),
            ("rank of L", str(s["rank"]))]


def _dense_rows(result):
    s = result.summary
    o = s["optimality"]
    default = s["parameters"].get("lam") is None and \
        s["parameters"].get("target_rank") is None
    return [("shape", _shape(s)),
            ("lam", _num(s["lam"], ".6g") + ("  (default)" if default else "")),
            ("nonzeros in S", f"{100 * s['sparsity']:.2f} %"),
            ("objective", _num(s["objective"], ".10g")),
            ("primal residual", _num(o["primal_residual"], ".2e")),
            ("duality gap", _num(o.get("duality_gap"), ".2e")
             + f"  (certified; stop: {o.get('stop', '-')})"),
            ("||Y||_2", _num(o["multiplier_spectral_norm"], ".6f")),
            ("||Y||_max / lam", _num(o["multiplier_max_norm_over_lam"], ".6f")),
            ("rank of L", f"{s['rank']} (+{s.get('rank_band', 0)} values "
             "below the rank cut)"),
            ("support of S", _percent(s.get("support_density")))]


def _percent(x):
    return "-" if x is None else f"{100 * x:.2f} %"


def _verdict_line(summary):
    """The verdict's one line, first in the summary, or None."""
    v = summary.get("verdict")
    return None if not v else v["line"]


def _summary_table(result):
    from .io.bundles import DASK_DECOMPOSITION, KERNEL_DECOMPOSITION

    rows = {KERNEL_DECOMPOSITION: _kernel_rows,
            DASK_DECOMPOSITION: _dask_rows}.get(result.kind, _dense_rows)(result)
    s = result.summary
    table = _table(rows + [("iterations", str(s["n_iter"])),
                           ("converged", "yes" if s["converged"] else "NO"),
                           ("written to", str(result.output))])
    line = _verdict_line(s)
    return table if line is None else f"{line}\n{table}"


def _decompose(args):
    from .pipeline import DecomposeConfig, run_decompose

    dtype = "float32" if args.float32 else "float64"
    config = DecomposeConfig(
        input=args.matrix, output=args.output, key=args.key,
        kernel=args.kernel, grid=args.grid, boundary=args.boundary,
        transpose=args.transpose, unobserved=args.unobserved,
        ignore_diagonal=args.ignore_diagonal, lam=args.lam,
        target_rank=args.target_rank, method=args.method, solver=args.solver,
        tol=args.tol, stop=args.stop, gap_tol=args.gap_tol,
        max_iter=args.max_iter, seed=args.seed, force=args.force,
        dtype=dtype, engine=args.engine, scheduler=args.scheduler)
    with _progress(args, resolve_tol(args.tol, dtype)) as progress:
        result = run_decompose(config, progress=progress.solver)
    _out(_summary_table(result), written=result.output, quiet=args.quiet)
    return 0


def _convergence_cell(baseline):
    """'' for an exact baseline; an iterative one's convergence and KKT
    residual (BaselineResult.converged, kkt_residual)."""
    if baseline.get("converged") is None:
        return ""
    kkt = baseline.get("kkt_residual")
    return (f"  {'converged' if baseline['converged'] else 'NOT converged'}"
            + ("" if kkt is None else f", KKT {kkt:.1e}"))


def _circuit_table(result):
    m = result.meta
    c, met = m["counts"], m["metrics"]
    verdict = _verdict_line(m.get("decomposition", {}))
    lines = [met["comparison"]] if met.get("comparison") else []
    lines += [] if verdict is None else [verdict]
    lines += [
        f"circuit: {c['excitatory']} E, {active_text(m, 'untuned')} untuned I, "
        f"{active_text(m, 'tuned')} tuned I  ({met['share_rule']})"
        + labels_caveat(m, "; ", ""),
        f"{'construction':<18} {'n_I':>6} {'rel. error':>11} {'J_EE density':>13}",
        f"{'this circuit':<18} {c['untuned'] + c['tuned']:>6} "
        f"{met['relative_error']:>11.4f} {met['ee_density']:>13.4f}",
    ]
    for b in m["baselines"]:
        lines.append(f"{b['name']:<18} {b['n_inhibitory']:>6} "
                     f"{b['relative_error']:>11.4f} {b['ee_density']:>13.4f}"
                     + _convergence_cell(b))
    st = m["stability"]
    if st.get("circuit_spectral_abscissa_equal_taus") is None:
        lines.append(f"stability: {st['note']}")
    elif st.get("own_neurons"):
        lines.append(own_stability_line(st))
    else:
        lines.append(f"stability: {tau_ratio_text(st)} (spectral abscissa of "
                     f"-I + W: {st['original_spectral_abscissa']:.3g})")
    if st.get("why"):
        lines.append(f"stability: {st['why']}")
    if guard_line(met):
        lines.append(guard_line(met))
    lines.append(excitation_line(met))
    if met.get("restarted"):
        lines.append(f"interneurons started again after losing their inputs "
                     f"or targets: {met['restarted']}")
    left, positive, largest = met.get("dropped", (0, 0, 0.0))
    if left:
        lines.append(f"positive entries of W left out of J_EE by alpha: {left} "
                     f"of {positive} (largest {largest:.3g}); a smaller "
                     "--alpha keeps more")
    if met.get("floored"):
        lines.append(f"weights below the connection floor zeroed: "
                     f"{met['floored']}")
    lines.extend(f"note: {note}" for note in met.get("notes", ()))
    if met.get("silent_interneurons"):
        lines.append(f"silent interneurons (no input or no target): "
                     f"{met['silent_interneurons']}")
    if not met["converged"]:
        lines.append("refinement converged: NO")
    lines.append(f"written to {result.output}")
    return "\n".join(lines)


def _tiled_line(result):
    m = result.meta
    site = m["per_site"]
    return (f"tiled circuit on a {'x'.join(map(str, m['input']['grid']))} grid: "
            f"per site {site['excitatory']} E, {site['untuned']} untuned I, "
            f"{site['tuned']} tuned I; relative error "
            f"{m['metrics']['relative_error']:.4f}; expanded it is "
            f"{sum(m['counts'].values())} units "
            f"(~{m['memory_estimate_expanded_bytes'] / 2**20:.0f} MiB dense)\n"
            "excitation: J_EE anywhere (the kernel assembler has no support "
            "rule yet: ee_support any)\n"
            f"written to {result.output}")


def _assemble(args):
    from .io.bundles import TILED
    from .pipeline import AssembleConfig, run_assemble

    dtype = "float32" if args.float32 else "float64"
    config = AssembleConfig(
        input=args.matrix, output=args.output, ei_ratio=args.ei_ratio,
        untuned_share=args.untuned_share, alpha=args.alpha,
        ee_support=args.ee_support,
        no_stability_guard=args.no_stability_guard,
        no_own_neurons=args.no_own_neurons, units=args.units,
        period=args.period, position_unit=args.position_unit,
        magnification=args.magnification, report=args.report,
        kernel=getattr(args, "kernel", None), grid=getattr(args, "grid", None),
        expand=getattr(args, "expand", False), key=args.key,
        transpose=args.transpose, unobserved=args.unobserved,
        ignore_diagonal=args.ignore_diagonal, lam=args.lam, tol=args.tol,
        stop=args.stop, gap_tol=args.gap_tol, target_rank=args.target_rank,
        method=args.method, solver=args.solver,
        seed=args.seed, force=args.force, dtype=dtype)
    with _progress(args, resolve_tol(args.tol, dtype)) as progress:
        result = run_assemble(config, progress=progress.solver,
                              stage_progress=progress.stage)
    _out(_tiled_line(result) if result.kind is TILED else _circuit_table(result),
         written=result.output, quiet=args.quiet)
    return 0


def _export(args):
    from .pipeline import run_export

    with _progress(args) as progress:
        progress.stage(f"export: {args.format}")   # shown if it takes a while
        path = run_export(args.bundle, args.format, args.output,
                          force=args.force, tau_e=args.tau_e, tau_i=args.tau_i,
                          raw_csv=args.raw_csv, drive=args.input,
                          seed=args.seed, gain=args.gain,
                          allow_unstable=args.allow_unstable,
                          command=_suggester(args),
                          warn=lambda line: _say(f"eidecomp: warning: {line}"))
    _out(f"written to {path}", written=path, quiet=args.quiet)
    return 0


def _report(args):
    from .pipeline import report_figures_folder, run_report

    with _progress(args) as progress:
        path = run_report(args.bundle, args.output, force=args.force,
                          progress=progress.stage)
    _out(f"written to {path}; figures as SVG in {report_figures_folder(path)}",
         written=path, quiet=args.quiet)
    return 0


def _demo(args):
    from .pipeline import run_demo

    with _progress(args) as progress:
        result = run_demo(args.output, force=args.force, progress=progress)
    _out(f"{_circuit_table(result)}\nreport: {result.output / 'report.html'}",
         written=result.output, quiet=args.quiet)
    return 0


def _gain_limit(g_star):
    if math.isinf(g_star):
        return "the original is stable at every gain"
    return f"the original is stable below {g_star:.4g}"


def _simulate(args):
    from .pipeline import run_simulate
    from .simulation import verdict_line

    with _progress(args) as progress:
        progress.stage(f"simulating the circuit and the original network "
                       f"({args.simulator}, {args.model})")
        r = run_simulate(args.bundle, simulator=args.simulator,
                         drive="random" if args.input is None else args.input,
                         tau_e=args.tau_e, tau_i=args.tau_i, seed=args.seed,
                         gain=args.gain, model=args.model,
                         duration=args.duration, command=_suggester(args))
    rows = [
        ("simulator", r["simulator"]),
        ("model", r["model"]),
        ("gain", f"{r['gain']:g} ({_gain_limit(r['largest_stable_gain'])})"),
        ("drive", r["drive"]),
        ("tau_E, tau_I", f"{r['tau_e_ms']:g} ms, {r['tau_i_ms']:g} ms"),
        ("simulated", f"{r['t_ms']:.4g} ms" + (
            f" ({r['n_segments']} drive segments of {r['segment_ms']:g} ms)"
            if r["n_segments"] > 1 else "")),
        ("linear growth rate: original, circuit",
         f"{r['original_growth_rate']:.3g}, {r['circuit_growth_rate']:.3g} per ms"),
    ]
    if r["model"] == "linear":
        rows += [
            ("circuit E rates vs fixed point of W_eff",
             f"{r['circuit_vs_fixed_point_W_eff']:.2e}"),
            ("circuit E rates vs fixed point of W",
             f"{r['circuit_vs_fixed_point_W']:.2e}"),
            ("original network vs fixed point of W",
             f"{r['original_vs_fixed_point_W']:.2e}"),
        ]
    else:
        rows += [("rate of change at the end: original, circuit",
                  f"{r['original_rate_of_change']:.2e}, "
                  f"{r['circuit_rate_of_change']:.2e} per ms")]
    rows += [
        ("circuit vs original network (final E rates)" if r["model"] != "linear"
         else "circuit vs original network", f"{r['circuit_vs_original']:.2e}"),
        ("||W - W_eff|| / ||W||", f"{r['reconstruction_error']:.2e}"),
    ]
    _out(f"{_table(rows)}\n{verdict_line(r, _suggester(args))}")
    return 0


SUMMARY_LOST = 3
"""The exit status when the output was written but its summary could not be
printed (a closed pipe, a full device): neither success nor a failure that
left nothing behind."""


class _SummaryLost(Exception):
    """Standard output could not take the summary: (reason, what was
    written or None)."""


def _printable(text, stream):
    """``text`` as ``stream`` can encode it: what its encoding cannot show
    (a name that is not UTF-8, a non-ASCII name under an ASCII locale) as
    backslash escapes."""
    encoding = getattr(stream, "encoding", None) or "utf-8"
    return text.encode(encoding, "backslashreplace").decode(encoding)


def _out(text, written=None, *, quiet=False):
    """Print a job's summary on standard output, unless ``quiet`` (-q). One
    that cannot take it (a closed pipe, a full device) ends the command in
    main with one line that says what was written."""
    if quiet:
        return
    if sys.stdout is None:              # closed before Python started (>&-)
        raise _SummaryLost("it is closed", written)
    try:
        print(_printable(text, sys.stdout))
        sys.stdout.flush()
    except OSError as exc:
        try:                            # no second failure at the exit's flush
            os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        except (OSError, ValueError, AttributeError):
            pass
        raise _SummaryLost(exc.strerror or type(exc).__name__, written) from None


def _show_warning(message, category, filename, lineno, file=None, line=None):
    _say(f"eidecomp: warning: {message}")


def _say(line):
    """One line on standard error; a terminal that went away (SIGHUP) is
    not an error of its own: the exit status says what happened."""
    if sys.stderr is None:              # closed: print() would use stdout
        return
    try:
        print(_printable(line, sys.stderr), file=sys.stderr)
    except OSError:
        pass


def _one_line(exc):
    """The message on one line: line breaks (say, in a file name) escaped."""
    return str(exc).replace("\r", "\\r").replace("\n", "\\n")


def main(argv=None):
    """Run the command line; returns the exit status.

    SIGTERM and SIGHUP stop a run as SIGINT does (nothing written), with
    exit status 128 + the signal's number; SIGINT gives 130.
    """
    from .io.staging import Terminated, handle_termination

    say = _say

    try:
        with handle_termination():
            parser = _get_parser()  # imports the jobs: inside the handlers
            args, extra = parser.parse_known_args(argv)
            if extra:   # named by the command that refused them, not the top
                sub = parser.subcommands.get(args.command, parser)
                sub.error(f"unrecognized arguments: {' '.join(extra)}")
            if args.command is None:
                parser.print_help(sys.stderr)
                return 2
            with warnings.catch_warnings():
                warnings.simplefilter("always", ConvergenceWarning)
                warnings.showwarning = _show_warning
                return {"decompose": _decompose, "assemble": _assemble,
                        "run": _assemble, "export": _export,
                        "simulate": _simulate, "report": _report,
                        "demo": _demo}[args.command](args)
    except InputError as exc:
        say(f"eidecomp: error: {_one_line(exc)}")
        return 2
    except SolverError as exc:
        say(f"eidecomp: solver failed: {_one_line(exc)}")
        return 1
    except WriteError as exc:
        say(f"eidecomp: error: {_one_line(exc)}")
        return 1
    except Terminated as exc:
        say(f"eidecomp: terminated ({exc.name}); nothing written")
        return 128 + exc.signum
    except KeyboardInterrupt:
        say("eidecomp: interrupted; nothing written")
        return 130
    except MemoryError as exc:
        detail = _one_line(exc) or "an allocation failed"
        say(f"eidecomp: error: out of memory ({detail}); nothing written")
        return 1
    except _SummaryLost as exc:
        reason, written = exc.args
        if written is None:
            say(f"eidecomp: error: standard output could not take the "
                f"result ({reason}); nothing was written")
            return 1
        say(f"eidecomp: standard output could not take the summary "
            f"({reason}); the output was written to {written}")
        return SUMMARY_LOST


if __name__ == "__main__":
    sys.exit(main())
