"""One self-contained HTML report of a circuit bundle (figures embedded).

``render_report(circuit, meta, W, ...)`` takes what the pipeline loaded from
a bundle, computes the connection profiles and tuning, draws the figures with
analysis.plotting on matplotlib Figure objects (the Agg renderer, no
display) and returns the page as a string: inputs, parameters, the assembly
against the baselines, connection profiles, tuning, stability, and the caution
that the circuit is a hypothesis to test, not a measurement.
"""

import base64
import html
import io
import json
import os
import re
import warnings
from urllib.parse import quote

import numpy as np

from .._version import __version__
from ..errors import ConvergenceWarning
from ..params import (
    DEFAULT_PERIOD,
    PATH_GAP_TOL,
    active_text,
    excitation_line,
    guard_line,
    labels_caveat,
    own_stability_line,
    tau_ratio_text,
)
from ..progress import announcer
from ..types import TUNED, UNTUNED
from . import plotting
from .profiles import (
    CONFIDENCE,
    LACK_OF_FIT_P,
    LACK_OF_FIT_TEXT,
    NO_DECAY_FACTOR,
    circuit_profiles,
    extrapolated_text,
)
from .tuning import interneuron_pools

__all__ = ["CAUTIONS", "LAM_PATH_TEXT", "PATH_MAX_UNITS", "PROFILES_TITLE",
           "REPORT_TITLE", "render_report", "render_report_files",
           "report_lam_path", "svg_name"]

REPORT_TITLE = "eidecomp circuit report"  # also how --force tells a report
PROFILES_TITLE = "Connection profiles"
PATH_MAX_UNITS = 600  # the lam path re-solves robust PCA 8 times
PATH_LAMS = 8  # from a quarter to four times the default lam
PATH_BREAKDOWN = 0.5  # no larger lam once L holds more than this share of rank

LAM_PATH_TEXT = (
    f"The lam path figure re-solves robust PCA at {PATH_LAMS} lam, log-spaced "
    "from a quarter to four times the default 1/sqrt(n), each started from "
    "its neighbour's solution (or from scratch where that is faster) and "
    f"stopped at a certified duality gap of {PATH_GAP_TOL:g}. A solve that "
    "stops before reaching that gap is drawn hollow: its rank and sparsity "
    "are those of its best certified iterate, not settled. Once a converged "
    f"solve gives L more than {PATH_BREAKDOWN * 100:g} % of full rank, the split "
    "has broken down (L holds most of W) and the larger, costlier lams are "
    f"not solved. The figure is left out above {PATH_MAX_UNITS} units.")
"""What the lam path figure is: the report shows it under the figures, and
docs/analysis.md ("The lam path") holds the same text."""


def report_lam_path(W, *, progress=None):
    """The lam path drawn in the report, or None above :data:`PATH_MAX_UNITS`.

    :data:`LAM_PATH_TEXT` says what it is; the lams are solved by
    :func:`eidecomp.lambda_path` (the rank and support it draws have
    settled at :data:`eidecomp.params.PATH_GAP_TOL`; docs/robust_pca.md,
    "The rank"). ``progress`` names each lam.

    >>> W = np.random.default_rng(0).standard_normal((30, 30))
    >>> pts = report_lam_path(W)
    >>> bool(np.isclose(pts[0].lam, 0.25 / np.sqrt(30)))
    True
    >>> all(a.lam < b.lam for a, b in zip(pts, pts[1:]))
    True
    """
    from ..decompose import lambda_path

    if np.shape(W)[0] > PATH_MAX_UNITS:
        return None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)  # drawn hollow
        points, _ = lambda_path(W, list(_path_lams(W)), gap_tol=PATH_GAP_TOL,
                                progress=_in_report(progress),
                                until=lambda p: _broken_down(p, W))
    return points


def _in_report(progress):
    """A stage callback whose stages read "report: ...", or None."""
    if progress is None:
        return None
    return lambda stage, *rest: progress(f"report: {stage}", *rest)


def _path_lams(W):
    from ..params import default_lam

    lam0 = default_lam(np.shape(W))
    return np.geomspace(lam0 / 4, lam0 * 4, PATH_LAMS)


def _broken_down(point, W):
    return point.rank > PATH_BREAKDOWN * min(np.shape(W))


