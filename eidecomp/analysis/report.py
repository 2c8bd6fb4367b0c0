"""One self-contained HTML report of a circuit bundle (figures embedded).

``render_report(circuit, meta, W, ...)`` takes what the pipeline loaded from
a bundle, computes the connection rules and tuning, draws the figures with
analysis.plotting on matplotlib Figure objects (the Agg renderer, no
display) and returns the page as a string: inputs, parameters, the assembly
against the baselines, connection rules, tuning, stability, and the caution
that the circuit is a hypothesis to test, not a measurement.
"""

import base64
import html
import io
import json
import warnings

import numpy as np

from ..errors import ConvergenceWarning
from ..types import TUNED, UNTUNED
from . import plotting
from .rules import circuit_rules
from .tuning import interneuron_pools

__all__ = ["PATH_MAX_UNITS", "REPORT_TITLE", "render_report", "report_lam_path"]

REPORT_TITLE = "eidecomp circuit report"  # also how --force tells a report
PATH_MAX_UNITS = 600  # the lam path re-solves robust PCA 8 times


def report_lam_path(W):
    """The lam path drawn in the report (8 lams), or None above
    :data:`PATH_MAX_UNITS` units.

    A figure, not a result: a looser tolerance and an iteration cap; rank
    and sparsity are settled long before either stops, so a solve stopped
    at the cap is not reported as a warning.
    """
    from ..decompose import lambda_path

    if np.shape(W)[0] > PATH_MAX_UNITS:
        return None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        points, _ = lambda_path(W, n_lams=8, tol=1e-6, max_iter=1000)
    return points

CAUTION = ("This circuit is a model hypothesis: one of many Dale's-law circuits "
           "consistent with the matrix it was built from. Its connection rules "
           "and interneuron types are predictions to test against anatomy and "
           "physiology, not measurements.")

_CSS = """body{font-family:sans-serif;max-width:1100px;margin:2em auto;color:#222}
table{border-collapse:collapse;margin:1em 0}td,th{border:1px solid #bbb;
padding:3px 8px;text-align:right}th{background:#eee}td:first-child{text-align:left}
.caution{border-left:4px solid #b8433a;padding:.5em 1em;background:#fbf3f2}
figure{display:inline-block;margin:.5em}img{max-width:520px}"""

_ONLOAD = """<script>window.addEventListener('load',function(){var i=document.
querySelectorAll('img.figure'),n=0;i.forEach(function(e){if(e.naturalWidth>0)n++});
document.body.setAttribute('data-figures-rendered',n+'/'+i.length)})</script>"""


def _png(draw, figsize=(5.2, 4.0)):
    from matplotlib.figure import Figure

    fig = Figure(figsize=figsize, layout="constrained")
    ax = fig.subplots()
    draw(ax)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=90)
    return base64.b64encode(buf.getvalue()).decode("ascii")


def _table(header, rows):
    head = "".join(f"<th>{html.escape(str(h))}</th>" for h in header)
    body = "".join("<tr>" + "".join(f"<td>{html.escape(str(c))}</td>" for c in r)
                   + "</tr>" for r in rows)
    return f"<table><tr>{head}</tr>{body}</table>"


def _fmt(x, spec=".4g"):
    return "-" if x is None else format(x, spec)


def _ratio_text(text):
    """The one shown form of the stored E:I ratio (eidecomp.params.EIRatio)."""
    from ..params import EIRatio

    try:
        return str(EIRatio.parse(text))
    except ValueError:  # InputError: a hand-edited value, shown as it is
        return str(text)


def _figures(circuit, meta, W, L, path_points, rules, cv):
    """(title, base64 PNG) of every figure of the report."""
    from ..graph import population_graph

    W_eff = circuit.effective_weights()
    figs = []

    def fig(title, draw, **kw):
        figs.append((title, _png(draw, **kw)))

    for name, M in (("W", W), ("W_eff", W_eff), ("residual W - W_eff", W - W_eff)):
        fig(f"matrix {name}", lambda ax, M=M, name=name:
            plotting.plot_matrix(ax, M, name))
    if L is not None:
        S = W - L
        fig("low-rank part L", lambda ax: plotting.plot_matrix(ax, L, "L"))
        fig("sparse part S", lambda ax: plotting.plot_matrix(ax, S, "S"))
        sv = np.linalg.svd(L, compute_uv=False)
        fig("spectrum of L", lambda ax: plotting.plot_spectrum(
            ax, sv, meta.get("decomposition", {}).get("rank")))
    if path_points:
        fig("lam path", lambda ax: plotting.plot_lambda_path(ax, path_points))
    fig("error against J_EE density", lambda ax: plotting.plot_error_density(
        ax, meta.get("metrics", {}), meta.get("baselines", [])))
    P = population_graph(circuit)
    fig("population graph", lambda ax: plotting.plot_population_graph(ax, P))
    for cls, row in rules.items():
        if "feature_profile" in row:
            fig(f"{cls}: feature", lambda ax, r=row, c=cls: plotting.plot_rule(
                ax, r["feature_profile"], title=f"{c}: by feature difference"))
        if "distance_profile" in row:
            fig(f"{cls}: distance", lambda ax, r=row, c=cls: plotting.plot_rule(
                ax, r["distance_profile"], r.get("space_constant"),
                title=f"{c}: by distance"))
    if cv is not None:
        fig("interneuron tuning", lambda ax: plotting.plot_tuning(
            ax, cv[UNTUNED], cv[TUNED]))
    return figs


