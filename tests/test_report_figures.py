"""Figures: drawn without a display, non-empty, of the documented pixel size; their numbers checked
against scipy (empirical survival function, Kolmogorov-Smirnov distribution) and closed forms."""

import io
import math
import os
import subprocess
import sys

import numpy as np
import pytest
from PIL import Image
from scipy import stats

from harness.errors import ConfigError
from harness.learners import get as get_learner
from harness.report import figures
from harness.report.figures import DPI

from helpers import Fixed
from report_subjects import small_certificate


def _image(png: bytes) -> Image.Image:
    image = Image.open(io.BytesIO(png))
    assert image.format == "PNG"
    return image


def assert_drawn(png: bytes, width_in: float, height_in: float):
    """The PNG has the expected pixel size and is not blank: many non-white pixels, many colours."""
    image = _image(png)
    assert image.size == (round(width_in * DPI), round(height_in * DPI))
    rgb = np.asarray(image.convert("RGB"), dtype=int)
    ink = np.mean(rgb.sum(axis=2) < 700)
    assert ink > 0.02, f"only {ink:.1%} of the pixels are drawn"
    assert len(np.unique(rgb.reshape(-1, 3), axis=0)) >= 8


@pytest.fixture(scope="module")
def cert():
    return small_certificate()


def test_verdict_grid_size_and_content(cert):
    fig = figures.verdict_grid(cert)
    claims = len({c.claim_name for c in cert.cells})
    advs = len({c.adversary_index for c in cert.cells})
    cols = len({(c.horizon, c.n_actions) for c in cert.cells})
    # documented size: (2.6 + 1.45 columns) x (0.7 + claims (0.55 + 0.5 adversaries)) inches
    assert_drawn(figures.png_bytes(fig), 2.6 + 1.45 * cols, 0.7 + claims * (0.55 + 0.5 * advs))
    texts = [t.get_text() for ax in fig.axes for t in ax.texts]
    assert len(texts) == len(cert.cells)  # one label per cell
    for c in cert.cells:
        if c.kind == "high_probability":
            assert f"({c.violations}/{c.replicas})" in " ".join(texts)


def test_survival_grid_size(cert):
    values = np.random.default_rng(3).exponential(size=500)
    panels = {("a", "x"): (values, [{"name": "c", "bound": 2.0, "kind": "high_probability", "delta": 0.05,
                                     "verdict": "fail"}]),
              ("b", "x"): (values, [])}
    fig = figures.survival_grid(panels, ["a", "b"], ["x", "y"], "regret")
    # documented size: (0.6 + 2.6 columns) x (1.4 + 1.85 rows) inches; the missing panel says so
    assert_drawn(figures.png_bytes(fig), 0.6 + 2.6 * 2, 1.4 + 1.85 * 2)
    assert any(t.get_text() == "not replayed" for ax in fig.axes for t in ax.texts)


def test_survival_matches_scipy_ecdf():
    """P_N[X > x] at every sample point, with ties, equals scipy.stats.ecdf's survival function."""
    x = np.random.default_rng(5).integers(0, 12, size=300).astype(float)
    xs, s = figures.survival(x)
    expected = stats.ecdf(x).sf.evaluate(xs)
    np.testing.assert_allclose(s, expected, rtol=0, atol=1e-12)
    assert np.all(np.diff(s) <= 0) and s[-1] == 0


@pytest.mark.parametrize("n, confidence", [(20, 0.95), (200, 0.95), (1000, 0.99)])
def test_dkw_band_covers_at_its_level(n, confidence):
    """Massart (1990): P[sup |F_N - F| > eps] <= 2 exp(-2 N eps^2). Checked against the exact
    two-sided Kolmogorov-Smirnov distribution (scipy.stats.kstwo): the band's non-coverage is at most
    1 - confidence, and not wastefully so (at least a third of it)."""
    eps = figures.dkw_margin(n, confidence)
    miss = stats.kstwo.sf(eps, n)
    assert (1 - confidence) / 3 <= miss <= 1 - confidence


def test_play_sequence_matches_the_runner_on_a_fixed_sequence():
    """FTL is deterministic, so playing a fixed table by hand must give the runner's regret and switches."""
    from harness import run

    table = (np.random.default_rng(11).random((300, 3)) < 0.5).astype(float)
    actions, regret, switches = figures.play_sequence(table, get_learner("ftl"), replicas=3, seed=0)
    result = run(get_learner("ftl"), Fixed(table), 300, 3, replicas=3, seed=0)
    np.testing.assert_allclose(regret, result.regret)
    np.testing.assert_array_equal(switches, result.switches)
    leader = np.argmin(np.vstack([np.zeros(3), np.cumsum(table, axis=0)[:-1]]), axis=1)  # lowest index on ties
    np.testing.assert_array_equal(actions[:, 0], leader)


def test_counterexample_figure_size_and_panels():
    table = (np.random.default_rng(2).random((500, 4)) < 0.4).astype(float)
    fig = figures.counterexample_figure(table, get_learner("hedge"), replicas=3, seed=1,
                                        highlight=(np.zeros(500, dtype=int), "all zeros"))
    assert_drawn(figures.png_bytes(fig), 9.5, 6.0)
    titles = " ".join(ax.get_title(loc="left") for ax in fig.axes)
    assert "loss sequence" in titles and "leading actions" in titles and "action in each round" in titles
    trace_axis = next(ax for ax in fig.axes if "action in each round" in ax.get_title(loc="left"))
    assert [t.get_text() for t in trace_axis.get_yticklabels()][0] == "all zeros"
    assert len(trace_axis.get_yticklabels()) == 4


def test_long_sequences_are_binned_for_the_strip():
    table = np.random.default_rng(0).random((5000, 3))
    fig = figures.new_figure(6, 2)
    ax = fig.add_subplot()
    image = figures.loss_strip(ax, table, max_columns=800)
    k = math.ceil(5000 / 800)
    shown = np.asarray(image.get_array())
    assert shown.shape == (3, 5000 // k)
    np.testing.assert_allclose(shown[:, 0], table[:k].mean(axis=0))


@pytest.mark.parametrize("losses, text", [
    (np.zeros(10), "(T, n) array"),
    (np.full((10, 2), 1.5), "in [0, 1]"),
    (np.full((10, 2), np.nan), "in [0, 1]"),
])
def test_counterexample_plots_refuse_bad_losses(losses, text):
    with pytest.raises(ConfigError, match=text.replace("(", r"\(").replace(")", r"\)").replace("[", r"\[")):
        figures.counterexample_figure(losses, get_learner("hedge"))


def test_figures_are_drawn_without_a_display(tmp_path):
    """In a fresh interpreter with no DISPLAY and an interactive backend requested, figures still
    render (the Agg canvas is used directly; pyplot is never imported)."""
    code = ("import sys, numpy as np\n"
            "from harness.report import figures\n"
            "fig = figures.new_figure(3, 2); ax = fig.add_subplot()\n"
            "figures.survival_plot(ax, np.arange(50.0))\n"
            "png = figures.png_bytes(fig)\n"
            "assert 'matplotlib.pyplot' not in sys.modules\n"
            "print(len(png))\n")
    env = {k: v for k, v in os.environ.items() if k not in ("DISPLAY", "WAYLAND_DISPLAY")}
    env["MPLBACKEND"] = "TkAgg"
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, timeout=120)
    assert done.returncode == 0, done.stderr[-800:]
    assert int(done.stdout.strip()) > 1000
