"""Decompose the built-in example and look at the split.

The example is invented data: a ring of 120 orientation-tuned model units
whose lateral weights mix broad inhibition, like-to-like excitation and
feature-specific suppression. Run:  python examples/decompose_example.py
"""

import numpy as np

from eidecomp import lambda_path, robust_pca
from eidecomp.datasets import example_lateral

W, preferred = example_lateral()
dec = robust_pca(W, ignore_diagonal=True)
print(f"rank of L: {dec.rank}, nonzeros in S: {100 * dec.sparsity:.1f} %, "
      f"converged: {dec.converged}")
print(f"L <= 0 everywhere (broad inhibition)? {bool((dec.low_rank <= 1e-9).all())}")
S = dec.sparse
print(f"S: {int((S > 0).sum())} excitatory and {int((S < 0).sum())} inhibitory "
      "specific weights")

print("\nlam path:")
points, _ = lambda_path(W, ignore_diagonal=True, n_lams=6, tol=1e-7)
for p in points:
    print(f"  lam {p.lam:.4f}  rank {p.rank:3d}  nonzeros in S "
          f"{100 * p.sparsity:5.1f} %  converged {p.converged}")
print("\nAt the default lam:", np.round(dec.lam, 4))
