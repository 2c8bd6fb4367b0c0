"""Figures, one function each: it draws on the ``ax`` it is given and returns
it. The only module of eidecomp that imports matplotlib; callers choose the
backend (the report uses Agg, so no display is needed).

Colours: red and blue mean excitatory and inhibitory and nothing else
(:data:`POPULATION_COLORS`, the red-blue weight maps: positive red, negative
blue); every other series takes a colour of :data:`SERIES_COLORS`, which
holds neither.
"""

import numpy as np

from ..types import EXCITATORY, TUNED, UNTUNED
from .profiles import LACK_OF_FIT_TEXT, extrapolated_text

__all__ = ["POPULATION_COLORS", "SERIES_COLORS", "plot_error_density",
           "plot_lambda_path", "plot_matrix", "plot_population_graph",
           "plot_profile", "plot_spectrum", "plot_tuning"]

POPULATION_COLORS = {EXCITATORY: "#b8433a",   # red
                     UNTUNED: "#1f4e86",      # dark blue
                     TUNED: "#6c9fd6"}        # light blue
"""The colour of each population: red excitatory, blues inhibitory."""

SERIES_COLORS = ("#222222", "#2e8b57", "#8e44ad", "#e08a1e", "#8b5a2b",
                 "#8a8a8a", "#b5a000", "#d17fc0")
"""Colours of every other series (near-black, green, purple, orange, brown,
grey, mustard, orchid): no red and no blue."""

_EXC = POPULATION_COLORS[EXCITATORY]
_DATA, _FIT, _MARK = SERIES_COLORS[0], SERIES_COLORS[1], SERIES_COLORS[3]


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
    ax.semilogy(np.arange(1, len(s) + 1), s, ".-", color=_DATA)
    if len(s) and s.max() / s.min() > 1e6:
        ax.yaxis.set_minor_locator(NullLocator())  # 8 ticks a decade: clutter
    if rank:
        ax.axvline(rank + 0.5, color=_MARK, ls="--", label=f"rank {rank}")
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
    c_rank, c_nnz = SERIES_COLORS[0], SERIES_COLORS[2]
    ax.plot(lam_v, rank, "-", color=c_rank)
    ax2 = ax.twinx()
    ax2.plot(lam_v, nnz, "--", color=c_nnz)
    for a, y, marker, color in ((ax, rank, "o", c_rank), (ax2, nnz, "s", c_nnz)):
        a.plot(lam_v[done], y[done], marker, color=color, ls="none")
        a.plot(lam_v[~done], y[~done], marker, color=color, ls="none",
               markerfacecolor="white")
    ax.set_xscale("log")
    ax.xaxis.set_major_locator(LogLocator(base=10, subs=(1.0, 2.0, 5.0)))
    ax.xaxis.set_major_formatter(FuncFormatter(lambda x, _: f"{x:g}"))
    ax.xaxis.set_minor_formatter(NullFormatter())
    handles = [Line2D([], [], color=c_rank, marker="o", label="rank of L"),
               Line2D([], [], color=c_nnz, marker="s", ls="--",
                      label="nonzeros in S (%)")]
    if lam is not None:
        ax.axvline(lam, color=SERIES_COLORS[5], ls=":")
        handles.append(Line2D([], [], color=SERIES_COLORS[5], ls=":",
                              label=f"this split, lam {lam:.3g}"))
    if not done.all():
        handles.append(Line2D([], [], color=SERIES_COLORS[5], marker="o", ls="none",
                              markerfacecolor="white",
                              label="stopped before converging"))
    ax.legend(handles=handles, loc="upper center", bbox_to_anchor=(0.5, -0.16),
              ncol=2, fontsize=8, frameon=False)
    ax.set_xlabel("lam")
    ax.set_ylabel("rank of L", color=c_rank)
    ax2.set_ylabel("nonzeros in S (%)", color=c_nnz)
    ax.set_title("lam path")
    return ax


_MARKERS = "sDv^<>ph8"
_SPREAD_PT = 9.0  # sideways step between coincident markers, in points
_COINCIDE = 0.02  # points closer than this share of each axis range coincide


def _coincident_groups(x, y):
    """Groups (lists of indices) of points within :data:`_COINCIDE` of each
    axis's range of one another, in the order of their first member."""
    x, y = np.asarray(x, float), np.asarray(y, float)
    xr = float(np.ptp(x)) or 1.0
    yr = float(np.ptp(y)) or 1.0
    groups = []
    for i in range(len(x)):
        for g in groups:
            j = g[0]
            if abs(x[i] - x[j]) <= _COINCIDE * xr and \
                    abs(y[i] - y[j]) <= _COINCIDE * yr:
                g.append(i)
                break
        else:
            groups.append([i])
    return groups


