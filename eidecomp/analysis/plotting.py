"""Figures, one function each: it draws on the ``ax`` it is given and returns
it. The only module of eidecomp that imports matplotlib; callers choose the
backend (the report uses Agg, so no display is needed).
"""

import numpy as np

__all__ = ["plot_error_density", "plot_lambda_path", "plot_matrix",
           "plot_population_graph", "plot_rule", "plot_spectrum",
           "plot_tuning"]

_EXC, _INH, _NEUTRAL = "#b8433a", "#2d6a9f", "#555555"


def plot_matrix(ax, M, title="", cmap="RdBu_r"):
    """Heatmap of a [post, pre] matrix, diverging colours centred on zero."""
    M = np.asarray(M, dtype=float)
    lim = float(np.abs(M).max()) if M.size else 1.0
    lim = lim or 1.0
    im = ax.imshow(M, cmap=cmap, vmin=-lim, vmax=lim, interpolation="nearest")
    ax.set_title(title)
    ax.set_xlabel("pre (source)")
    ax.set_ylabel("post (target)")
    ax.figure.colorbar(im, ax=ax, shrink=0.8)
    return ax


def plot_spectrum(ax, singular_values, rank=None):
    """Singular values on a log scale, with the kept rank marked."""
    s = np.asarray(singular_values, dtype=float)
    s = s[s > 0]
    ax.semilogy(np.arange(1, len(s) + 1), s, ".-", color=_NEUTRAL)
    if rank:
        ax.axvline(rank + 0.5, color=_EXC, ls="--", label=f"rank {rank}")
        ax.legend()
    ax.set_xlabel("index")
    ax.set_ylabel("singular value")
    ax.set_title("spectrum")
    return ax


def plot_lambda_path(ax, points):
    """Rank and sparsity of the split against lam (a lambda_path result)."""
    lam = [p.lam for p in points]
    ax.plot(lam, [p.rank for p in points], "o-", color=_INH, label="rank of L")
    ax.set_xscale("log")
    ax.set_xlabel("lam")
    ax.set_ylabel("rank of L", color=_INH)
    ax2 = ax.twinx()
    ax2.plot(lam, [100 * p.sparsity for p in points], "s--", color=_EXC)
    ax2.set_ylabel("nonzeros in S (%)", color=_EXC)
    ax.set_title("lam path")
    return ax


def plot_error_density(ax, circuit_row, baselines):
    """Relative error against J_EE density: the circuit and its baselines."""
    for b in baselines:
        ax.scatter(b["ee_density"], b["relative_error"], color=_NEUTRAL,
                   marker="s")
        ax.annotate(b["name"], (b["ee_density"], b["relative_error"]),
                    textcoords="offset points", xytext=(4, 4), fontsize=8)
    ax.scatter(circuit_row["ee_density"], circuit_row["relative_error"],
               color=_EXC, marker="*", s=160, label="this circuit", zorder=3)
    ax.set_xlabel("J_EE density")
    ax.set_ylabel("||W - W_eff|| / ||W||")
    ax.set_title("error against excitatory density")
    ax.legend()
    return ax


def plot_population_graph(ax, P):
    """The population graph: node area ~ size, edge width ~ probability."""
    import networkx as nx

    from ..types import EXCITATORY, POPULATION_NAMES, TUNED, UNTUNED

    pos = {POPULATION_NAMES[EXCITATORY]: (0.0, 0.0),
           POPULATION_NAMES[UNTUNED]: (-1.0, -1.0),
           POPULATION_NAMES[TUNED]: (1.0, -1.0)}
    pos = {n: pos.get(n, (0.0, 1.0)) for n in P.nodes}
    sizes = [300 + 1500 * np.sqrt(P.nodes[n]["size"] / max(
        max(P.nodes[m]["size"] for m in P.nodes), 1)) for n in P.nodes]
    colors = [_EXC if P.nodes[n]["kind"] == EXCITATORY else _INH for n in P.nodes]
    nx.draw_networkx_nodes(P, pos, ax=ax, node_size=sizes, node_color=colors)
    labels = {n: f"{n}\n{P.nodes[n]['size']}" for n in P.nodes}
    nx.draw_networkx_labels(P, pos, labels, ax=ax, font_size=8,
                            font_color="white")
    for u, v, d in P.edges(data=True):
        nx.draw_networkx_edges(
            P, pos, edgelist=[(u, v)], ax=ax, width=1 + 8 * d["probability"],
            edge_color=_EXC if d["synapse"] == "excitatory" else _INH,
            connectionstyle="arc3,rad=0.15", arrows=True, node_size=sizes)
    ax.set_title("populations (edge width ~ connection probability)")
    ax.axis("off")
    return ax


def plot_rule(ax, profile, fit=None, title=""):
    """Connection probability against a binned difference, with a fit."""
    centers = 0.5 * (np.asarray(profile["edges"][1:]) +
                     np.asarray(profile["edges"][:-1]))
    p = np.array([np.nan if v is None else v for v in profile["probability"]])
    ax.plot(centers, p, "o", color=_NEUTRAL, label="binned")
    if fit and fit.get("sigma") and fit.get("p0"):
        d = np.linspace(0, profile["edges"][-1], 200)
        ax.plot(d, fit["p0"] * np.exp(-d ** 2 / (2 * fit["sigma"] ** 2)),
                color=_EXC, label=f"Gaussian, sigma {fit['sigma']:.3g}")
        ax.legend()
    ax.set_xlabel(profile.get("quantity", ""))
    ax.set_ylabel("connection probability")
    ax.set_title(title)
    return ax


def plot_tuning(ax, cv_untuned, cv_tuned):
    """Circular variance of input pools, untuned and tuned side by side."""
    bins = np.linspace(0, 1, 21)
    data = [np.asarray([c for c in cv if c is not None], float)
            for cv in (cv_untuned, cv_tuned)]
    ax.hist(data, bins=bins, color=[_NEUTRAL, _INH],
            label=[f"untuned ({len(data[0])})", f"tuned ({len(data[1])})"])
    ax.set_xlabel("circular variance of the input pool")
    ax.set_ylabel("interneurons")
    ax.set_title("interneuron tuning")
    ax.legend()
    return ax
