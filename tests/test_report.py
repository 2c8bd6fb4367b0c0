"""Figures, the HTML report and the demo.

References: headless Chromium (Debian's package) renders the report and
counts the figures that decoded (naturalWidth > 0); matplotlib draws every
figure on a Figure with the Agg renderer, and its text extents
(Text.get_window_extent) say whether labels overlap, its artists are read
back for colours, labels, limits and marker positions, and its colour
conversion (matplotlib.colors.rgb_to_hsv) tells red and blue;
scipy.stats.binom's likelihood, maximised and differentiated with
scipy.optimize, gives the space constant's interval independently of
eidecomp; scipy.stats.binomtest(...).proportion_ci(method="exact"), the
Clopper & Pearson (1934) interval, gives the error bars and the like-to-like
bound; numpy counts the connections the population graph labels; the
planted circuit's tuned and untuned interneurons are compared as in the
assembler benchmark.
"""

import html
import json
import os
import re
import subprocess
import tempfile
from itertools import combinations

import numpy as np
import pytest
from conftest import require_browser

from eidecomp.analysis import plotting
from eidecomp.analysis.profiles import Profile, fit_space_constant
from eidecomp.analysis.report import (
    PATH_LAMS,
    PROFILES_TITLE,
    render_report,
    report_lam_path,
)
from eidecomp.cli import main
from eidecomp.datasets import make_planted_circuit


def _rendered(browser, path):
    out = subprocess.run([browser, "--headless", "--no-sandbox", "--disable-gpu",
                          "--dump-dom", path.resolve().as_uri()],
                         capture_output=True, text=True, timeout=120)
    m = re.search(r'data-figures-rendered="(\d+)/(\d+)"', out.stdout)
    assert m, out.stderr[-1000:]
    return int(m.group(1)), int(m.group(2))


@pytest.fixture(scope="module")
def bundle(tmp_path_factory):
    d = tmp_path_factory.mktemp("rep")
    W, _, features = make_planted_circuit(120, n_untuned=3, n_tuned=27, pool=5,
                                          seed=4)
    np.save(d / "w.npy", W)
    with open(d / "units.csv", "w") as fh:
        fh.write("id,feature,x,y\n")
        for i, f in enumerate(features.tolist()):
            fh.write(f"u{i},{f!r},{4.0 * f!r},0.0\n")
    assert main(["run", str(d / "w.npy"), "-o", str(d / "c"), "-q", "--units",
                 str(d / "units.csv"), "--report"]) == 0
    return d / "c"


def test_report_is_self_contained(bundle):
    page = (bundle / "report.html").read_text(encoding="utf-8")
    assert "model hypothesis" in page and "not measurements" in page
    # the cautions of README ("What the numbers mean, and what they do not"):
    # hypothesis, identifiability, and what the relative error measures
    from eidecomp.analysis.report import CAUTIONS

    assert len(CAUTIONS) == 3
    for text in CAUTIONS:
        assert html.escape(text) in page
    assert "cannot be told apart" in CAUTIONS[1]
    assert "not whether the circuit is biological" in CAUTIONS[2]
    assert not re.search(r"(src|href)=['\"]https?:", page)  # nothing fetched
    assert page.count("data:image/png;base64,") >= 15
    for section in ("Assembly against the baselines", "Connection profiles",
                    "Interneuron tuning", "Stability"):
        assert section in page


def test_report_opens_in_headless_chromium(bundle):
    browser = require_browser()
    shown, total = _rendered(browser, bundle / "report.html")
    assert total >= 15 and shown == total


def test_report_command(bundle, tmp_path, capsys):
    out = tmp_path / "r.html"
    assert main(["report", str(bundle), "-o", str(out)]) == 0
    assert out.read_text(encoding="utf-8").startswith("<!DOCTYPE html>")
    assert main(["report", str(bundle), "-o", str(out)]) == 2  # no --force
    assert main(["report", str(tmp_path), "-o", str(tmp_path / "x.html")]) == 2
    assert "not a circuit bundle" in capsys.readouterr().err
    assert not (tmp_path / "x.html").exists()


def _svg_links(page):
    return re.findall(r"<a href='([^']+\.svg)'>SVG</a>", page)


def _parsed_svg(path):
    """The root of an SVG file as Python's XML parser reads it; the W3C SVG
    1.1 namespace is the reference for what an SVG document is."""
    import xml.etree.ElementTree as ET

    root = ET.parse(path).getroot()
    assert root.tag == "{http://www.w3.org/2000/svg}svg", path
    return root