def plot_error_density(ax, circuit_row, baselines):
    """Relative error against J_EE density: the circuit and its baselines.

    Every construction has its own marker, colour and a legend entry
    (outside the axes, on the right). Constructions at the same point (within
    2 % of each axis's range) are spread sideways by :data:`_SPREAD_PT`
    points about it, so each marker stays visible; the legend's title says so.

    >>> from matplotlib.figure import Figure
    >>> ax = plot_error_density(Figure().subplots(),
    ...                         {"ee_density": 0.1, "relative_error": 0.01},
    ...                         [{"name": "drop", "ee_density": 0.1,
    ...                           "relative_error": 0.6}])
    >>> [t.get_text() for t in ax.get_legend().get_texts()]
    ['this circuit', 'drop']
    """
    from matplotlib.transforms import offset_copy

    rows = [circuit_row, *baselines]
    x = [r["ee_density"] for r in rows]
    y = [r["relative_error"] for r in rows]
    shift = np.zeros(len(rows))
    for g in _coincident_groups(x, y):
        shift[g] = (np.arange(len(g)) - (len(g) - 1) / 2) * _SPREAD_PT
    spread = bool(np.any(shift))
    for k, r in enumerate(rows):
        if k == 0:
            drawn = ax.scatter(x[k], y[k], color=SERIES_COLORS[0], marker="*",
                               s=160, label="this circuit", zorder=2)
        else:  # hollow, over the star
            color = SERIES_COLORS[k % len(SERIES_COLORS)]  # k 8: hollow black
            drawn = ax.scatter(x[k], y[k], s=40, facecolors="none",
                               marker=_MARKERS[(k - 1) % len(_MARKERS)],
                               edgecolors=[color], linewidths=1.5,
                               label=r["name"], zorder=3)
        # moved after it is drawn, so the axes' limits stay the data's own
        drawn.set_offset_transform(offset_copy(
            ax.transData, fig=ax.figure, x=shift[k], y=0.0, units="points"))
    ax.set_xlabel("J_EE density")
    ax.set_ylabel("||W - W_eff|| / ||W||")
    ax.set_title("error against excitatory density")
    ax.legend(loc="upper left", bbox_to_anchor=(1.02, 1.0), fontsize=8,
              borderaxespad=0.0,
              title="at one point: spread\nsideways" if spread else None,
              title_fontsize=8)
    return ax


def plot_population_graph(ax, P):
    """The population graph: node area ~ size, edge width ~ probability.

    Each edge is labelled with its connection probability p and its number
    of connections n (``population_graph``'s ``probability`` and ``count``).
    """
    import networkx as nx

    from ..types import POPULATION_NAMES

    pos = {POPULATION_NAMES[EXCITATORY]: (0.0, 0.0),
           POPULATION_NAMES[UNTUNED]: (-1.0, -1.0),
           POPULATION_NAMES[TUNED]: (1.0, -1.0)}
    pos = {n: pos.get(n, (0.0, 1.0)) for n in P.nodes}
    sizes = [300 + 1500 * np.sqrt(P.nodes[n]["size"] / max(
        max(P.nodes[m]["size"] for m in P.nodes), 1)) for n in P.nodes]
    colors = [POPULATION_COLORS[P.nodes[n]["kind"]] for n in P.nodes]
    nx.draw_networkx_nodes(P, pos, ax=ax, node_size=sizes, node_color=colors)
    # labels below their nodes, in dark text: a small node cannot hold its name
    below = {n: (x + 0.5, y + 0.15) if P.nodes[n]["kind"] == EXCITATORY
             else (x, y - 0.32) for n, (x, y) in pos.items()}
    labels = {n: f"{n} ({P.nodes[n]['size']})" for n in P.nodes}
    nx.draw_networkx_labels(P, below, labels, ax=ax, font_size=9,
                            font_color="#222222")
    style = "arc3,rad=0.15"
    for u, v, d in P.edges(data=True):
        nx.draw_networkx_edges(
            P, pos, edgelist=[(u, v)], ax=ax, width=1 + 8 * d["probability"],
            edge_color=POPULATION_COLORS[P.nodes[u]["kind"]],
            connectionstyle=style, arrows=True, node_size=sizes)
    edge_text = {(u, v): f"p {d['probability']:.2g}, n {d['count']}"
                 for u, v, d in P.edges(data=True)}
    for u in [u for u, v in edge_text if u == v]:  # beside its loop, not on it
        x, y = pos[u]
        ax.text(x - 0.38, y + 0.3, edge_text.pop((u, u)), fontsize=7,
                ha="right", va="center", color="#222222")
    nx.draw_networkx_edge_labels(
        P, pos, edge_labels=edge_text, ax=ax, font_size=7, rotate=False,
        connectionstyle=style, node_size=sizes, font_color="#222222",
        bbox={"boxstyle": "round,pad=0.15", "fc": "white", "ec": "none",
              "alpha": 0.85})
    ax.set_title("populations: p connection probability (edge width), "
                 "n connections", fontsize=9)
    ax.margins(0.25)  # room for the node labels at the corners
    ax.axis("off")
    return ax


