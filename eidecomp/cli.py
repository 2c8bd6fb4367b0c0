"""The ``eidecomp`` command: a parser and ``main``; the work is in pipeline.

Exit status: 0 on success, 2 for bad input or options (one line on stderr, no
traceback, nothing written), 1 when a solver fails.
"""

import argparse
import sys
import time
import warnings

from . import __version__
from .errors import ConvergenceWarning, InputError, SolverError

__all__ = ["main"]


class _Parser(argparse.ArgumentParser):
    """argparse, but a usage error is one line and exit status 2."""

    def error(self, message):
        raise InputError(f"{message} (see '{self.prog} --help')")


def _positive_float(text):
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a number: {text!r}") from None
    if not value > 0 or value != value or value == float("inf"):
        raise argparse.ArgumentTypeError(f"must be a positive number: {text!r}")
    return value


def _count(text):
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a whole number: {text!r}") from None
    if value < 0:
        raise argparse.ArgumentTypeError(f"must be 0 or more: {text!r}")
    return value


def _get_parser():
    parser = _Parser(prog="eidecomp", description=(
        "Turn a signed lateral weight matrix W[post, pre] into low-rank and "
        "sparse parts (robust PCA), the first step towards a Dale's-law circuit."))
    parser.add_argument("--version", action="version",
                        version=f"eidecomp {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND",
                                parser_class=_Parser)
    dec = sub.add_parser("decompose", help="robust PCA of a weight matrix",
                         description="Split W into low-rank L and sparse S "
                         "(Principal Component Pursuit) and write OUT/low_rank.npy, "
                         "OUT/sparse.npy and OUT/summary.json.")
    dec.add_argument("matrix", help="W[post, pre] as .npy, .npz, .csv, .tsv, "
                     ".txt or .mat; 'example' for the built-in invented example")
    dec.add_argument("-o", "--output", required=True, metavar="OUT",
                     help="folder to write (must not exist, unless --force)")
    dec.add_argument("--key", help="array name in .npz / variable in .mat")
    dec.add_argument("--transpose", action="store_true",
                     help="the file is stored [pre, post]")
    dec.add_argument("--mask", metavar="FILE",
                     help="matrix of W's shape: 1 where an entry is unobserved")
    dec.add_argument("--ignore-diagonal", action="store_true",
                     help="treat self-connections as unobserved")
    dec.add_argument("--lam", type=_positive_float,
                     help="weight of ||S||_1 (default 1/sqrt(n))")
    dec.add_argument("--target-rank", type=_count, metavar="K",
                     help="search lam for a low-rank part of rank K")
    dec.add_argument("--method", choices=("ialm", "convex"), default="ialm",
                     help="fast ALM solver or exact convex program (cvxpy)")
    dec.add_argument("--solver", choices=("CLARABEL", "SCS"), default="CLARABEL",
                     type=str.upper, help="cvxpy solver for --method convex")
    dec.add_argument("--tol", type=_positive_float, default=1e-8,
                     help="ALM tolerance on primal and dual residuals")
    dec.add_argument("--max-iter", type=_count, metavar="N",
                     help="iteration limit (ALM default 5000)")
    dec.add_argument("--seed", type=_count, default=0)
    dec.add_argument("--force", action="store_true",
                     help="replace OUT if it exists")
    dec.add_argument("-q", "--quiet", action="store_true",
                     help="no progress lines")
    return parser


class _Progress:
    """Progress lines on stderr, at most one a second, after the first second."""

    def __init__(self, stream):
        self.stream = stream
        self.start = self.last = time.monotonic()

    def __call__(self, it, primal, dual, rank, mu):
        now = time.monotonic()
        if now - self.last >= 1.0:
            self.last = now
            print(f"  iteration {it:5d}  primal {primal:.2e}  dual {dual:.2e}  "
                  f"rank {rank}  ({now - self.start:.0f} s)", file=self.stream,
                  flush=True)


def _summary_table(result):
    s = result.summary
    o = s["optimality"]
    rows = [
        ("shape", "x".join(map(str, s["input"]["shape"]))),
        ("lam", f"{s['lam']:.6g}" + ("  (default)" if s["parameters"]["lam"]
                                     is None and s["parameters"]["target_rank"]
                                     is None else "")),
        ("rank of L", str(s["rank"])),
        ("nonzeros in S", f"{100 * s['sparsity']:.2f} %"),
        ("objective", f"{s['objective']:.10g}"),
        ("primal residual", f"{o['primal_residual']:.2e}"),
        ("||Y||_2", "-" if o["multiplier_spectral_norm"] is None
         else f"{o['multiplier_spectral_norm']:.6f}"),
        ("||Y||_max / lam", "-" if o["multiplier_max_norm_over_lam"] is None
         else f"{o['multiplier_max_norm_over_lam']:.6f}"),
        ("iterations", str(s["n_iter"])),
        ("converged", "yes" if s["converged"] else "NO"),
        ("written to", str(result.output)),
    ]
    width = max(len(k) for k, _ in rows)
    return "\n".join(f"{k:<{width}}  {v}" for k, v in rows)


def _decompose(args):
    from .pipeline import DecomposeConfig, run_decompose

    config = DecomposeConfig(
        input=args.matrix, output=args.output, key=args.key,
        transpose=args.transpose, mask=args.mask,
        ignore_diagonal=args.ignore_diagonal, lam=args.lam,
        target_rank=args.target_rank, method=args.method, solver=args.solver,
        tol=args.tol, max_iter=args.max_iter, seed=args.seed, force=args.force)
    progress = None if args.quiet else _Progress(sys.stderr)
    result = run_decompose(config, progress=progress)
    print(_summary_table(result))
    return 0


def _show_warning(message, category, filename, lineno, file=None, line=None):
    print(f"eidecomp: warning: {message}", file=sys.stderr)


def main(argv=None):
    """Run the command line; returns the exit status."""
    parser = _get_parser()
    try:
        args = parser.parse_args(argv)
        if args.command is None:
            parser.print_help(sys.stderr)
            return 2
        with warnings.catch_warnings():
            warnings.simplefilter("always", ConvergenceWarning)
            warnings.showwarning = _show_warning
            return {"decompose": _decompose}[args.command](args)
    except InputError as exc:
        print(f"eidecomp: error: {exc}", file=sys.stderr)
        return 2
    except SolverError as exc:
        print(f"eidecomp: solver failed: {exc}", file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        print("eidecomp: interrupted; nothing written", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
