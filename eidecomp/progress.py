"""Progress of long work, one mechanism for every command.

A :class:`Progress` is handed to the library's callbacks: :meth:`Progress.solver`
is robust PCA's ``progress(it, primal, dual, rank, mu)``, :meth:`Progress.stage`
the assembler's and the pipeline's ``progress(stage, step, objective)``.
Nothing is shown for work that ends within FIRST_AFTER seconds. Then, on a
terminal, one live line is rewritten in place at most every LIVE_EVERY
seconds, with the time left where it can be estimated; off a terminal (a
pipe, a log file, a batch job) a plain line is written at most every
LOG_EVERY seconds, and every stage that starts after a quiet LOG_EVERY is
named. ``quiet`` (``-q``) shows nothing. As a context manager it also
keeps a heartbeat: a stage that makes no call of its own for a while (a
simulator's run, a figure) is shown again with the time it has taken, so a
long step is never silent; on the way out, error or not, it ends the live
line.
"""

import logging
import math
import sys
import threading
import time

__all__ = ["FIRST_AFTER", "LIVE_EVERY", "LOGGER", "LOG_EVERY", "Progress",
           "announcer", "solver_labeller"]

FIRST_AFTER = 1.0   # seconds of work before the first line
LIVE_EVERY = 0.5    # seconds between rewrites of the live line (a terminal)
LOG_EVERY = 3.0     # seconds between plain lines (not a terminal)


LOGGER = logging.getLogger("eidecomp")
"""Where a stage is announced when no callback is given: a Python user sees
the assembler's and the pipeline's stages with
``logging.basicConfig(level=logging.INFO)``."""


def announcer(progress):
    """The function that announces a stage by name to a stage callback
    (``progress(stage, step, objective)``, e.g. :meth:`Progress.stage`) as
    its start (step 0, no objective); when ``progress`` is None, to the
    ``eidecomp`` logger at level INFO (:data:`LOGGER`).

    >>> seen = []
    >>> announcer(lambda *args: seen.append(args))("stability")
    >>> seen
    [('stability', 0, nan)]
    >>> announcer(None)("stability")
    """
    if progress is None:
        return lambda stage: LOGGER.info("stage: %s", stage)
    return lambda stage: progress(stage, 0, math.nan)


def solver_labeller(callback):
    """The function that says what a solver's iterations are solving, beside
    its per-iteration ``callback``: when the callback is a
    :class:`Progress`'s ``solver``, that Progress's :meth:`Progress.label`
    (the text goes into each iteration's line; None clears it), else the
    ``eidecomp`` logger at level INFO, so a plain function of the solver's
    five arguments is never called with a label.

    >>> import io
    >>> lines = Progress(io.StringIO())
    >>> solver_labeller(lines.solver)("target rank 3, lam 0.1")
    >>> lines.context
    ', target rank 3, lam 0.1'
    >>> solver_labeller(print)("logged: print is no Progress")
    """
    owner = getattr(callback, "__self__", None)
    if isinstance(owner, Progress):
        return owner.label
    tell = announcer(None)
    return lambda text: tell(text) if text else None


