"""Circuits of W's own neurons, for a W that already obeys Dale's law
(docs/assembly.md, "A W that already obeys Dale's law").

A signed connectome (each neuron's synapses signed by its transmitter) is
already a Dale's-law circuit: every column is one sign. Adding interneurons
to it would only copy its inhibitory columns, so its own inhibitory neurons
become the interneurons and its full matrix is W itself, with the
inhibitory-to-inhibitory synapses W has. The split classifies them: a
neuron is untuned when the low-rank part L carries most of its inhibition
(the larger squared norm of the negative side of its column, L against S),
tuned otherwise (our rule).

An explicit E:I ratio that asks more interneurons than W has is met by
dividing W's inhibitory neurons with the most targets, those W drives
first (our rule): the
copies of a neuron take the same inputs and share its targets (in W's
order, in contiguous near-equal runs), so each has part of its output and
the circuit still reproduces W exactly. Options the own neurons cannot
honour (a ratio asking fewer interneurons than W has, since an inhibitory
neuron cannot become excitatory; more than W's inhibitory neurons have
targets; an untuned share) are honoured by the assembler's construction
for any W instead, with a note that says why (:func:`why_not_own`).
"""

import numpy as np

from ..errors import InputError
from ..params import EIRatio
from ..types import BLOCK_NAMES, II_BLOCK_NAMES, AssemblyReport
from ._counts import inhibitory_count

OWN_RULE = ("W's own inhibitory neurons: untuned where the low-rank part "
            "carries most of a neuron's inhibition, tuned where the sparse "
            "part does")


def dale_head(n, n_i):
    """The sentence every note on a W that obeys Dale's law starts with.

    >>> dale_head(302, 33)[-47:]
    'with 33 inhibitory neurons of 302 (E:I 269:33).'
    """
    ratio = own_ratio(n - n_i, n_i).text if n > n_i else f"0:{n_i}"
    return (f"W already obeys Dale's law: every column is one sign, with "
            f"{n_i} inhibitory neurons of {n} (E:I {ratio}).")


def own_ratio(n_e, n_i):
    """W's own E:I ratio, as an EIRatio ("269:33")."""
    return EIRatio.parse(f"{n_e}:{n_i}")


def classify(L, S, inhibitory):
    """Boolean mask over W's inhibitory neurons (in W's order): True where
    the low-rank part carries most of the neuron's inhibition.

    >>> L = np.array([[0.0, -2.0, 0.0], [0.0, -2.0, 0.0]])
    >>> S = np.array([[0.0, 0.0, -1.0], [0.0, 0.0, 0.0]])
    >>> classify(L, S, np.array([False, True, True]))
    array([ True, False])
    """
    cols = np.flatnonzero(inhibitory)
    low = np.square(np.minimum(np.asarray(L, float)[:, cols], 0.0)).sum(axis=0)
    sparse = np.square(np.minimum(np.asarray(S, float)[:, cols], 0.0)).sum(axis=0)
    return low > sparse


def why_not_own(W, inhibitory, ratio, untuned_share):
    """Why the circuit of W's own neurons cannot honour the options (then
    the assembler adds interneurons as for any W, and says why), or None.

    >>> W = np.array([[0.0, -1.0, 0.0], [1.0, 0.0, 0.0], [0.0, 0.0, 0.0]])
    >>> why = why_not_own(W, np.array([False, True, False]),
    ...                   EIRatio.parse("1:1"), "auto")
    >>> why[:34], why[-39:]
    ('the ratio 1:1 asks 2 interneurons ', 'have only 1 targets to share among them')
    """
    n_e, n_own = int((~inhibitory).sum()), int(inhibitory.sum())
    if untuned_share != "auto":
        return ("an untuned share was given, and the split itself classifies "
                "W's own inhibitory neurons")
    if ratio is None:
        return None
    try:
        asked = inhibitory_count(n_e, ratio)
    except InputError as exc:           # none, or more than the E units
        return f"{exc} (W's own excitatory neurons)"
    if asked < n_own:
        return (f"the ratio {ratio.text} asks {asked} interneurons, fewer than "
                f"W's own {n_own}, which cannot become excitatory (W's own "
                f"ratio, {own_ratio(n_e, n_own).text}, keeps them)")
    capacity = int(np.count_nonzero(W[:, inhibitory]))
    if asked > capacity:
        return (f"the ratio {ratio.text} asks {asked} interneurons and W's "
                f"{n_own} inhibitory neurons have only {capacity} targets to "
                "share among them")
    return None