def _sigma_text(row):
    sc = row.get("space_constant") or {}
    top = (row.get("distance_profile") or {}).get("edges", [0])[-1]
    if sc.get("sigma") is None:
        return "-"
    if sc["sigma"] > 10 * top:
        return "no decay"
    return (f"{sc['sigma']:.3g} [{_fmt(sc.get('ci_low'), '.3g')}, "
            f"{_fmt(sc.get('ci_high'), '.3g')}]")


def _stability_text(st):
    if st.get("circuit_spectral_abscissa_equal_taus") is None:
        limit = "not computed"
    elif st.get("max_stable_tau_ratio") is None:
        limit = "beyond 100"
    else:
        limit = _fmt(st.get("max_stable_tau_ratio"), ".3g")
    return (f"spectral abscissa of -I + W: "
            f"{_fmt(st.get('original_spectral_abscissa'), '.3g')}; largest "
            f"stable tau_I/tau_E: {limit}")


def _sections(meta, rules, med, have_units):
    """The page up to its figures: inputs, assembly, rules, tuning, stability."""
    met = meta.get("metrics", {})
    c = meta.get("counts", {})
    assembly = [["this circuit", c.get(UNTUNED, 0) + c.get(TUNED, 0),
                 _fmt(met.get("relative_error")), _fmt(met.get("ee_density"))]]
    assembly += [[b["name"], b["n_inhibitory"], _fmt(b["relative_error"]),
                  _fmt(b["ee_density"])] for b in meta.get("baselines", [])]
    rule_rows = [[cls, _fmt(row["probability"]),
                  _fmt(row.get("like_to_like_index"), ".3g"), _sigma_text(row)]
                 for cls, row in rules.items()]
    st = meta.get("stability", {})
    inp = meta.get("input", {})
    par = meta.get("parameters", {})
    parts = [
        "<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>",
        f"<title>{REPORT_TITLE}</title>", f"<style>{_CSS}</style>",
        "</head><body>", "<h1>Circuit report</h1>",
        f"<p class='caution'>{html.escape(CAUTION)}</p>",
        "<h2>Inputs and parameters</h2>",
        _table(["item", "value"], [
            ["matrix", inp.get("path", "-")], ["sha256", inp.get("sha256") or "-"],
            ["shape", "x".join(map(str, inp.get("shape", [])))],
            ["unit table", inp.get("units") or "-"],
            ["E:I ratio", _ratio_text(par.get("ei_ratio"))],
            ["untuned share", par.get("untuned_share", "-")],
            ["split rule", met.get("share_rule", "-")],
            ["alpha", _fmt(par.get("alpha"))], ["lam", _fmt(par.get("lam"))],
            ["rank of L", par.get("rank", "-")],
            ["eidecomp", meta.get("eidecomp_version", "-")]]),
        "<h2>Assembly against the baselines</h2>",
        f"<p>{c.get('excitatory', 0)} excitatory, {c.get('untuned', 0)} untuned "
        f"and {c.get('tuned', 0)} tuned inhibitory units; refinement converged: "
        f"{'yes' if met.get('converged') else 'NO'}.</p>",
        _table(["construction", "interneurons", "relative error",
                "J_EE density"], assembly),
        "<h2>Connection rules</h2>",
        "<p>Connection probability per class; like-to-like index = probability "
        "at the same feature / at the orthogonal one; space constant sigma of a "
        "Gaussian fit of probability against distance, with its 95 % interval. "
        "Interneurons take the feature and position of their input pool.</p>",
        _table(["class", "probability", "like-to-like", "sigma [95 % CI]"],
               rule_rows),
        "<h2>Interneuron tuning</h2>",
        "<p>Median circular variance of the input pool: untuned "
        f"{_fmt(med[0], '.3f')}, tuned {_fmt(med[1], '.3f')}"
        + ("" if have_units else " (no unit table given)") + ".</p>",
        "<h2>Stability</h2>",
        "<p>" + html.escape(_stability_text(st)) + "</p>",
    ]
    return parts


def render_report(circuit, meta, W, *, low_rank=None, features=None,
                  positions=None, path_points=None):
    """The report page, as an HTML string.

    Parameters
    ----------
    circuit : Circuit
    meta : dict
        The bundle's circuit.json (counts, metrics, baselines, stability,
        parameters, inputs).
    W : ndarray
        The matrix the circuit was built from (L + S).
    low_rank : ndarray or None
        L, for its heatmap and spectrum.
    features, positions : ndarray or None
        From the unit table, for connection rules and tuning.
    path_points : list of PathPoint or None
        A lambda_path result, for the lam path figure.
    """
    period = float(meta.get("parameters", {}).get("period", 180.0))
    rules = circuit_rules(circuit, W, features=features, positions=positions,
                          period=period)
    pools = interneuron_pools(circuit, features, period)
    cv = {kind: [p["circular_variance"] for p in pools if p["kind"] == kind]
          for kind in (UNTUNED, TUNED)}
    figs = _figures(circuit, meta, W, low_rank, path_points, rules,
                    cv if features is not None else None)
    med = [np.median([x for x in v if x is not None]) if any(
        x is not None for x in v) else None for v in cv.values()]
    parts = _sections(meta, rules, med, features is not None)
    parts.append("<h2>Figures</h2>")
    for title, data in figs:
        parts.append(f"<figure><img class='figure' alt='{html.escape(title)}' "
                     f"src='data:image/png;base64,{data}'><figcaption>"
                     f"{html.escape(title)}</figcaption></figure>")
    parts.append("<h2>Data</h2><details><summary>connection rules (JSON)"
                 "</summary><pre>" + html.escape(json.dumps(rules, indent=1))
                 + "</pre></details>")
    parts.append(_ONLOAD + "</body></html>")
    return "\n".join(parts)
