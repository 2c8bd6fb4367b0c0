"""Tiled Dale's-law circuits for kernels on a periodic grid.

Every site of the H x W torus holds the F excitatory units of the kernel and
m = round(F / ratio) interneurons, m_u untuned and m_t tuned; all
connections are translation-invariant nonnegative kernels (full-grid, as in
eidecomp.kernels):

    J_EE (F, F, H, W), J_EU (F, m_u, H, W), J_UE (m_u, F, H, W),
    J_ET (F, m_t, H, W), J_TE (m_t, F, H, W).

A product of tiled matrices is tiled, with kernel the circular convolution
over offsets, summed over the middle population; in the Fourier domain it
is the product of the F x m and m x F blocks at each frequency. So the
effective kernel is

    W_eff = J_EE - J_EU * J_UE - J_ET * J_TE      (* : that convolution),

and the assembly of the dense case carries over with kernels: the untuned
kernels factor the inhibitory side of L, the tuned ones (with an l1 weight)
that of S, then the joint refinement

    min 0.5 ||W - J_EE + J_EI * J_IE||^2 + alpha ||J_EE||_1,  all >= 0

alternates the exact J_EE step with projected gradient steps on J_EI and
J_IE (each a convex problem for the other fixed; the step is 1 / Lipschitz,
the largest squared singular value of the other factor's Fourier blocks),
so the objective never increases. Norms here are those of kernels; those of
the tiled matrices are H W times larger (squared), which changes no
minimiser.
"""

from dataclasses import dataclass, field

import numpy as np

from ..errors import warn_stopped
from ..kernels import dense_bytes, expand_full
from ..limits import check_fits
from ..params import DEFAULT_EI_RATIO, EIRatio
from ..types import BLOCK_NAMES, Circuit
from ._assemble import default_alpha
from ._counts import inhibitory_count, interneuron_counts

__all__ = ["TiledCircuit", "assemble_tiled"]


def _fft(A):
    return np.fft.rfft2(A, axes=(2, 3))


def _ifft(A, grid):
    return np.fft.irfft2(A, s=grid, axes=(2, 3))


def compose(A, B):
    """Kernel of the product of two tiled matrices: (a, i) * (i, b) -> (a, b)."""
    grid = A.shape[2:]
    return _ifft(np.einsum("aiyx,ibyx->abyx", _fft(A), _fft(B)), grid)


@dataclass(frozen=True)
class TiledCircuit:
    """A translation-invariant Dale's-law circuit on a periodic grid."""

    J_EE: np.ndarray
    J_EU: np.ndarray
    J_UE: np.ndarray
    J_ET: np.ndarray
    J_TE: np.ndarray
    grid: tuple
    params: dict = field(default_factory=dict, repr=False)
    relative_error: float = float("nan")
    converged: bool = True
    n_iter: int = 0

    @property
    def n_features(self):
        return self.J_EE.shape[0]

    @property
    def per_site(self):
        """(E, untuned, tuned) units per site."""
        return self.n_features, self.J_EU.shape[1], self.J_ET.shape[1]

    def effective_kernel(self):
        return (self.J_EE - compose(self.J_EU, self.J_UE)
                - compose(self.J_ET, self.J_TE))

    def expand(self, *, max_bytes=None):
        """The explicit Circuit: E units first (feature-major, as in
        eidecomp.kernels), then the untuned and the tuned interneurons, each
        population ordered (type within site, row, column). Refuses with the
        memory figure when it would not fit."""
        F, mu, mt = self.per_site
        h, w = self.grid
        n = (F + mu + mt) * h * w
        check_fits(dense_bytes(n, arrays=3),
                   f"expanding the tiled circuit gives {n} units and",
                   max_bytes=max_bytes)
        blocks = {b: expand_full(getattr(self, b), max_bytes=max_bytes)
                  for b in BLOCK_NAMES}
        return Circuit(**blocks,
                       params={**self.params, "tiled": True})


def _lipschitz(X):
    """Largest squared singular value over the Fourier blocks of X."""
    if X.size == 0:
        return 1.0
    blocks = np.moveaxis(_fft(X), (2, 3), (0, 1))
    return float(np.linalg.svd(blocks, compute_uv=False).max() ** 2) or 1.0