def _copies(W, inhibitory_units, n_extra):
    """{W unit: number of copies} after ``n_extra`` divisions: one more
    copy at a time for the inhibitory neuron with the most targets per copy
    among those with fewer copies than targets, a neuron W gives input to
    before one it gives none (whose copies would all be silent), ties to
    the lower W index (:func:`why_not_own` has checked that there are
    targets enough)."""
    targets = {int(j): int(np.count_nonzero(W[:, j])) for j in inhibitory_units}
    driven = {j: bool(W[j].any()) for j in targets}
    copies = dict.fromkeys(targets, 1)
    for _ in range(n_extra):
        j = max((u for u in targets if copies[u] < targets[u]),
                key=lambda u: (driven[u], targets[u] / copies[u], -u))
        copies[j] += 1
    return copies


def _owners(W, units, copies):
    """(unit order, owner): the circuit's units as W units (each copy once)
    and, for every W unit j, the circuit unit that sends each of j's
    targets (an array over W's rows)."""
    order, owner = [], {}
    for j in units:
        k = copies.get(j, 1)
        first = len(order)
        order.extend([j] * k)
        rows = np.flatnonzero(W[:, j])
        who = np.full(W.shape[0], first)
        for c, run in enumerate(np.array_split(rows, k)):
            who[run] = first + c
        owner[j] = who
    return order, owner


def own_circuit(W, L, S, inhibitory, ratio, zero):
    """The blocks, w_index, counts, ratio text and notes of the circuit of
    W's own neurons. ``ratio`` is None (W's own) or an EIRatio that
    :func:`why_not_own` accepts; entries of W within ``zero`` of 0 are taken
    as 0 (a W = L + S of a solver)."""
    W = np.where(np.abs(W) > zero, W, 0.0)
    n = W.shape[0]
    inh = np.flatnonzero(inhibitory)
    exc = np.flatnonzero(~inhibitory)
    n_own, n_e = inh.size, exc.size
    asked = n_own if ratio is None else inhibitory_count(n_e, ratio)
    untuned = classify(L, S, inhibitory)
    copies = _copies(W, inh, asked - n_own)
    order, owner = _owners(W, np.r_[exc, inh[untuned], inh[~untuned]], copies)
    index = np.asarray(order)
    # M[c', c] = W[w(c'), w(c)] when c sends w(c)'s synapse onto w(c')
    M = W[np.ix_(index, index)]
    sender = np.stack([owner[int(j)][index] for j in index], axis=1)
    M[sender != np.arange(index.size)[None, :]] = 0.0
    n_u = sum(copies.get(int(j), 1) for j in inh[untuned])
    sl = {"E": slice(0, n_e), "U": slice(n_e, n_e + n_u),
          "T": slice(n_e + n_u, index.size)}
    blocks = {}
    for name in BLOCK_NAMES + II_BLOCK_NAMES:
        post, pre = name[2], name[3]
        block = M[sl[post], sl[pre]]
        blocks[name] = block.copy() if pre == "E" else -block
    for block in blocks.values():
        np.maximum(block, 0.0, out=block)   # 0 where -0.0 came from a sign flip
    notes = [f"{dale_head(n, n_own)} They are the circuit's "
             f"interneurons ({int(untuned.sum())} untuned, "
             f"{int((~untuned).sum())} tuned by the split), with the "
             f"{int(np.count_nonzero(W[np.ix_(inh, inh)]))} inhibitory-to-"
             "inhibitory synapses W has; the circuit's full matrix is W"]
    undriven = int((~W[inh].any(axis=1)).sum())
    if undriven:
        notes.append(f"{undriven} of W's inhibitory neurons receive no synapse "
                     "in W: only an outside drive moves them, and they count "
                     "as silent")
    divided = {j: k for j, k in copies.items() if k > 1}
    if divided:
        notes.append(
            f"the ratio {ratio.text} asks {asked} interneurons and W has "
            f"{n_own}: {len(divided)} of W's inhibitory neurons (those with "
            f"the most targets) were divided into {asked - n_own + len(divided)}"
            " interneurons that take the same inputs and share the neuron's "
            "targets, so W is still reproduced exactly; the divided copies are "
            "a construction, not neurons W has")
    text = own_ratio(n_e, n_own).text if ratio is None else ratio.text
    return blocks, tuple(int(i) for i in index), n_u, text, tuple(notes)


def own_report(W, reconstruction, J_EE, W_EE, notes, zero):
    """The AssemblyReport of a circuit of W's own neurons: its error against
    W, and the excitation audit of J_EE against W's E-to-E block."""
    from ._assemble import excitation_audit

    err = float(np.linalg.norm(W - reconstruction)
                / max(np.linalg.norm(W), 1e-300))
    autapses, cancelling = excitation_audit(W_EE, J_EE, zero)
    return AssemblyReport(
        relative_error=err,
        ee_density=float(np.count_nonzero(J_EE) / max(J_EE.size, 1)),
        share_rule=OWN_RULE, notes=notes, ee_support="positive",
        autapses=autapses, cancelling_share=cancelling,
        comparison=(f"this circuit is W itself: W already obeys Dale's law and "
                    f"its own inhibitory neurons are the interneurons "
                    f"(relative error {err:.3g}); no baseline is needed"))