CAUTIONS = (
    "This circuit is a model hypothesis: one of many Dale's-law circuits "
    "consistent with the matrix it was built from. Its connection profiles "
    "and interneuron types are predictions to test against anatomy and "
    "physiology, not measurements.",
    "Where excitation and tuned inhibition target the same pairs, W holds "
    "only their sum there, and the two cannot be told apart "
    "(docs/assembly.md, identifiability).",
    "The relative error measures only how well the circuit reproduces W, "
    "not whether the circuit is biological.",
)
"""The cautions at the top of every report, in order."""

_CSS = """body{font-family:sans-serif;max-width:1100px;margin:2em auto;color:#222}
table{border-collapse:collapse;margin:1em 0}td,th{border:1px solid #bbb;
padding:3px 8px;text-align:right}th{background:#eee}td:first-child{text-align:left}
.caution{border-left:4px solid #b8433a;padding:.5em 1em;background:#fbf3f2}
figure{display:inline-block;margin:.5em}img{max-width:640px}"""

_ONLOAD = """<script>window.addEventListener('load',function(){var i=document.
querySelectorAll('img.figure'),n=0;i.forEach(function(e){if(e.naturalWidth>0)n++});
document.body.setAttribute('data-figures-rendered',n+'/'+i.length)})</script>"""


_MARGINS = {"left": 0.16, "right": 0.95, "bottom": 0.13, "top": 0.91}


def _figure(draw, figsize=(5.2, 4.0), **margins):
    """One Axes on a Figure (Agg canvas) with fixed margins, drawn by ``draw``.

    No layout engine: the figures are of known shape, so their margins are
    set here and in :data:`_LAYOUT` (checked by tests/test_report.py), and
    a fixed title height (axes.titley) places each title without measuring
    the tick labels below it.
    """
    import matplotlib as mpl
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    with mpl.rc_context({"axes.titley": 1.0}):
        fig = Figure(figsize=figsize, dpi=90)
        FigureCanvasAgg(fig)
        fig.subplots_adjust(**{**_MARGINS, **margins})
        draw(fig.subplots())
    return fig


def _rendered(draw, svg=None, figsize=(5.2, 4.0), **margins):
    """:func:`_figure` as base64 PNG, and with ``svg`` (the figure's title)
    as SVG bytes from the same drawing (else None). The SVG's title begins
    with REPORT_TITLE (how ``--force`` tells it), and it is reproducible:
    no date, fixed ids."""
    import matplotlib as mpl

    fig = _figure(draw, figsize, **margins)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=90)
    png = base64.b64encode(buf.getvalue()).decode("ascii")
    if not svg:
        return png, None
    vector = io.BytesIO()
    with mpl.rc_context({"svg.hashsalt": "eidecomp"}):
        fig.savefig(vector, format="svg",
                    metadata={"Date": None, "Title": f"{REPORT_TITLE}: {svg}"})
    return png, vector.getvalue()


def svg_name(k, title):
    """The file name of the report's figure number ``k`` (from 1).

    >>> svg_name(3, "E->I_tuned: distance")
    '03-e-i-tuned-distance.svg'
    """
    return f"{k:02d}-{re.sub(r'[^a-z0-9]+', '-', title.lower()).strip('-')}.svg"


# figures whose shape differs from the default: a legend below (lam path),
# a legend outside on the right (error against density), no axes (graph)
_LAYOUT = {
    "lam path": {"figsize": (5.2, 4.6), "right": 0.86, "bottom": 0.27},
    "error against J_EE density": {"figsize": (7.0, 4.0), "left": 0.12,
                                   "right": 0.70},
    "population graph": {"left": 0.02, "right": 0.98, "bottom": 0.02},
}


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


def _figures(circuit, meta, W, L, path_points, profiles, cv, tell, svg=False):
    """(title, base64 PNG, SVG bytes or None) of every figure of the report."""
    from ..graph import population_graph

    W_eff = circuit.reconstruction()    # W_eff, or W_full of W's own neurons
    eff = "W_full" if circuit.own_neurons else "W_eff"
    figs = []

    def fig(title, draw):
        tell(f"report figure: {title}")
        figs.append((title, *_rendered(draw, title if svg else None,
                                       **_LAYOUT.get(title, {}))))

    for name, M in (("W", W), (eff, W_eff), (f"residual W - {eff}", W - W_eff)):
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
        lam = meta.get("decomposition", {}).get("lam")
        fig("lam path", lambda ax: plotting.plot_lambda_path(
            ax, path_points, lam=lam))
    fig("error against J_EE density", lambda ax: plotting.plot_error_density(
        ax, meta.get("metrics", {}), meta.get("baselines", [])))
    P = population_graph(circuit)
    fig("population graph", lambda ax: plotting.plot_population_graph(ax, P))
    for cls, row in profiles.items():
        if "feature_profile" in row:
            fig(f"{cls}: feature", lambda ax, r=row, c=cls: plotting.plot_profile(
                ax, r["feature_profile"], title=f"{c}: by feature difference"))
        if "distance_profile" in row:
            fig(f"{cls}: distance", lambda ax, r=row, c=cls: plotting.plot_profile(
                ax, r["distance_profile"], r.get("space_constant"),
                title=f"{c}: by distance"))
    if cv is not None:
        fig("interneuron tuning", lambda ax: plotting.plot_tuning(
            ax, cv[UNTUNED], cv[TUNED]))
    return figs