def test_every_figure_is_also_an_svg_file_the_page_links_to(bundle, tmp_path):
    # in the bundle (run --report): report-NN-name.svg beside report.html
    page = (bundle / "report.html").read_text(encoding="utf-8")
    links = _svg_links(page)
    assert len(links) == page.count("data:image/png;base64,") >= 15
    assert sorted(links) == sorted(p.name for p in bundle.glob("report-*.svg"))
    for name in links:
        title = _parsed_svg(bundle / name).find("{http://www.w3.org/2000/svg}title")
        assert title.text.startswith("eidecomp circuit report: ")
    # the report command: a folder named after the page, beside it
    out = tmp_path / "r.html"
    assert main(["report", str(bundle), "-o", str(out), "-q"]) == 0
    links = _svg_links(out.read_text(encoding="utf-8"))
    assert links and all(name.startswith("r-figures/") for name in links)
    first = {p.name: p.read_bytes() for p in (tmp_path / "r-figures").iterdir()}
    # the figures, and the manifest that proves them ours (README, "Provenance")
    assert sorted(first) == sorted([n.split("/")[1] for n in links]
                                   + ["eidecomp-manifest.json"])
    for name in links:
        _parsed_svg(tmp_path / name)
    # the same bundle gives the same bytes (no date, fixed ids)
    assert main(["report", str(bundle), "-o", str(out), "-q", "--force"]) == 0
    again = {p.name: p.read_bytes() for p in (tmp_path / "r-figures").iterdir()}
    assert again == first


def test_report_keeps_a_folder_that_is_not_its_figures(bundle, tmp_path, capsys):
    out = tmp_path / "r.html"
    (tmp_path / "r-figures").mkdir()
    (tmp_path / "r-figures" / "notes.txt").write_text("mine")
    assert main(["report", str(bundle), "-o", str(out), "-q", "--force"]) == 2
    err = capsys.readouterr().err
    assert "r-figures" in err and "not a folder eidecomp wrote" in err
    assert len(err.strip().splitlines()) == 1
    assert not out.exists()                       # nothing written
    assert (tmp_path / "r-figures" / "notes.txt").read_text() == "mine"


def test_a_failed_page_write_leaves_the_old_figures_beside_the_old_page(
        bundle, tmp_path, monkeypatch, capsys):
    # the page and its figures folder are one output: when the page cannot be
    # written (here a full disk, simulated), the folder is not replaced either
    import eidecomp.io
    from eidecomp.errors import WriteError
    from eidecomp.io.provenance import FOLDER_MANIFEST, folder_manifest
    from eidecomp.pipeline import REPORT_FIGURES_KIND

    out = tmp_path / "r.html"
    assert main(["report", str(bundle), "-o", str(out), "-q"]) == 0
    old_page = out.read_bytes()
    svg = sorted((tmp_path / "r-figures").glob("*.svg"))[0]
    svg.write_bytes(svg.read_bytes() + b"<!-- the earlier run -->")
    # as an earlier eidecomp would have written it: its manifest to match
    figures = {p.name: p.read_bytes() for p in svg.parent.iterdir()
               if p.name != FOLDER_MANIFEST}
    (svg.parent / FOLDER_MANIFEST).write_bytes(
        folder_manifest(figures, kind=REPORT_FIGURES_KIND))
    old_figures = {p.name: p.read_bytes() for p in svg.parent.iterdir()}

    def full_disk(path, *args, **kwargs):
        raise WriteError(f"{path}: cannot write (No space left on device)")

    monkeypatch.setattr(eidecomp.io, "write_file", full_disk)
    assert main(["report", str(bundle), "-o", str(out), "-q", "--force"]) == 1
    assert "No space left" in capsys.readouterr().err
    assert out.read_bytes() == old_page
    assert {p.name: p.read_bytes() for p in svg.parent.iterdir()} == old_figures
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r-figures", "r.html"]


def test_demo_runs_and_its_report_renders(tmp_path):
    out = tmp_path / "demo"
    assert main(["demo", "-o", str(out), "-q"]) == 0
    for name in ("report.html", "circuit.json", "demo_weights.npy",
                 "demo_units.csv"):
        assert (out / name).is_file()
    browser = require_browser()
    shown, total = _rendered(browser, out / "report.html")
    assert total >= 15 and shown == total


