"""Translation-invariant lateral kernels tiled over a grid.

A kernel K[post_feature, pre_feature, dy, dx] has an odd spatial size
(2r + 1) x (2r + 1), centred: K[a, b, r + dy, r + dx] is the weight onto a
unit of feature a at position p from the unit of feature b at position
p + (dy, dx). Tiled over an H x W grid it is the matrix M[post, pre] of
N = F H W units, unit (feature k, row y, column x) at index
k H W + y W + x, with

    M[(a, p), (b, q)] = K[a, b, q - p]     (offsets within the kernel)

either on a torus (``boundary="periodic"``: q - p taken mod the grid) or
with zero weight beyond the edge (``boundary="zero"``).

On the torus M is block-circulant (docs/kernels.md): with G the kernel
zero-padded to the full grid of offsets and G_hat = fft2(G) over the two
offset axes, M is unitarily similar to the block-diagonal matrix of the
F x F blocks G_hat[:, :, f], so ||M||_* = sum_f ||G_hat_f||_*,
||M||_1 = H W ||K||_1 and ||M||_F^2 = H W ||K||_F^2.
"""


import numpy as np

from .errors import InputError
from .grammar import parse_integer
from .limits import check_fits

__all__ = ["check_kernel", "dense_bytes", "expand", "expand_full",
           "full_grid", "kernel_norms", "parse_grid", "to_local"]


def parse_grid(text):
    """``"64x64"`` -> (64, 64).

    >>> parse_grid("12x8")
    (12, 8)
    """
    sides = [parse_integer(t) for t in str(text).lower().split("x")]
    if len(sides) != 2 or None in sides:
        raise InputError(f"grid {text!r} is not of the form HxW, e.g. 64x64")
    h, w = sides
    if h < 1 or w < 1:
        raise InputError(f"grid {text!r} must be at least 1x1")
    return h, w


def check_kernel(K, grid, boundary="periodic", name="kernel"):
    """Validate a kernel array against a grid; returns it as float64."""
    K = np.asarray(K)
    if K.ndim != 4:
        raise InputError(f"{name}: expected a 4-D array K[post_feature, "
                         f"pre_feature, dy, dx], got {K.ndim}-D {K.shape}")
    if K.shape[0] == 0:
        raise InputError(f"{name}: the kernel has no features (shape {K.shape})")
    if K.shape[0] != K.shape[1]:
        raise InputError(f"{name}: post and pre feature counts differ "
                         f"({K.shape[0]} and {K.shape[1]})")
    if K.shape[2] % 2 == 0 or K.shape[3] % 2 == 0:
        raise InputError(f"{name}: spatial size {K.shape[2]}x{K.shape[3]} must "
                         "be odd (the kernel is centred)")
    if not np.issubdtype(K.dtype, np.number) or np.iscomplexobj(K):
        raise InputError(f"{name}: must hold real numbers")
    K = K.astype(np.float64)
    if not np.isfinite(K).all():
        raise InputError(f"{name}: has NaN or Inf entries")
    h, w = grid
    if boundary not in ("periodic", "zero"):
        raise InputError(f"unknown boundary {boundary!r} (periodic or zero)")
    if K.shape[2] > h or K.shape[3] > w:
        raise InputError(f"{name}: spatial size {K.shape[2]}x{K.shape[3]} is "
                         f"larger than the {h}x{w} grid")
    F = K.shape[0]
    check_fits(KERNEL_ARRAYS * F * F * h * w * 8,
               f"{name}: {F} features on a {h}x{w} grid (the solver's "
               f"{KERNEL_ARRAYS} full-grid kernels)")
    return K


KERNEL_ARRAYS = 8
"""Full-grid (F, F, H, W) arrays the kernel solver holds at once (L, S, Y,
the kernel, its transform and the work arrays), checked before any is made."""


def full_grid(K, grid):
    """The kernel zero-padded to every offset of the torus: (F, F, H, W),
    offset (dy mod H, dx mod W)."""
    F = K.shape[0]
    h, w = grid
    ry, rx = K.shape[2] // 2, K.shape[3] // 2
    G = np.zeros((F, F, h, w))
    for i in range(K.shape[2]):
        for j in range(K.shape[3]):
            G[:, :, (i - ry) % h, (j - rx) % w] += K[:, :, i, j]
    return G