def plot_profile(ax, profile, fit=None, title=""):
    """Connection probability against a binned difference, with a fit.

    Each bin's probability stands at the mean difference of its pairs
    (``positions``, else the bin's centre) and carries its 95 %
    Clopper-Pearson interval (the
    profile's ``ci_low`` and ``ci_high``, where given); the probability axis
    starts at 0. A Gaussian fit (a ``SpaceConstant`` dict) is drawn solid
    with its sigma when its status is "determined", dashed and labelled
    otherwise; a sigma beyond the largest binned distance is labelled
    "extrapolated", and a fit the bins reject (``lack_of_fit``) is drawn
    dotted and says so.
    """
    centers = (_floats(profile["positions"]) if "positions" in profile else
               0.5 * (np.asarray(profile["edges"][1:]) +
                      np.asarray(profile["edges"][:-1])))
    p = _floats(profile["probability"])
    if "ci_low" in profile and "ci_high" in profile:
        err = np.vstack([p - _floats(profile["ci_low"]),
                         _floats(profile["ci_high"]) - p])
        ax.errorbar(centers, p, yerr=err, fmt="o", color=_DATA, ms=4,
                    elinewidth=1, capsize=2, label="binned, 95 % CI")
    else:
        ax.plot(centers, p, "o", color=_DATA, label="binned")
    if fit and fit.get("sigma") and fit.get("p0"):
        status = fit.get("status", "determined")
        top = profile["edges"][-1]
        d = np.linspace(0, top, 200)
        label = {"determined": f"Gaussian, sigma {fit['sigma']:.3g}",
                 "no decay": "Gaussian fit: no decay"}.get(
                     status, f"Gaussian fit: sigma {status}")
        if status == "determined" and fit.get("extrapolated"):
            label += f"\n{extrapolated_text(top)}"
        if fit.get("lack_of_fit"):
            label += f"\n{LACK_OF_FIT_TEXT}"
        style = (":" if fit.get("lack_of_fit") else
                 "-" if status == "determined" else "--")
        ax.plot(d, fit["p0"] * np.exp(-d ** 2 / (2 * fit["sigma"] ** 2)),
                color=_FIT, ls=style, label=label)
    if fit or "ci_low" in profile:
        ax.legend(fontsize=8)
    shown = np.concatenate([p, _floats(profile.get("ci_high", [])),
                            [fit["p0"]] if fit and fit.get("p0") else []])
    high = float(np.nanmax(shown)) if np.isfinite(shown).any() else 1.0
    ax.set_ylim(0.0, min(1.0, high) * 1.08 if high > 0 else 1.0)
    ax.set_xlabel(profile.get("quantity", ""))
    ax.set_ylabel("connection probability")
    ax.set_title(title)
    return ax


def _floats(values):
    return np.array([np.nan if v is None else v for v in values], dtype=float)


def plot_tuning(ax, cv_untuned, cv_tuned):
    """Circular variance of input pools, untuned and tuned side by side."""
    bins = np.linspace(0, 1, 21)
    data = [np.asarray([c for c in cv if c is not None], float)
            for cv in (cv_untuned, cv_tuned)]
    ax.hist(data, bins=bins, color=[POPULATION_COLORS[UNTUNED],
                                    POPULATION_COLORS[TUNED]],
            label=[f"untuned ({len(data[0])})", f"tuned ({len(data[1])})"])
    ax.set_xlabel("circular variance of the input pool")
    ax.set_ylabel("interneurons")
    ax.set_title("interneuron tuning")
    ax.legend()
    return ax