def test_positions_in_degrees_need_magnification(tmp_path, capsys, bundle):
    d = bundle.parent
    assert main(["run", str(d / "w.npy"), "-o", str(tmp_path / "c"), "-q",
                 "--units", str(d / "units.csv"), "--position-unit", "deg"]) == 2
    assert "--magnification" in capsys.readouterr().err
    assert main(["run", str(d / "w.npy"), "-o", str(tmp_path / "c"), "-q",
                 "--units", str(d / "units.csv"), "--position-unit", "deg",
                 "--magnification", "250"]) == 0
    pos = np.load(tmp_path / "c" / "positions.npy")
    np.testing.assert_allclose(pos, np.load(bundle / "positions.npy") * 250)


def test_every_figure_function_returns_its_ax(bundle):
    from matplotlib.figure import Figure

    from eidecomp.graph import population_graph
    from eidecomp.io import read_circuit

    c, meta = read_circuit(bundle)
    prof = {"edges": [0, 1, 2], "probability": [0.5, None], "quantity": "x"}
    calls = [
        (plotting.plot_matrix, (np.eye(3) - 0.5,)),
        (plotting.plot_spectrum, (np.array([3.0, 2.0, 1e-9]), 2)),
        (plotting.plot_error_density, (meta["metrics"], meta["baselines"])),
        (plotting.plot_population_graph, (population_graph(c),)),
        (plotting.plot_profile, (prof, {"sigma": 1.0, "p0": 0.5})),
        (plotting.plot_profile, (prof, {"sigma": 1.0, "p0": 0.5,
                                     "status": "not determined"})),
        (plotting.plot_tuning, ([0.5, 0.7], [0.1, None])),
        (plotting.plot_lambda_path, (report_lam_path(np.load(
            bundle.parent / "w.npy")),)),
    ]
    for fn, args in calls:
        ax = Figure().subplots()
        assert fn(ax, *args) is ax


# --- what a reader sees ------------------------------------------------------

def _sections(page):
    return re.findall(r"<h2>([^<]*)</h2>", page)


def test_section_is_called_connection_profiles(bundle):
    # NEST's documentation (connection management) calls its wiring
    # algorithms rules (conn_spec rules one_to_one, pairwise_bernoulli, ...);
    # the report's binned probabilities are profiles, the word
    # analysis/profiles.py uses (feature_profile, distance_profile). "Split"
    # is kept for W = L + S (Candes et al. 2011, eq. 1.1): the parameter row
    # of the untuned share is its own name
    page = (bundle / "report.html").read_text(encoding="utf-8")
    assert PROFILES_TITLE == "Connection profiles"
    assert PROFILES_TITLE in _sections(page)
    assert not re.search(r"connection\s+rules?", page, re.IGNORECASE)
    rows = re.findall(r"<tr><td>([^<]*)</td>", page)
    assert "untuned/tuned share rule" in rows and "split rule" not in rows


def _distance_profile(sigma, n_pairs, span, seed):
    """Counts drawn from p(d) = 0.3 exp(-d^2 / (2 sigma^2)) in 25 bins."""
    rng = np.random.default_rng(seed)
    edges = np.linspace(0.0, span, 26)
    d = 0.5 * (edges[1:] + edges[:-1])
    n = np.full(25, n_pairs)
    k = rng.binomial(n, 0.3 * np.exp(-d ** 2 / (2 * sigma ** 2)))
    return Profile(edges, k / n, np.ones(25), n, k, "distance (um)")


