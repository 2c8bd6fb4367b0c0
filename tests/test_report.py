"""Figures, the HTML report and the demo.

References: headless Chromium (Debian's package) renders the report and
counts the figures that decoded (naturalWidth > 0); matplotlib draws every
figure on a Figure with the Agg renderer, and its text extents
(Text.get_window_extent) say whether labels overlap; scipy.optimize.curve_fit
gives the space constant's interval independently of eidecomp; the planted
circuit's tuned and untuned interneurons are compared as in the assembler
benchmark.
"""

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
    """The 95 % Wald interval of sigma, by scipy.optimize.curve_fit itself."""
    from scipy.optimize import curve_fit

    x, p, n = prof.centers, prof.probability, prof.n_pairs
    se = np.sqrt(np.maximum(p * (1 - p), 1.0 / n) / n)
    (_, sigma), cov = curve_fit(lambda d, a, s: a * np.exp(-d ** 2 / (2 * s ** 2)),
                                x, p, p0=(p.max(), x[len(x) // 2]), sigma=se,
                                absolute_sigma=True, maxfev=10000)
    half = 1.96 * np.sqrt(cov[1, 1])
    return abs(sigma) - half, abs(sigma) + half


def test_space_constant_wider_than_the_sheet_is_not_determined():
    # a 1 mm sheet with few pairs per bin and a true sigma near the sheet
    # size: scipy.optimize.curve_fit's own 95 % interval is wider than 1 mm
    # (like the 954 [273, 1640] um), and the report must not print
    # a number for it
    from eidecomp.analysis.report import _sigma_text

    prof = _distance_profile(900.0, 12, 1000.0, seed=3)
    low, high = _scipy_interval(prof)
    assert high - low > 1000.0
    fit = fit_space_constant(prof)
    assert (fit.ci_low, fit.ci_high) == pytest.approx((low, high), rel=1e-3)
    assert fit.status == "not determined"
    row = {"space_constant": fit.as_dict(), "distance_profile": prof.as_dict()}
    assert _sigma_text(row) == "not determined"


def test_space_constant_bounded_by_the_data_is_a_number():
    # sigma = 100 um, within the 85-114 um that Levy & Reyes 2012 (J Neurosci
    # 32:5609) fitted for all cell types in slices of mouse primary auditory
    # cortex, on many pairs: scipy's interval is narrow and the report shows
    # "sigma [low, high]" with the same numbers
    from eidecomp.analysis.report import _sigma_text

    prof = _distance_profile(100.0, 20000, 500.0, seed=4)
    low, high = _scipy_interval(prof)
    fit = fit_space_constant(prof)
    assert fit.status == "determined" and 85.0 <= fit.sigma <= 114.0
    row = {"space_constant": fit.as_dict(), "distance_profile": prof.as_dict()}
    assert _sigma_text(row) == f"{fit.sigma:.3g} [{low:.3g}, {high:.3g}]"


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
