"""Figures, the HTML report and the demo.

References: headless Chromium (Debian's package) renders the report and
counts the figures that decoded (naturalWidth > 0); matplotlib draws every
figure on a Figure with the Agg renderer; the planted circuit's tuned and
untuned interneurons are compared as in the assembler benchmark.
"""

import re
import subprocess

import numpy as np
import pytest
from conftest import require_browser

from eidecomp.analysis import plotting
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
    for section in ("Assembly against the baselines", "Connection rules",
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
        (plotting.plot_rule, (prof, {"sigma": 1.0, "p0": 0.5})),
        (plotting.plot_tuning, ([0.5, 0.7], [0.1, None])),
    ]
    for fn, args in calls:
        ax = Figure().subplots()
        assert fn(ax, *args) is ax