def _scipy_interval(prof):
    """The 95 % Wald interval of sigma written out with scipy alone: the
    maximum of scipy.stats.binom's log-likelihood of the binned counts
    (scipy.optimize.minimize, L-BFGS-B over (p0, sigma) themselves), its
    observed information by finite differences of that log-likelihood
    (scipy.optimize.approx_fprime), widened by the dispersion where it
    exceeds 1: the deviance, twice the log-likelihood ratio of one
    probability per bin (scipy.stats.binom.logpmf at k / n) against the
    curve, over its degrees of freedom (the bins with a connection or one
    expected, less two; the quasi-binomial correction, McCullagh & Nelder
    1989, from memory)."""
    from scipy.optimize import approx_fprime, minimize
    from scipy.stats import binom

    x, k, n = prof.centers, prof.n_connected, prof.n_pairs

    def curve(t):
        return np.clip(t[0] * np.exp(-x ** 2 / (2 * t[1] ** 2)), 1e-12, 1 - 1e-12)

    def nll(t):
        return -float(binom.logpmf(k, n, curve(t)).sum())

    p_hat = k / n
    res = minimize(nll, (max(p_hat.max(), 1e-3), x[len(x) // 2]),
                   method="L-BFGS-B", bounds=[(1e-6, 1 - 1e-6), (1e-3, 1e6)],
                   options={"ftol": 1e-15, "gtol": 1e-12, "maxiter": 10000})
    t = res.x
    steps = 1e-5 * np.abs(t)
    H = np.array([approx_fprime(t, lambda u, i=i: approx_fprime(
        u, nll, steps)[i], steps) for i in range(2)])
    p = curve(t)
    saturated = float(binom.logpmf(k, n, k / n).sum())
    dof = max(int(np.sum((k > 0) | (n * p >= 1.0))) - 2, 1)
    phi = 2.0 * (saturated + nll(t)) / dof
    half = 1.96 * np.sqrt(np.linalg.inv(0.5 * (H + H.T))[1, 1] * max(phi, 1.0))
    return t[1] - half, t[1] + half


def test_space_constant_wider_than_the_sheet_is_not_determined():
    # a 1 mm sheet with few pairs per bin and a true sigma near the sheet
    # size: the 95 % interval written out with scipy is wider than 1 mm
    # (like a fit of 954 [273, 1640] um), and the report must not print a
    # number for it
    from eidecomp.analysis.report import _sigma_text

    prof = _distance_profile(900.0, 12, 1000.0, seed=3)
    low, high = _scipy_interval(prof)
    assert high - low > 1000.0
    fit = fit_space_constant(prof)
    assert fit.ci_high - fit.ci_low > 1000.0
    assert fit.status == "not determined"
    row = {"space_constant": fit.as_dict(), "distance_profile": prof.as_dict()}
    assert _sigma_text(row) == "not determined"


def test_space_constant_bounded_by_the_data_is_a_number():
    # sigma = 100 um, within the 85-114 um that Levy & Reyes 2012 (J Neurosci
    # 32:5609) fitted for all cell types (pyramidal, fast-spiking and
    # non-fast-spiking interneurons) in slices of mouse primary auditory
    # cortex, principal input layer, on many pairs: scipy's interval is
    # narrow and the report shows "sigma [low, high]" with the same numbers
    # (to the difference of observed and expected information)
    from eidecomp.analysis.report import _sigma_text

    prof = _distance_profile(100.0, 20000, 500.0, seed=4)
    low, high = _scipy_interval(prof)
    fit = fit_space_constant(prof)
    assert fit.status == "determined" and 85.0 <= fit.sigma <= 114.0
    assert (fit.ci_low, fit.ci_high) == pytest.approx((low, high), rel=5e-3)
    row = {"space_constant": fit.as_dict(), "distance_profile": prof.as_dict()}
    assert _sigma_text(row) == (f"{fit.sigma:.3g} [{fit.ci_low:.3g}, "
                                f"{fit.ci_high:.3g}]")


def test_inputs_table_shows_the_path_the_user_gave(bundle):
    # the fixture ran `eidecomp run <tmp>/w.npy --units <tmp>/units.csv`:
    # the table names exactly those paths, and they exist (common practice:
    # a report names inputs its reader can open)
    page = (bundle / "report.html").read_text(encoding="utf-8")
    given = [str(bundle.parent / "w.npy"), str(bundle.parent / "units.csv")]
    rows = dict(re.findall(r"<tr><td>(matrix|unit table)</td><td>([^<]*)</td>",
                           page))
    assert [rows["matrix"], rows["unit table"]] == given
    assert all(os.path.isfile(p) for p in given)


def test_demo_names_its_inputs_by_their_copies_in_the_bundle(tmp_path):
    # Python's tempfile.TemporaryDirectory removes its folder on exit, so a
    # path under tempfile.gettempdir() in the report would name nothing; the
    # demo's inputs are the two files written beside the circuit
    out = tmp_path / "demo"
    assert main(["demo", "-o", str(out), "-q"]) == 0
    page = (out / "report.html").read_text(encoding="utf-8")
    rows = dict(re.findall(r"<tr><td>(matrix|unit table)</td><td>([^<]*)</td>",
                           page))
    assert rows == {"matrix": "demo_weights.npy", "unit table": "demo_units.csv"}
    assert (out / rows["matrix"]).is_file() and (out / rows["unit table"]).is_file()
    assert tempfile.gettempdir() + "/tmp" not in page


def _tiny_circuit():
    from eidecomp import assemble
    from eidecomp.decompose import robust_pca

    W, _, _ = make_planted_circuit(40, n_untuned=2, n_tuned=8, pool=4, seed=0)
    c = assemble(robust_pca(W), ei_ratio="4:1", baselines=False)
    meta = {"metrics": {"relative_error": c.report.relative_error,
                        "ee_density": c.report.ee_density}}
    return c, meta, W


def _overlaps(texts, renderer):
    boxes = [t.get_window_extent(renderer) for t in texts
             if t.get_visible() and t.get_text()]
    return [(a, b) for a, b in combinations(boxes, 2) if a.overlaps(b)]


def _drawn(title, draw):
    """The report's own figure of that title (its size and margins)."""
    from eidecomp.analysis.report import _LAYOUT, _figure

    fig = _figure(draw, **_LAYOUT.get(title, {}))
    fig.canvas.draw()
    return fig, fig.axes[0], fig.canvas.get_renderer()


def test_lam_path_tick_labels_do_not_overlap(bundle):
    # matplotlib's own text extents (Agg renderer, the report's 90 dpi) of
    # the lam axis labels, over the report's range lam0/4 .. 4 lam0
    # (lam0 = 1/sqrt(n), Candes et al. 2011, Theorem 1.1)
    W = np.load(bundle.parent / "w.npy")
    points = report_lam_path(W)
    grid = np.geomspace(0.25, 4.0, PATH_LAMS) / np.sqrt(W.shape[0])
    np.testing.assert_allclose([p.lam for p in points], grid[:len(points)])
    fig, ax, r = _drawn("lam path",
                        lambda ax: plotting.plot_lambda_path(ax, points, 0.09))
    labels = [t for t in ax.get_xticklabels()
              if ax.get_xlim()[0] <= t.get_position()[0] <= ax.get_xlim()[1]]
    assert len([t for t in labels if t.get_text()]) >= 3
    assert not _overlaps(labels, r)
    assert all("$" not in t.get_text() for t in labels)  # plain numbers


def test_error_density_labels_do_not_collide(bundle):
    # every baseline named once in a legend outside the axes (matplotlib's
    # extents: the legend box and the axes box are disjoint), however many
    # constructions sit on one point
    from eidecomp.io import read_circuit

    _, meta = read_circuit(bundle)
    fig, ax, r = _drawn("error against J_EE density",
                        lambda ax: plotting.plot_error_density(
                            ax, meta["metrics"], meta["baselines"]))
    names = [t.get_text() for t in ax.get_legend().get_texts()]
    assert names == ["this circuit"] + [b["name"] for b in meta["baselines"]]
    assert not _overlaps(ax.get_legend().get_texts(), r)
    legend_box = ax.get_legend().get_window_extent(r)
    assert not legend_box.overlaps(ax.get_window_extent(r))
    assert not [t for t in ax.texts if t.get_text()]  # no labels in the plot
    assert legend_box.x1 <= fig.bbox.x1  # and inside the figure


def test_report_lam_path_is_certified_and_marks_stopped_solves(bundle):
    # every converged point of the report's path carries a certified gap at
    # most PATH_GAP_TOL (weak duality, Boyd & Vandenberghe 2004, section
    # 5.2, checked against Clarabel in tests/test_certificate.py), and the
    # page counts the points that stopped before it
    from eidecomp.params import PATH_GAP_TOL

    W = np.load(bundle.parent / "w.npy")
    points = report_lam_path(W)
    for p in points:
        if p.converged:
            assert p.duality_gap <= PATH_GAP_TOL or p.primal_residual <= 1e-8
    stopped = [type(p)(**{**p.as_dict(), "converged": False, "n_iter": 100})
               for p in points[:1]]
    from eidecomp.io import read_circuit

    c, meta = read_circuit(bundle)
    page = render_report(c, meta, W, path_points=points[1:] + stopped)
    n_stopped = 1 + sum(not q.converged for q in points[1:])
    assert f"{n_stopped} stopped before reaching that gap" in page
    assert "started from its neighbour&#x27;s solution" in page


def test_report_lam_path_is_warm_started():
    # the same points solved one at a time from cold starts take more ALM
    # steps in all than the path from one to the next (common practice for
    # regularisation paths, e.g. scikit-learn's lasso_path)
    from eidecomp import lambda_path
    from eidecomp.datasets import make_planted
    from eidecomp.params import PATH_GAP_TOL

    W, _, _ = make_planted(80, rank=4, corruption=0.1, seed=3)
    warm = report_lam_path(W)
    cold = [lambda_path(W, [p.lam], gap_tol=PATH_GAP_TOL)[0][0] for p in warm]
    assert [p.rank for p in warm] == [p.rank for p in cold]
    assert sum(p.n_iter for p in warm) < sum(p.n_iter for p in cold)


def test_lam_path_stops_where_the_split_has_broken_down(bundle):
    # past a solve whose L holds more than half of full rank, L takes most
    # of W (Candes et al. 2011: large lam leaves S empty and L = W); the
    # larger lams are not solved, and the page says which
    W = np.load(bundle.parent / "w.npy")
    points = report_lam_path(W)
    n = W.shape[0]
    assert all(p.rank <= n / 2 for p in points[:-1])
    if len(points) < PATH_LAMS:
        assert points[-1].rank > n / 2
    from eidecomp.io import read_circuit

    c, meta = read_circuit(bundle)
    broken = points[:3] + [type(points[0])(**{**points[0].as_dict(),
                                              "lam": points[3].lam,
                                              "rank": n - 1, "converged": True})]
    page = render_report(c, meta, W, path_points=broken)
    assert f"the {PATH_LAMS - 4} larger lam up to" in page
    assert f"L already has rank {n - 1} of {n} (the split has broken" in page


def test_a_missing_lam_path_is_explained():
    # common practice: a report says why a figure is missing, and how to
    # get it, rather than leaving it out silently
    from eidecomp.analysis.report import PATH_MAX_UNITS, _path_note

    big = np.zeros((PATH_MAX_UNITS + 1, PATH_MAX_UNITS + 1))
    assert report_lam_path(big) is None
    note = _path_note(None, big)
    assert f"left out above {PATH_MAX_UNITS} units" in note
    assert "eidecomp.lambda_path" in note


def test_report_and_circuit_carry_the_verdict_on_the_split(bundle):
    # a planted circuit's W_eff is low-rank (untuned pools) plus sparse
    # (J_EE and tuned pools with disjoint supports; eidecomp.datasets, built
    # as docs/assembly.md states): the verdict recorded in circuit.json fits,
    # and the page opens with its line and the certified gap (weak duality,
    # Boyd & Vandenberghe 2004, section 5.2)
    from eidecomp.io import read_circuit

    _, meta = read_circuit(bundle)
    verdict = meta["decomposition"]["verdict"]
    assert verdict["fits"] and verdict["line"].startswith(
        "W is low-rank plus sparse")
    assert meta["decomposition"]["duality_gap"] <= 1e-4
    page = (bundle / "report.html").read_text(encoding="utf-8")
    assert page.index("W is low-rank plus sparse") < page.index(
        "<h2>Inputs and parameters</h2>")
    assert "certified duality gap" in page


# --- error bars, bounds and colours (issue 30) -------------------------------

def _profiles_json(page):
    """The connection profiles as the page's Data section gives them."""
    m = re.search(r"connection profiles \(JSON\)</summary><pre>(.*?)</pre>",
                  page, re.S)
    return json.loads(html.unescape(m.group(1)))


def _profile_rows(page):
    """{class: cells} of the connection profiles table."""
    table = page[page.index(f"<h2>{PROFILES_TITLE}</h2>"):]
    table = table[:table.index("</table>")]
    rows = re.findall(r"<tr>(<td>.*?)</tr>", table)
    cells = [[html.unescape(c) for c in re.findall(r"<td>(.*?)</td>", r)]
             for r in rows]
    return {c[0]: c[1:] for c in cells}


def test_like_to_like_shows_its_bound_and_counts(tmp_path):
    # the demo's most selective classes connect no orthogonal pair: the
    # table shows ">= x", x the same-feature probability over the one-sided
    # 95 % upper Clopper-Pearson bound of 0/n (scipy.stats.binomtest,
    # alternative "less"), and the counts k/n of both bins
    from scipy import stats

    out = tmp_path / "demo"
    assert main(["demo", "-o", str(out), "-q"]) == 0
    page = (out / "report.html").read_text(encoding="utf-8")
    data, rows = _profiles_json(page), _profile_rows(page)
    bounded = [c for c, r in data.items() if r.get("like_to_like_bound")]
    assert bounded                      # the demo has such a class
    for cls, row in data.items():
        if "like_to_like_counts" not in row:
            continue
        k0, n0, k1, n1 = row["like_to_like_counts"]
        prof = row["feature_profile"]
        assert [k0, n0, k1, n1] == [prof["n_connected"][0], prof["n_pairs"][0],
                                    prof["n_connected"][-1], prof["n_pairs"][-1]]
        assert rows[cls][2] == f"{k0}/{n0}, {k1}/{n1}"
        if cls in bounded:
            assert k1 == 0 < k0
            upper = stats.binomtest(0, n1, alternative="less").proportion_ci(
                0.95, method="exact").high
            x = (k0 / n0) / upper
            assert row["like_to_like_bound"] == pytest.approx(x, rel=1e-9)
            assert rows[cls][1] == f">= {x:.3g}"
        assert rows[cls][1] != "-" or k0 == 0 or n1 == 0


def test_extrapolated_space_constant_is_marked_in_table_and_figure():
    # sigma 600 um on distances binned to 400 um: the fit is bounded
    # (the interval written out with scipy is narrow) but lies beyond the
    # binned distances; the table cell and the figure's legend say so
    from eidecomp.analysis.profiles import extrapolated_text
    from eidecomp.analysis.report import _sigma_text

    prof = _distance_profile(600.0, 200000, 400.0, seed=5)
    low, high = _scipy_interval(prof)
    assert high - low < 400.0 and low > 400.0
    fit = fit_space_constant(prof)
    assert (fit.ci_low, fit.ci_high) == pytest.approx((low, high), rel=5e-3)
    row = {"space_constant": fit.as_dict(), "distance_profile": prof.as_dict()}
    assert _sigma_text(row) == (f"{fit.sigma:.3g} [{fit.ci_low:.3g}, "
                                f"{fit.ci_high:.3g}], {extrapolated_text(400.0)}")
    fig, ax, _ = _drawn("E->E: distance", lambda ax: plotting.plot_profile(
        ax, row["distance_profile"], row["space_constant"]))
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert any(extrapolated_text(400.0) in t for t in labels)


def test_profile_figure_has_binomial_error_bars_from_zero():
    # every bin's bar spans scipy.stats.binomtest(k, n).proportion_ci's
    # exact (Clopper-Pearson) interval; the probability axis starts at 0
    from scipy import stats

    prof = _distance_profile(150.0, 40, 500.0, seed=6)
    _, ax, _ = _drawn("E->E: distance", lambda ax: plotting.plot_profile(
        ax, prof.as_dict(), fit_space_constant(prof).as_dict()))
    assert ax.get_ylim()[0] == 0.0
    bars = [c for c in ax.collections if len(c.get_segments()) == 25]
    assert len(bars) == 1
    for seg, k, n in zip(bars[0].get_segments(), prof.n_connected,
                         prof.n_pairs, strict=True):
        ref = stats.binomtest(int(k), int(n)).proportion_ci(0.95, method="exact")
        assert sorted(seg[:, 1]) == pytest.approx([ref.low, ref.high], abs=1e-9)


def _hue_is_red_or_blue(color):
    """Red (hue within 20 degrees of 0) or blue (200-250 degrees), by
    matplotlib's own conversion; greys (saturation < 0.25) are neither
    (common practice: the hue bands of the colour wheel)."""
    from matplotlib.colors import rgb_to_hsv, to_rgb

    h, s, _ = rgb_to_hsv(to_rgb(color))
    return s >= 0.25 and (h * 360 <= 20 or h * 360 >= 340
                          or 200 <= h * 360 <= 250)


def _artist_colors(ax):
    from matplotlib.colors import to_hex

    out = set()
    for line in ax.get_lines():
        out.add(to_hex(line.get_color()))
    for coll in ax.collections:
        for rgba in list(coll.get_facecolors()) + list(coll.get_edgecolors()):
            if rgba[3] > 0:
                out.add(to_hex(rgba))
    for patch in ax.patches:
        out.add(to_hex(patch.get_facecolor()))
    return out


def test_red_and_blue_mean_excitatory_and_inhibitory_alone(bundle):
    # the population colours are red (E) and blues (I); every other series
    # of every figure is drawn in SERIES_COLORS, none red or blue
    from eidecomp.graph import population_graph
    from eidecomp.io import read_circuit
    from eidecomp.types import EXCITATORY, TUNED, UNTUNED

    P_COL, SERIES = plotting.POPULATION_COLORS, plotting.SERIES_COLORS
    assert _hue_is_red_or_blue(P_COL[EXCITATORY])
    assert _hue_is_red_or_blue(P_COL[UNTUNED]) and _hue_is_red_or_blue(P_COL[TUNED])
    assert not any(_hue_is_red_or_blue(c) for c in SERIES)
    c, meta = read_circuit(bundle)
    prof = _distance_profile(100.0, 500, 500.0, seed=7)
    others = [
        ("spectrum", lambda ax: plotting.plot_spectrum(ax, [3.0, 2.0, 1e-3], 2)),
        ("lam path", lambda ax: plotting.plot_lambda_path(
            ax, report_lam_path(np.load(bundle.parent / "w.npy")), 0.09)),
        ("error against J_EE density", lambda ax: plotting.plot_error_density(
            ax, meta["metrics"], meta["baselines"])),
        ("E->E: distance", lambda ax: plotting.plot_profile(
            ax, prof.as_dict(), fit_space_constant(prof).as_dict())),
    ]
    for title, draw in others:
        _, ax, _ = _drawn(title, draw)
        axes = ax.figure.axes  # the lam path's twin axis too
        colors = set().union(*(_artist_colors(a) for a in axes))
        assert colors and colors <= set(SERIES), (title, colors)
    _, ax, _ = _drawn("population graph",
                      lambda ax: plotting.plot_population_graph(
                          ax, population_graph(c)))
    assert _artist_colors(ax) <= set(P_COL.values())
    _, ax, _ = _drawn("interneuron tuning", lambda ax: plotting.plot_tuning(
        ax, [0.5, 0.7], [0.1, 0.2]))
    assert _artist_colors(ax) == {P_COL[UNTUNED], P_COL[TUNED]}


def test_population_graph_edges_carry_probability_and_count(bundle):
    # each edge's label: its connection probability and the number of
    # connections, the nonzeros of the circuit's block (numpy)
    from eidecomp.graph import population_graph
    from eidecomp.io import read_circuit
    from eidecomp.types import BLOCKS

    c, _ = read_circuit(bundle)
    _, ax, r = _drawn("population graph",
                      lambda ax: plotting.plot_population_graph(
                          ax, population_graph(c)))
    texts = {t.get_text() for t in ax.texts}
    for b in BLOCKS:
        J = getattr(c, b.name)
        k = int(np.count_nonzero(J))
        if k:
            assert f"p {k / J.size:.2g}, n {k}" in texts, b.name
    assert "connection probability" in ax.get_title()


def test_coincident_constructions_are_drawn_apart():
    # three constructions at one point and one elsewhere: matplotlib's own
    # display positions of the markers (offsets through each collection's
    # transform) are at least a marker apart, and the far one is where its
    # data put it
    rows = [{"name": n, "ee_density": 0.05, "relative_error": 0.14}
            for n in ("nmf", "nmf@density")]
    rows.append({"name": "global", "ee_density": 0.99, "relative_error": 0.0})
    fig, ax, _ = _drawn("error against J_EE density",
                        lambda ax: plotting.plot_error_density(
                            ax, {"ee_density": 0.05, "relative_error": 0.14},
                            rows))
    shown = [c.get_offset_transform().transform(c.get_offsets())[0]
             for c in ax.collections]
    assert len(shown) == 4
    for a, b in combinations(shown[:3], 2):
        assert np.hypot(*(a - b)) >= 8.0   # pixels at the report's 90 dpi
    np.testing.assert_allclose(shown[3], ax.transData.transform((0.99, 0.0)))
    assert ax.get_legend().get_title().get_text()  # says they are spread
    markers = {c.get_paths()[0].vertices.tobytes() for c in ax.collections}
    assert len(markers) == 4                  # and each has its own shape


def test_lam_path_text_has_one_owner(bundle):
    # the report's text about the lam path figure is the one
    # docs/analysis.md holds, and README points there instead of repeating it
    from pathlib import Path

    from eidecomp.analysis.report import LAM_PATH_TEXT

    root = Path(__file__).resolve().parent.parent
    docs = " ".join((root / "docs" / "analysis.md").read_text().split())
    assert LAM_PATH_TEXT in docs
    readme = " ".join((root / "README.md").read_text().split())
    assert "log-spaced from a quarter" not in readme
    assert "cold-started" not in readme
    page = (bundle / "report.html").read_text(encoding="utf-8")
    assert page.count(html.escape(LAM_PATH_TEXT)) == 1
    page = render_report(*_tiny_circuit(), path_points=None)
    assert "lam path: not computed." in page
    assert html.escape(LAM_PATH_TEXT) not in page