def _sigma_text(row):
    """sigma [95 % CI] when the data bound it, else what the fit found
    (analysis.profiles.SpaceConstant.status); a sigma beyond the largest
    binned distance is marked "extrapolated", and a Gaussian the bins reject
    says so, with its dispersion."""
    from .profiles import DETERMINED, NO_FIT

    sc = row.get("space_constant") or {}
    status = sc.get("status", NO_FIT if sc.get("sigma") is None else DETERMINED)
    if status == NO_FIT:
        return "-"
    if status != DETERMINED:
        text = status
    else:
        text = (f"{sc['sigma']:.3g} [{_fmt(sc.get('ci_low'), '.3g')}, "
                f"{_fmt(sc.get('ci_high'), '.3g')}]")
        if sc.get("extrapolated"):
            text += f", {extrapolated_text(sc['span'])}"
    if sc.get("lack_of_fit"):
        text += f"; {LACK_OF_FIT_TEXT} (dispersion {sc['dispersion']:.3g})"
    return text


def _like_text(row):
    """The like-to-like index; where none of the orthogonal pairs is
    connected, its lower bound (analysis.profiles.like_to_like_bound) as
    ">= x"; "-" where it is undefined."""
    if row.get("like_to_like_bound") is not None:
        return f">= {row['like_to_like_bound']:.3g}"
    return _fmt(row.get("like_to_like_index"), ".3g")


def _counts_text(row):
    """Connected / all pairs at the same feature and at the orthogonal one."""
    c = row.get("like_to_like_counts")
    return "-" if not c else f"{c[0]}/{c[1]}, {c[2]}/{c[3]}"


def _path_note(points, W):
    """What this lam path did (the figure itself: :data:`LAM_PATH_TEXT`),
    or why it is missing."""
    if not points:
        return (f"lam path: left out above {PATH_MAX_UNITS} units (it re-solves "
                f"robust PCA at {PATH_LAMS} lam); eidecomp.lambda_path computes "
                "it on request." if np.shape(W)[0] > PATH_MAX_UNITS else
                "lam path: not computed.")
    stopped = [p for p in points if not p.converged]
    text = (f"lam path: {len(points)} lam from {points[0].lam:.3g} to "
            f"{points[-1].lam:.3g}")
    grid = _path_lams(W)
    done = len(points)
    if done < len(grid) and np.allclose([p.lam for p in points], grid[:done]):
        last = points[-1]
        text += (f"; the {len(grid) - done} larger lam up to {grid[-1]:.3g} "
                 f"not solved: at lam {last.lam:.3g} L already has rank "
                 f"{last.rank} of {min(np.shape(W))} ("
                 + ("the split has broken down, L holds most of W)"
                    if last.converged else "its last iterate, not converged)"))
    if stopped:
        text += (f"; {len(stopped)} stopped before reaching that gap "
                 f"({PATH_GAP_TOL:g}, hollow markers)")
    return text + "."


def _stability_text(st):
    if st.get("own_neurons"):
        why = f". {st['why']}" if st.get("why") else ""
        return (f"spectral abscissa of -I + W: "
                f"{_fmt(st.get('original_spectral_abscissa'), '.3g')}; "
                f"{own_stability_line(st)}{why}")
    why = f". {st['why']}" if st.get("why") else ""
    return (f"spectral abscissa of -I + W: "
            f"{_fmt(st.get('original_spectral_abscissa'), '.3g')}; "
            f"{tau_ratio_text(st)}{why}")


def _verdict_para(decomposition):
    """The split's verdict (circuit.json decomposition.verdict) as the
    page's first paragraph, or nothing when none was recorded."""
    verdict = decomposition.get("verdict")
    if not verdict:
        return []
    style = "" if verdict.get("fits") else " class='caution'"
    return [f"<p{style}>{html.escape(str(verdict.get('line', '')))}</p>"]


