"""Figures, one function each: it draws on the ``ax`` it is given and returns
it. The only module of eidecomp that imports matplotlib; callers choose the
backend (the report uses Agg, so no display is needed).
"""

import numpy as np

__all__ = ["plot_error_density", "plot_lambda_path", "plot_matrix",
           "plot_population_graph", "plot_profile", "plot_spectrum",
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
    from matplotlib.ticker import NullLocator

    s = np.asarray(singular_values, dtype=float)
    s = s[s > 0]
    ax.semilogy(np.arange(1, len(s) + 1), s, ".-", color=_NEUTRAL)
    if len(s) and s.max() / s.min() > 1e6:
        ax.yaxis.set_minor_locator(NullLocator())  # 8 ticks a decade: clutter
    if rank:
        ax.axvline(rank + 0.5, color=_EXC, ls="--", label=f"rank {rank}")
        ax.legend()
    ax.set_xlabel("index")
    ax.set_ylabel("singular value")
    ax.set_title("spectrum")
    return ax


def plot_lambda_path(ax, points, lam=None):
    """Rank and sparsity of the split against lam (a lambda_path result).

    Points whose solve stopped before converging are drawn hollow; ``lam``
    (the circuit's own) is marked by a vertical line. The lam axis is
    logarithmic with plain labels at 1, 2 and 5 times powers of ten, so
    labels do not run into each other over a range of a decade or two.

    >>> from matplotlib.figure import Figure
    >>> from eidecomp.types import PathPoint
    >>> pts = [PathPoint(lam=x, rank=r, sparsity=s, nuclear_norm=1.0,
    ...                  l1_norm=1.0, primal_residual=0.0, objective=1.0,
    ...                  n_iter=10, converged=True)
    ...        for x, r, s in [(0.02, 3, 0.2), (0.05, 3, 0.1), (0.2, 40, 0.01)]]
    >>> ax = plot_lambda_path(Figure().subplots(), pts, lam=0.05)
    >>> ax.figure.draw_without_rendering()
    >>> labels = [t.get_text() for t in ax.get_xticklabels()]
    >>> {"0.02", "0.05", "0.1", "0.2"} <= set(labels), "$" in "".join(labels)
    (True, False)
    """
    from matplotlib.lines import Line2D
    from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

    lam_v = np.array([p.lam for p in points], float)
    rank = np.array([p.rank for p in points], float)
    nnz = np.array([100 * p.sparsity for p in points], float)
    done = np.array([bool(getattr(p, "converged", True)) for p in points])
    ax.plot(lam_v, rank, "-", color=_INH)
    ax2 = ax.twinx()
    ax2.plot(lam_v, nnz, "--", color=_EXC)
    for a, y, marker, color in ((ax, rank, "o", _INH), (ax2, nnz, "s", _EXC)):
        a.plot(lam_v[done], y[done], marker, color=color, ls="none")
        a.plot(lam_v[~done], y[~done], marker, color=color, ls="none",
               markerfacecolor="white")
    ax.set_xscale("log")
    ax.xaxis.set_major_locator(LogLocator(base=10, subs=(1.0, 2.0, 5.0)))
    ax.xaxis.set_major_formatter(FuncFormatter(lambda x, _: f"{x:g}"))
    ax.xaxis.set_minor_formatter(NullFormatter())
    handles = [Line2D([], [], color=_INH, marker="o", label="rank of L"),
               Line2D([], [], color=_EXC, marker="s", ls="--",
                      label="nonzeros in S (%)")]
    if lam is not None:
        ax.axvline(lam, color=_NEUTRAL, ls=":")
        handles.append(Line2D([], [], color=_NEUTRAL, ls=":",
                              label=f"this split, lam {lam:.3g}"))
    if not done.all():
        handles.append(Line2D([], [], color=_NEUTRAL, marker="o", ls="none",
                              markerfacecolor="white",
                              label="stopped before converging"))
    ax.legend(handles=handles, loc="upper center", bbox_to_anchor=(0.5, -0.16),
              ncol=2, fontsize=8, frameon=False)
    ax.set_xlabel("lam")
    ax.set_ylabel("rank of L", color=_INH)
    ax2.set_ylabel("nonzeros in S (%)", color=_EXC)
    ax.set_title("lam path")
    return ax


_MARKERS = "sDv^<>ph8"


def plot_error_density(ax, circuit_row, baselines):
    """Relative error against J_EE density: the circuit and its baselines.

    Every construction has its own marker and a legend entry (outside the
    axes, on the right), so constructions at the same point stay readable.

    >>> from matplotlib.figure import Figure
    >>> ax = plot_error_density(Figure().subplots(),
    ...                         {"ee_density": 0.1, "relative_error": 0.01},
    ...                         [{"name": "drop", "ee_density": 0.1,
    ...                           "relative_error": 0.6}])
    >>> [t.get_text() for t in ax.get_legend().get_texts()]
    ['this circuit', 'drop']
    """
    import matplotlib as mpl

    colors = mpl.colormaps["tab10"].colors
    ax.scatter(circuit_row["ee_density"], circuit_row["relative_error"],
               color=_EXC, marker="*", s=200, label="this circuit", zorder=2)
    for k, b in enumerate(baselines):
        ax.scatter(b["ee_density"], b["relative_error"], s=40,
                   marker=_MARKERS[k % len(_MARKERS)], facecolors="none",
                   edgecolors=[colors[(k + 1) % len(colors)]], linewidths=1.5,
                   label=b["name"], zorder=3)  # hollow, over the star
    ax.set_xlabel("J_EE density")
    ax.set_ylabel("||W - W_eff|| / ||W||")
    ax.set_title("error against excitatory density")
    ax.legend(loc="upper left", bbox_to_anchor=(1.02, 1.0), fontsize=8,
              borderaxespad=0.0)
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
    # labels below their nodes, in dark text: a small node cannot hold its name
    below = {n: (x + 0.5, y + 0.15) if P.nodes[n]["kind"] == EXCITATORY
             else (x, y - 0.32) for n, (x, y) in pos.items()}
    labels = {n: f"{n} ({P.nodes[n]['size']})" for n in P.nodes}
    nx.draw_networkx_labels(P, below, labels, ax=ax, font_size=9,
                            font_color="#222222")
    for u, v, d in P.edges(data=True):
        nx.draw_networkx_edges(
            P, pos, edgelist=[(u, v)], ax=ax, width=1 + 8 * d["probability"],
            edge_color=_EXC if d["synapse"] == "excitatory" else _INH,
            connectionstyle="arc3,rad=0.15", arrows=True, node_size=sizes)
    ax.set_title("populations (edge width ~ connection probability)")
    ax.margins(0.25)  # room for the node labels at the corners
    ax.axis("off")
    return ax


def plot_profile(ax, profile, fit=None, title=""):
    """Connection probability against a binned difference, with a fit.

    A Gaussian fit (a ``SpaceConstant`` dict) is drawn solid with its sigma
    when its status is "determined", dashed and labelled otherwise.
    """
    centers = 0.5 * (np.asarray(profile["edges"][1:]) +
                     np.asarray(profile["edges"][:-1]))
    p = np.array([np.nan if v is None else v for v in profile["probability"]])
    ax.plot(centers, p, "o", color=_NEUTRAL, label="binned")
    if fit and fit.get("sigma") and fit.get("p0"):
        status = fit.get("status", "determined")
        d = np.linspace(0, profile["edges"][-1], 200)
        label = {"determined": f"Gaussian, sigma {fit['sigma']:.3g}",
                 "no decay": "Gaussian fit: no decay"}.get(
                     status, f"Gaussian fit: sigma {status}")
        ax.plot(d, fit["p0"] * np.exp(-d ** 2 / (2 * fit["sigma"] ** 2)),
                color=_EXC, ls="-" if status == "determined" else "--",
                label=label)
        ax.legend(fontsize=8)
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