def to_local(G, radius=None):
    """A full-grid kernel back to a centred (2r + 1)^2 one (r from the grid
    when None: the largest that fits)."""
    F, _, h, w = G.shape
    ry = (h - 1) // 2 if radius is None else radius
    rx = (w - 1) // 2 if radius is None else radius
    K = np.zeros((F, F, 2 * ry + 1, 2 * rx + 1))
    for i in range(2 * ry + 1):
        for j in range(2 * rx + 1):
            K[:, :, i, j] = G[:, :, (i - ry) % h, (j - rx) % w]
    return K


def dense_bytes(n_units, arrays=6):
    """Bytes a dense solve of an n x n float64 matrix needs (W and the
    solver's live arrays)."""
    return int(arrays) * int(n_units) ** 2 * 8


def expand(K, grid, boundary="periodic", *, max_bytes=None):
    """The dense matrix M[post, pre] of the kernel tiled over the grid.

    Refuses (InputError) when the matrix and a dense solve on it would need
    more than ``max_bytes`` (default: the memory this process may use,
    :func:`eidecomp.limits.available_memory`).
    """
    K = check_kernel(K, grid, boundary)
    F = K.shape[0]
    h, w = grid
    n = F * h * w
    check_fits(dense_bytes(n), f"expanding {F} features on a {h}x{w} grid gives "
               f"{n} units: a dense solve", max_bytes=max_bytes,
               advice="; use the structured solver (--boundary periodic) instead")
    ry, rx = K.shape[2] // 2, K.shape[3] // 2
    M = np.zeros((F, h, w, F, h, w))
    ys, xs = np.arange(h), np.arange(w)
    for i in range(K.shape[2]):
        for j in range(K.shape[3]):
            dy, dx = i - ry, j - rx
            qy, qx = ys + dy, xs + dx
            if boundary == "periodic":
                qy, qx = qy % h, qx % w
                oky, okx = np.ones(h, bool), np.ones(w, bool)
            else:
                oky, okx = (qy >= 0) & (qy < h), (qx >= 0) & (qx < w)
            py, px = ys[oky], xs[okx]
            block = K[:, :, i, j]
            for a in range(F):
                M[a, py[:, None], px[None, :], :, qy[oky][:, None],
                  qx[okx][None, :]] += block[a][None, None, :]
    return M.reshape(n, n)


def expand_full(G, *, max_bytes=None):
    """The dense matrix of a full-grid kernel G (P, Q, H, W) on the torus:
    (P H W) x (Q H W), square when P = Q (a kernel between two populations
    otherwise)."""
    P, Q, h, w = G.shape
    check_fits(dense_bytes(max(P, Q) * h * w),
               f"{P * h * w}x{Q * h * w} units: a dense matrix",
               max_bytes=max_bytes)
    oy = (np.arange(h)[None, :] - np.arange(h)[:, None]) % h   # [p, q] -> q - p
    ox = (np.arange(w)[None, :] - np.arange(w)[:, None]) % w
    M = G[:, :, oy[:, None, :, None], ox[None, :, None, :]]  # a, b, py, px, qy, qx
    return np.ascontiguousarray(M.transpose(0, 2, 3, 1, 4, 5)).reshape(
        P * h * w, Q * h * w)


def kernel_norms(G):
    """(nuclear norm, l1 norm, Frobenius norm) of the tiled matrix of a
    full-grid kernel G (F, F, H, W), computed without forming it."""
    h, w = G.shape[2:]
    Gh = np.fft.fft2(G, axes=(2, 3))
    blocks = np.moveaxis(Gh, (2, 3), (0, 1)).reshape(h * w, *G.shape[:2])
    nuc = float(np.linalg.svd(blocks, compute_uv=False).sum())
    return nuc, h * w * float(np.abs(G).sum()), np.sqrt(h * w) * float(
        np.linalg.norm(G))