def _notes_list(notes):
    """The assembler's notes (circuit.json metrics.notes), as the command
    line prints them."""
    if not notes:
        return ""
    items = "".join(f"<li>{html.escape(str(n))}</li>" for n in notes)
    return f"<p>Notes:</p><ul>{items}</ul>"


def _sections(meta, profiles, med, have_units):
    """The page up to its figures: inputs, assembly, profiles, tuning, stability."""
    met = meta.get("metrics", {})
    c = meta.get("counts", {})
    assembly = [["this circuit", c.get(UNTUNED, 0) + c.get(TUNED, 0),
                 _fmt(met.get("relative_error")), _fmt(met.get("ee_density"))]]
    assembly += [[b["name"], b["n_inhibitory"], _fmt(b["relative_error"]),
                  _fmt(b["ee_density"])] for b in meta.get("baselines", [])]
    profile_rows = [[cls, _fmt(row["probability"]), _like_text(row),
                     _counts_text(row), _sigma_text(row)]
                    for cls, row in profiles.items()]
    st = meta.get("stability", {})
    inp = meta.get("input", {})
    par = meta.get("parameters", {})
    parts = [
        "<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>",
        f"<title>{REPORT_TITLE}</title>", f"<style>{_CSS}</style>",
        "</head><body>", "<h1>Circuit report</h1>",
        "<div class='caution'>" + "".join(
            f"<p>{html.escape(text)}</p>" for text in CAUTIONS) + "</div>",
        *([f"<p><b>{html.escape(met['comparison'])}</b></p>"]
          if met.get("comparison") else []),
        *_verdict_para(meta.get("decomposition", {})),
        "<h2>Inputs and parameters</h2>",
        _table(["item", "value"], [
            ["matrix", inp.get("path", "-")], ["sha256", inp.get("sha256") or "-"],
            ["shape", "x".join(map(str, inp.get("shape", [])))],
            ["unit table", inp.get("units") or "-"],
            ["E:I ratio", _ratio_text(par.get("ei_ratio"))],
            ["untuned share", par.get("untuned_share", "-")],
            ["untuned/tuned share rule", met.get("share_rule", "-")],
            ["alpha", _fmt(par.get("alpha"))], ["lam", _fmt(par.get("lam"))],
            ["rank of L", par.get("rank", "-")],
            ["certified duality gap",
             _fmt(meta.get("decomposition", {}).get("duality_gap"), ".2e")],
            # a bundle's own version; before it is written (run --report,
            # demo), the running one, which writes it
            ["eidecomp", meta.get("eidecomp_version", __version__)]]),
        "<h2>Assembly against the baselines</h2>",
        f"<p>{c.get('excitatory', 0)} excitatory, {active_text(meta, UNTUNED)} "
        f"untuned and {active_text(meta, TUNED)} tuned inhibitory units"
        f"{labels_caveat(meta, ' (', ')')}; refinement converged: "
        f"{'yes' if met.get('converged') else 'NO'}.</p>",
        f"<p>{html.escape(excitation_line(met))}.</p>",
        (f"<p>{html.escape(guard_line(met))}.</p>" if guard_line(met) else ""),
        _table(["construction", "interneurons", "relative error",
                "J_EE density"], assembly),
        _notes_list(met.get("notes", ())),
        f"<h2>{PROFILES_TITLE}</h2>",
        "<p>Connection probability per class; like-to-like index = probability "
        "at the same feature / at the orthogonal one, with the connected pairs "
        "of each (k/n); where no orthogonal pair is connected, the lower bound "
        "'>= x' the counts support: the same-feature probability over the "
        f"one-sided {100 * CONFIDENCE:g} % upper Clopper-Pearson bound of the "
        "orthogonal one "
        "(Clopper &amp; Pearson 1934). Space constant sigma of a "
        "Gaussian of distance fitted to the binned counts (binomial maximum "
        f"likelihood), with its {100 * CONFIDENCE:g} % interval, "
        "given as a number only where the data bound it: 'not determined' "
        "where the interval is wider than the distances the profile covers or "
        "reaches zero, 'no decay' where the fitted sigma is more than "
        f"{NO_DECAY_FACTOR:g} times those distances, 'extrapolated' where it "
        "lies beyond the largest binned distance (in um). "
        f"'{LACK_OF_FIT_TEXT}' where the bins scatter about the curve more "
        "than binomial chance allows (deviance p-value below "
        f"{LACK_OF_FIT_P:g}): the dispersion beside it is how many times "
        "more (1 is binomial), and the interval is already widened by its "
        "square root. Interneurons take the feature and position of their "
        "input pool.</p>",
        _table(["class", "probability", "like-to-like",
                "connected: same, orthogonal", "sigma [95 % CI]"],
               profile_rows),
        "<h2>Interneuron tuning</h2>",
        "<p>Median circular variance of the input pool: untuned "
        f"{_fmt(med[0], '.3f')}, tuned {_fmt(med[1], '.3f')}"
        + ("" if have_units else " (no unit table given)") + ".</p>",
        "<h2>Stability</h2>",
        "<p>" + html.escape(_stability_text(st)) + "</p>",
    ]
    return parts