class Progress:
    """Progress lines on ``stream`` (standard error by default).

    Parameters
    ----------
    stream : file-like
    tol : float
        The solver's tolerance, for its time left (the residuals fall
        log-linearly towards it).
    live : bool or None
        Rewrite one line in place; None: when ``stream`` is a terminal.
    clock : callable
        Seconds, monotonic (tests pass their own).
    quiet : bool
        Show nothing.

    Examples
    --------
    >>> import io
    >>> out = io.StringIO()
    >>> t = iter([0.0, 5.0, 9.0])
    >>> p = Progress(out, live=False, clock=lambda: next(t))
    >>> p.stage("baselines")
    >>> p.stage("stability")
    >>> print(out.getvalue(), end="")
      [5 s] baselines
      [9 s] stability
    """

    def __init__(self, stream=None, *, tol=1e-8, live=None, clock=time.monotonic,
                 quiet=False):
        self.quiet = bool(quiet)
        self.stream = sys.stderr if stream is None else stream
        self.tol = tol
        self.live = (getattr(self.stream, "isatty", lambda: False)()
                     if live is None else bool(live))
        self.clock = clock
        self.start = clock()
        self.last = -math.inf          # when the last line was written
        self.width = 0                 # of the live line on screen
        self.trail = []                # (iteration, time, log10 residual)
        self.current = None            # (text, since when) of the stage
        self.context = ""              # what the solver solves (label)
        self._lock = threading.Lock()
        self._stop = threading.Event()
        self._beat = None

    # --- the callbacks ----------------------------------------------------

    def solver(self, it, primal, dual, rank, mu):
        """robust_pca's callback: one line per iteration at most."""
        now = self.clock()
        eta = self._eta(it, max(primal, dual), now)
        left = "" if eta is None else f", ~{eta:.0f} s left"
        self._show(now, f"robust PCA{self.context}: iteration {it}, "
                        f"primal {primal:.2e}, "
                        f"dual {dual:.2e}, rank {rank}{left}")

    def label(self, text):
        """What the solver's next iterations solve, named in their lines
        (``robust PCA, TEXT: iteration ...``); None or "" for none."""
        self.context = f", {text}" if text else ""

    def stage(self, stage, step=0, objective=float("nan")):
        """A stage starts (``step`` 0) or makes a step (a sweep and its
        objective, for the assembler's refinement)."""
        if step == 0:
            self.trail = []
        what = stage if not step else (f"{stage}, sweep {step}, objective "
                                       f"{objective:.6g}")
        now = self.clock()
        if step == 0:
            self.current = (stage, now)
        self._show(now, what)

    def __enter__(self):
        if not self.quiet and self.clock is time.monotonic:
            self._beat = threading.Thread(target=self._heartbeat, daemon=True)
            self._beat.start()
        return self

    def __exit__(self, *exc):
        self.close()

    def close(self):
        """Stop the heartbeat and end the live line (the next output starts
        on a line of its own)."""
        self._stop.set()
        if self._beat is not None:
            self._beat.join()
            self._beat = None
        if self.live and self.width:
            print(file=self.stream, flush=True)
            self.width = 0

    # --- helpers ----------------------------------------------------------

    def _heartbeat(self):
        while not self._stop.wait(LIVE_EVERY / 2):
            if self.current is None:
                continue
            text, since = self.current
            now = self.clock()
            # only when nothing else has been shown for a whole interval
            if now - self.last >= (LIVE_EVERY if self.live else LOG_EVERY):
                took = ("" if since - self.start < FIRST_AFTER
                        else f" ({now - since:.0f} s of it)")
                self._show(now, f"{text}, still running{took}")

    def _show(self, now, text):
        with self._lock:
            self._write(now, text)

    def _write(self, now, text):
        elapsed = now - self.start
        if self.quiet or elapsed < FIRST_AFTER or now - self.last < (
                LIVE_EVERY if self.live else LOG_EVERY):
            return
        self.last = now
        line = f"  [{elapsed:.0f} s] {text}"
        if self.live:
            pad = max(self.width - len(line), 0)
            self.stream.write("\r" + line + " " * pad)
            self.stream.flush()
            self.width = len(line)
        else:
            print(line, file=self.stream, flush=True)

    def _eta(self, it, worst, now):
        """Seconds left, from the recent rate at which the larger residual
        falls (log-linear); None while it is not falling."""
        self.trail.append((it, now, math.log10(max(worst, 1e-300))))
        self.trail = self.trail[-20:]
        if len(self.trail) < 5:
            return None
        (i0, t0, r0), (i1, t1, r1) = self.trail[0], self.trail[-1]
        if r1 >= r0 or i1 == i0:
            return None
        per_it = (r0 - r1) / (i1 - i0)
        left_its = (r1 - math.log10(self.tol)) / per_it
        return max(left_its, 0.0) * (t1 - t0) / (i1 - i0)
