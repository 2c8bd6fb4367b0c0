"""Anderson acceleration of a fixed-point map, with a restart safeguard.

The ALM step of robust PCA at a fixed penalty mu is a fixed-point map of one
m x n array q = S + Y/mu (the Douglas-Rachford form of ADMM; docs/robust_pca.md):

    S = shrink_{lam/mu}(q),  Y/mu = clip_{lam/mu}(q),
    L = SVT_{1/mu}(W - S + Y/mu),   F(q) = W - L + Y/mu.

Type-II Anderson acceleration (Anderson 1965; in the least-squares form of
Walker and Ni 2011, SIAM J. Numer. Anal. 49(4))
replaces the plain step q <- F(q) by the combination of the last ``depth``
steps whose residual g = F(q) - q is smallest in the least-squares sense:

    gamma = argmin || g_k - dG gamma ||,   q <- F(q_k) - (dX + dG) gamma,

with dX, dG the differences of successive iterates and residuals. The
safeguard is a restart: when ||g|| grows from one step to the next, the
history is dropped and the plain step taken, so an extrapolation that does
not help costs one step. The penalty changes the map, so every change of mu
restarts too (``reset``). This is not the type-I scheme of Zhang,
O'Donoghue and Boyd (2020, SIAM J. Optim. 30(4)), which approximates the
Jacobian itself and adds Powell-type regularisation and its own safeguard
to prove global convergence for nonexpansive maps: no such guarantee is
claimed here, and the restart rule is this module's own.

Memory: 2 * depth arrays of q's size; ``depth_for`` chooses the depth from a
byte budget, and the solvers run without acceleration when fewer than two
steps fit.
"""

import numpy as np

__all__ = ["Anderson", "depth_for"]

DEPTH = 10  # steps kept: more did not help on the matrices of benchmarks/hard.py
HISTORY_BYTES = 512 * 2**20  # largest history the dense solver keeps
_REG = 1e-12  # Tikhonov weight of the least squares, relative to its scale


def depth_for(size, itemsize, budget=HISTORY_BYTES):
    """Depth whose history of 2 * depth arrays of ``size`` elements fits the
    budget; 0 (no acceleration) below two steps."""
    depth = min(DEPTH, int(budget // max(2 * size * itemsize, 1)))
    return depth if depth >= 2 else 0


class Anderson:
    """Type-II Anderson acceleration over flat arrays.

    ``step(x, fx)`` takes the current point and its image under the map and
    returns the next point (a new array; ``fx`` is not modified).

    Examples
    --------
    >>> import numpy as np
    >>> A = np.array([[0.9, 0.05], [0.0, 0.8]]); b = np.array([1.0, 2.0])
    >>> aa, x = Anderson(depth=2), np.zeros(2)
    >>> for _ in range(6):
    ...     x = aa.step(x, A @ x + b)
    >>> bool(np.allclose(x, np.linalg.solve(np.eye(2) - A, b)))
    True
    """

    def __init__(self, depth=DEPTH):
        self.depth = int(depth)
        self.restarts = 0
        self._clear()

    def _clear(self):
        self._dH, self._dG = [], []  # dH = dX + dG, the only use of dX
        self._x = self._g = None
        self._gram = np.zeros((0, 0))
        self._g_norm = np.inf

    def reset(self):
        """Forget the history (the map changed, or a step did not help)."""
        self.restarts += self._x is not None
        self._clear()

    def step(self, x, fx):
        g = fx - x
        g_norm = float(np.linalg.norm(g))
        if self._x is not None and g_norm > self._g_norm:
            self.reset()  # safeguard: the last extrapolation did not help
        elif self._x is not None:
            self._push(x - self._x, g - self._g)
        self._x, self._g, self._g_norm = x, g, g_norm
        if not self._dG:
            return fx.copy()
        rhs = np.array([float(np.vdot(d, g)) for d in self._dG])
        gram = self._gram
        scale = max(float(np.trace(gram)), np.finfo(float).tiny)
        gamma = np.linalg.solve(gram + _REG * scale * np.eye(len(rhs)), rhs)
        out = fx.copy()
        tmp = np.empty_like(out)
        for c, dh in zip(gamma, self._dH, strict=True):
            np.multiply(dh, c, out=tmp)
            out -= tmp
        return out

    def _push(self, dx, dg):
        if len(self._dG) == self.depth:
            self._dH.pop(0)
            self._dG.pop(0)
            self._gram = self._gram[1:, 1:]
        row = np.array([float(np.vdot(d, dg)) for d in self._dG])
        k = len(row)
        gram = np.empty((k + 1, k + 1))
        gram[:k, :k] = self._gram
        gram[k, :k] = gram[:k, k] = row
        gram[k, k] = float(np.vdot(dg, dg))
        self._gram = gram
        dx += dg
        self._dH.append(dx)
        self._dG.append(dg)