def render_report(circuit, meta, W, *, low_rank=None, features=None,
                  positions=None, path_points=None, progress=None):
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
        From the unit table, for connection profiles and tuning.
    path_points : list of PathPoint or None
        A lambda_path result (:func:`report_lam_path`), for the lam path
        figure.
    progress : callable or None
        Called as ``progress(stage, 0, nan)`` as each part starts (the
        assembler's signature).

    Examples
    --------
    >>> import numpy as np
    >>> from eidecomp import assemble
    >>> from eidecomp.datasets import make_planted_circuit
    >>> from eidecomp.decompose import robust_pca
    >>> W, _, _ = make_planted_circuit(40, n_untuned=2, n_tuned=8, pool=4, seed=0)
    >>> c = assemble(robust_pca(W), ei_ratio="4:1", baselines=False)
    >>> meta = {"metrics": {"relative_error": c.report.relative_error,
    ...                     "ee_density": c.report.ee_density}}
    >>> page = render_report(c, meta, W)
    >>> page.startswith("<!DOCTYPE html>") and PROFILES_TITLE in page
    True
    """
    return _render(circuit, meta, W, low_rank, features, positions,
                   path_points, progress)[0]


def render_report_files(circuit, meta, W, *, low_rank=None, features=None,
                        positions=None, path_points=None, progress=None,
                        link=""):
    """The report page and each of its figures as an SVG file.

    As :func:`render_report`; returns ``(page, {svg_name(k, title): SVG
    bytes})``. Each caption links to its file at ``link + name`` (the path
    of the SVG files relative to the page, e.g. ``"report-figures/"``).
    """
    return _render(circuit, meta, W, low_rank, features, positions,
                   path_points, progress, svg=True, link=link)


def _render(circuit, meta, W, low_rank, features, positions, path_points,
            progress, svg=False, link=""):
    tell = announcer(progress)
    tell("report: connection profiles")
    period = float(meta.get("parameters", {}).get("period", DEFAULT_PERIOD))
    profiles = circuit_profiles(circuit, W, features=features,
                                positions=positions, period=period)
    pools = interneuron_pools(circuit, features, period)
    cv = {kind: [p["circular_variance"] for p in pools if p["kind"] == kind]
          for kind in (UNTUNED, TUNED)}
    figs = _figures(circuit, meta, W, low_rank, path_points, profiles,
                    cv if features is not None else None, tell, svg=svg)
    med = [np.median([x for x in v if x is not None]) if any(
        x is not None for x in v) else None for v in cv.values()]
    parts = _sections(meta, profiles, med, features is not None)
    parts.append("<h2>Figures</h2>")
    if path_points:
        parts.append(f"<p>{html.escape(LAM_PATH_TEXT)}</p>")
    parts.append(f"<p>{html.escape(_path_note(path_points, W))}</p>")
    files = {}
    for k, (title, data, vector) in enumerate(figs, start=1):
        caption = html.escape(title)
        if vector is not None:
            name = svg_name(k, title)
            files[name] = vector
            # the link's bytes as the file system names them (a name that
            # is not UTF-8 holds lone surrogates, PEP 383), percent-encoded
            href = html.escape(quote(os.fsencode(link + name)), quote=True)
            caption += f" (<a href='{href}'>SVG</a>)"
        parts.append(f"<figure><img class='figure' alt='{html.escape(title)}' "
                     f"src='data:image/png;base64,{data}'><figcaption>"
                     f"{caption}</figcaption></figure>")
    parts.append("<h2>Data</h2><details><summary>connection profiles (JSON)"
                 "</summary><pre>" + html.escape(json.dumps(profiles, indent=1))
                 + "</pre></details>")
    parts.append(_ONLOAD + "</body></html>")
    return "\n".join(parts), files