def _grad_steps(M, A, B, l1, mask_a, mask_b, steps):
    """Alternating projected gradient on 0.5||M - A*B||^2 + l1 (sum A + sum B)."""
    grid = M.shape[2:]
    if A.shape[1] == 0:
        return A, B
    for _ in range(steps):
        Bh = _fft(B)
        R = M - _ifft(np.einsum("aiyx,ibyx->abyx", _fft(A), Bh), grid)
        gA = -_ifft(np.einsum("abyx,ibyx->aiyx", _fft(R), Bh.conj()), grid)
        step = 1.0 / _lipschitz(B)
        A = np.maximum(A - step * (gA + l1), 0.0)
        if mask_a is not None:
            A *= mask_a
        Ah = _fft(A)
        R = M - _ifft(np.einsum("aiyx,ibyx->abyx", Ah, _fft(B)), grid)
        gB = -_ifft(np.einsum("aiyx,abyx->ibyx", Ah.conj(), _fft(R)), grid)
        step = 1.0 / _lipschitz(A)
        B = np.maximum(B - step * (gB + l1), 0.0)
        if mask_b is not None:
            B *= mask_b
    return A, B


def assemble_tiled(dec, W, *, ei_ratio=DEFAULT_EI_RATIO, untuned_share="auto",
                   alpha=None, max_iter=300, tol=1e-6, seed=0, inner=20):
    """Assemble a tiled circuit from a KernelDecomposition of the kernel W.

    Parameters
    ----------
    dec : KernelDecomposition
        From robust_pca_kernel (periodic boundary).
    W : ndarray (F, F, H, W)
        The full-grid kernel that was decomposed.
    ei_ratio : float or str
        Excitatory units per interneuron, applied per site: m = round(F / r).
    untuned_share : "auto" or float
        "auto": m_u = the largest rank of L over frequencies (at most m - 1
        when S inhibits anything).
    alpha : float or None
        l1 weight on J_EE; None means assemble's default_alpha of the kernel.
    """
    ratio = EIRatio.parse(ei_ratio)
    G = np.asarray(W, dtype=float)
    F = G.shape[0]
    grid = G.shape[2:]
    m = inhibitory_count(F, ratio, where=" per site", units="features")
    L, S = np.asarray(dec.low_rank), np.asarray(dec.sparse)
    Mu, Mt = np.maximum(-L, 0.0), np.maximum(-S, 0.0)
    mu, mt, _ = interneuron_counts(m, untuned_share, int(np.max(dec.ranks)),
                             bool(Mt.any()))
    rng = np.random.default_rng(seed)
    alpha = default_alpha(G) if alpha is None else float(alpha)

    def start(P, Q, target):
        size = np.sqrt(max(float(target.mean()), 1e-12) / max(P, 1))
        return rng.random((P, Q, *grid)) * size

    A_u, B_u = start(F, mu, Mu), start(mu, F, Mu)
    A_u, B_u = _grad_steps(Mu, A_u, B_u, 0.0, None, None, 200)
    A_t, B_t = start(F, mt, Mt), start(mt, F, Mt)
    l1 = 0.01 * float(Mt.max()) if Mt.any() else 0.0
    A_t, B_t = _grad_steps(Mt, A_t, B_t, l1, None, None, 200)
    A = np.concatenate([A_u, A_t], axis=1)
    B = np.concatenate([B_u, B_t], axis=0)
    support = None
    history = []
    converged = True
    for phase_alpha in (alpha, 0.0):  # refinement, then debiasing
        for _ in range(max_iter):
            AB = compose(A, B)
            J = np.maximum(G + AB - phase_alpha, 0.0)
            if support is not None:
                J *= support
            A, B = _grad_steps(J - G, A, B, 0.0, None, None, inner)
            R = G - J + compose(A, B)
            history.append(0.5 * float(np.vdot(R, R)) + phase_alpha * J.sum())
            if len(history) > 1 and abs(history[-2] - history[-1]) <= \
                    tol * 0.5 * float(np.vdot(G, G)):
                break
        else:                          # the phase met its sweep limit
            converged = False
        support = J > 0
    if not converged:
        warn_stopped("tiled circuit refinement", max_iter, unit="sweeps",
                     advice="raise assemble_tiled's max_iter")
    J = np.maximum(G + compose(A, B), 0.0) * support
    circuit = TiledCircuit(J_EE=J, J_EU=A[:, :mu], J_UE=B[:mu], J_ET=A[:, mu:],
                           J_TE=B[mu:], grid=tuple(grid),
                           params={"ei_ratio": ratio.text, "per_site": [F, mu, mt],
                                   "untuned_share": untuned_share,
                                   "alpha": alpha, "seed": seed})
    err = float(np.linalg.norm(G - circuit.effective_kernel()) / np.linalg.norm(G))
    return TiledCircuit(**{k: getattr(circuit, k) for k in
                           (*BLOCK_NAMES, "grid",
                            "params")}, relative_error=err,
                        converged=converged, n_iter=len(history))
