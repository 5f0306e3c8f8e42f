"""Matplotlib figures for reports, drawn headless.

Every figure is built with the object-oriented API on an Agg canvas
(``matplotlib.figure.Figure``; pyplot is never imported), so nothing needs a
display and no global state changes. Sizes are fixed in inches at ``DPI``
(no tight bounding box), so a figure's pixel size is known in advance:
``round(width * DPI) x round(height * DPI)``.

- :func:`survival_plot` / :func:`survival_grid`: P[metric > x] on a log
  scale, with a DKW band, each claim's bound and its delta marked;
- :func:`verdict_grid`: adversary x (horizon, n) per claim, coloured by
  verdict, with the interval written in each cell;
- counterexample plots from a ``(T, n)`` losses array and a learner:
  :func:`loss_strip`, :func:`leader_gaps`, :func:`action_traces`, and
  :func:`counterexample_figure` which stacks the three.

:func:`png_bytes` renders a figure to a compact PNG (an adaptive 256-colour
palette: report figures are flat colours and lines, so this loses nothing
visible and keeps committed examples small).
"""

from __future__ import annotations

import io
import math

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.colors import ListedColormap
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch, Rectangle

from .. import validate
from ..errors import ConfigError
from ..protocol import read_only

DPI = 100
VERDICT_COLOURS = {"pass": "#2e7d32", "fail": "#c62828", "inconclusive": "#b7791f"}
VERDICT_FILLS = {"pass": "#d7ecd9", "fail": "#f8d3d3", "inconclusive": "#fbe9b7"}
ACTION_COLOURS = ["#4e79a7", "#f28e2b", "#59a14f", "#e15759", "#76b7b2", "#edc948", "#b07aa1", "#ff9da7",
                  "#9c755f", "#bab0ac"]
PALETTE_COLOURS = 48
METRIC_LABELS = {"regret": "regret", "switches": "switches", "cost_regret": "regret + cost x switches"}


def new_figure(width: float, height: float) -> Figure:
    """A figure of ``width`` x ``height`` inches on an Agg canvas."""
    fig = Figure(figsize=(width, height), dpi=DPI)
    FigureCanvasAgg(fig)
    return fig


def png_bytes(fig: Figure, palette: bool = True) -> bytes:
    """The figure as PNG bytes, at its own size; ``palette`` quantises to ``PALETTE_COLOURS`` colours."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=DPI, facecolor="white")
    if not palette:
        return buf.getvalue()
    from PIL import Image  # matplotlib's own dependency

    buf.seek(0)
    image = Image.open(buf).convert("RGB").quantize(colors=PALETTE_COLOURS, method=Image.Quantize.FASTOCTREE,
                                                    dither=Image.Dither.NONE)
    out = io.BytesIO()
    image.save(out, format="PNG", optimize=True)
    return out.getvalue()


# -- survival curves ----------------------------------------------------------------------


def dkw_margin(replicas: int, confidence: float = 0.95) -> float:
    """Half-width of the Dvoretzky-Kiefer-Wolfowitz band with Massart's constant:
    P[sup_x |F_N(x) - F(x)| > eps] <= 2 exp(-2 N eps^2), so eps = sqrt(ln(2/alpha) / (2N))
    covers the whole curve at once with probability >= 1 - alpha (Massart 1990, Ann. Probab.
    18:1269-1283)."""
    replicas = validate.positive_int("replicas", replicas)
    confidence = validate.real("confidence", confidence, low=0.0, high=1.0, low_open=True, high_open=True)
    return math.sqrt(math.log(2.0 / (1.0 - confidence)) / (2.0 * replicas))


def survival(values) -> tuple[np.ndarray, np.ndarray]:
    """Sorted values x_(1..N) and P_N[X > x] on [x_(i), x_(i+1)): (N - i) / N."""
    x = np.sort(np.asarray(values, dtype=float).ravel())
    if x.size == 0:
        raise ConfigError("values: give at least one value")
    n = x.size
    # with ties, P[X > x_(i)] counts values strictly above: use the last index of each tie
    above = n - np.searchsorted(x, x, side="right")
    return x, above / n


CLAIM_STYLES = ["--", "-.", (0, (1, 1.5)), (0, (6, 2, 1, 2, 1, 2)), (0, (8, 3))]
CLAIM_MARKERS = ["o", "s", "D", "^", "v"]


def _field(claim, key):
    return claim.get(key) if isinstance(claim, dict) else getattr(claim, key, None)


def survival_plot(ax, values, claims=(), metric: str = "regret", confidence: float = 0.95, title: str | None = None,
                  legend: bool = True, styles: dict | None = None):
    """Draw P[metric > x] (log scale) of ``values`` on ``ax``.

    ``claims`` are dicts (or objects) with ``name``, ``bound``, ``kind``,
    ``verdict`` and, for high-probability claims, ``delta``. Each bound is a
    vertical line coloured by its verdict (line style per claim, from
    ``styles`` {name: (linestyle, marker)} or in order); a high-probability
    claim also gets its delta as a dotted horizontal line and a marker at
    (bound, delta): the claim holds when the curve passes below that marker.
    An expectation claim gets a triangle at the sample mean on the top edge.
    The shaded band is the DKW band at ``confidence``.
    """
    x, s = survival(values)
    n = x.size
    floor = 0.5 / n
    eps = dkw_margin(n, confidence)
    visible = s > 0
    ax.fill_between(x, np.maximum(s - eps, floor), np.minimum(s + eps, 1.0), step="post", color="#d5dde2",
                    linewidth=0, label=f"{confidence:.0%} DKW band")
    ax.step(x[visible], s[visible], where="post", color="#263238", linewidth=1.2, label=f"observed ({n} replicas)")
    if visible.any() and not visible.all():  # the last step, at 1/N up to the largest value
        ax.plot([x[visible][-1], x[-1]], [s[visible][-1], s[visible][-1]], color="#263238", linewidth=1.2)
    ax.set_yscale("log")
    ax.set_ylim(floor, 1.3)
    lo, hi = float(x[0]), float(x[-1])
    styles = dict(styles or {})
    for k, c in enumerate(claims):
        name, bound, kind = _field(c, "name"), _field(c, "bound"), _field(c, "kind")
        colour = VERDICT_COLOURS.get(_field(c, "verdict") or "inconclusive", "#555555")
        line, marker = styles.get(name, (CLAIM_STYLES[k % len(CLAIM_STYLES)], CLAIM_MARKERS[k % len(CLAIM_MARKERS)]))
        ax.axvline(bound, color=colour, linestyle=line, linewidth=1.3, label=name)
        lo, hi = min(lo, bound), max(hi, bound)
        delta = _field(c, "delta")
        if kind == "high_probability" and delta:
            ax.axhline(delta, color=colour, linestyle=":", linewidth=0.9)
            ax.plot([bound], [delta], marker=marker, markersize=5, color=colour, markeredgecolor="white",
                    linestyle="none")
        if kind == "expectation":
            ax.plot([float(np.mean(x))], [1.0], marker="v", markersize=6, color=colour, clip_on=False,
                    transform=ax.get_xaxis_transform(), linestyle="none")
    pad = 0.04 * (hi - lo) if hi > lo else 1.0
    ax.set_xlim(lo - pad, hi + pad)
    ax.set_xlabel(METRIC_LABELS.get(metric, metric) + " x", fontsize=8)
    ax.set_ylabel(f"P[{metric} > x]", fontsize=8)
    ax.tick_params(labelsize=7)
    ax.grid(True, which="major", color="#eceff1", linewidth=0.6)
    if title:
        ax.set_title(title, fontsize=8)
    if legend:
        ax.legend(fontsize=6.5, loc="lower left", frameon=False)
    return ax


def survival_grid(panels, rows: list, columns: list, metric: str, confidence: float = 0.95,
                  panel_size=(2.6, 1.85)) -> Figure:
    """Small multiples of :func:`survival_plot`, one legend for the figure.

    ``panels`` maps (row label, column label) to (values, claims); missing
    panels say so. Size: (0.6 + panel_w * columns) x (1.4 + panel_h * rows)
    inches.
    """
    w, h = panel_size
    fig = new_figure(0.6 + w * len(columns), 1.4 + h * len(rows))
    axes = fig.subplots(len(rows), len(columns), squeeze=False)
    styles, marked = {}, set()
    for _, claims in panels.values():
        for c in claims:
            k = len(styles)
            styles.setdefault(_field(c, "name"), (CLAIM_STYLES[k % len(CLAIM_STYLES)],
                                                  CLAIM_MARKERS[k % len(CLAIM_MARKERS)]))
            if _field(c, "kind") == "high_probability":
                marked.add(_field(c, "name"))
    for i, r in enumerate(rows):
        for j, c in enumerate(columns):
            ax = axes[i][j]
            if (r, c) not in panels:
                ax.set_axis_off()
                ax.text(0.5, 0.5, "not replayed", ha="center", va="center", fontsize=8, color="#78909c",
                        transform=ax.transAxes)
                continue
            values, claims = panels[(r, c)]
            survival_plot(ax, values, claims, metric=metric, confidence=confidence, title=f"{_short(r, 40)}, {c}",
                          legend=False, styles=styles)
            if j:
                ax.set_ylabel("")
            if i < len(rows) - 1:
                ax.set_xlabel("")
    top = 1 - 0.3 / fig.get_figheight()
    basics = [Line2D([], [], color="#263238", linewidth=1.2, label="observed"),
              Patch(facecolor="#d5dde2", label=f"{confidence:.0%} DKW band")]
    says = {"pass": "bound of a passing claim", "fail": "of a failing claim", "inconclusive": "of an inconclusive one"}
    basics += [Patch(facecolor=VERDICT_COLOURS[v], label=says[v]) for v in VERDICT_COLOURS]
    fig.legend(handles=basics, loc="upper center", ncol=len(basics), fontsize=7, frameon=False,
               bbox_to_anchor=(0.5, top))
    if styles:
        lines = [Line2D([], [], color="#546e7a", linestyle=line, marker=marker if name in marked else None,
                        markersize=4, label=name) for name, (line, marker) in styles.items()]
        fig.legend(handles=lines, loc="upper center", ncol=min(len(lines), 5), fontsize=7, frameon=False,
                   bbox_to_anchor=(0.5, top - 0.22 / fig.get_figheight()), title="claims (line style)",
                   title_fontsize=7)
    fig.suptitle(f"P[{metric} > x] per (adversary, T, n). Vertical line: a claim's bound, coloured by its verdict; "
                 f"dotted: its delta", fontsize=9, y=1 - 0.05 / fig.get_figheight(), va="top")
    fig.subplots_adjust(left=0.6 / fig.get_figwidth(), right=0.985, top=1 - 1.15 / fig.get_figheight(),
                        bottom=0.45 / fig.get_figheight(), hspace=0.5, wspace=0.22)
    return fig


# -- verdict grid ----------------------------------------------------------------------------


def _cell_text(cell) -> str:
    if cell.kind == "expectation":
        return f"mean {_g(cell.mean)} (bound {_g(cell.bound)})\n[{_g(cell.mean_low)}, {_g(cell.mean_high)}]"
    if cell.kind == "always":
        if cell.violations:
            worst = max((r["value"] for r in cell.replay), default=None)
            return (f"{cell.violations} of {cell.replicas} over bound\n"
                    + (f"{_g(worst)} > {_g(cell.bound)}" if worst is not None else ""))
        return f"0 of {cell.replicas} over bound\nrate <= {_g(cell.ci_high)}"
    return f"rate {_g(cell.rate)} ({cell.violations}/{cell.replicas})\n[{_g(cell.ci_low)}, {_g(cell.ci_high)}]"


def _g(x) -> str:
    return "-" if x is None else f"{x:.4g}"


def verdict_grid(cert, column_width: float = 1.45, row_height: float = 0.5) -> Figure:
    """Verdicts of every cell: one panel per claim, adversaries down, (T, n) across.

    Each cell is coloured by its verdict and shows the observed violation
    rate (or mean, for expectation claims) and its interval. Size:
    (2.6 + column_width * columns) x (0.7 + sum over claims of (0.55 +
    row_height * adversaries)) inches.
    """
    claims = [spec["name"] for spec in cert.claims]
    labels = {c.adversary_index: c.adversary_label for c in cert.cells}
    advs = [(a, labels.get(a) or spec.get("label") or spec.get("name") or "?")
            for a, spec in enumerate(cert.adversaries)]
    cols = sorted({(c.horizon, c.n_actions) for c in cert.cells})
    panel_h = [0.55 + row_height * len(advs) for _ in claims]
    width = 2.6 + column_width * len(cols)
    height = 0.7 + sum(panel_h)
    fig = new_figure(width, height)
    by_key = {(c.claim_name, c.adversary_index, c.horizon, c.n_actions): c for c in cert.cells}
    skipped = {(r["claim_name"], r["adversary_label"]) for r in getattr(cert, "not_applicable", ())}
    top = 1 - 0.45 / height
    for k, claim in enumerate(claims):
        ph = panel_h[k] / height
        bottom = top - ph
        ax = fig.add_axes([2.5 / width, bottom + 0.05 / height, column_width * len(cols) / width,
                           (panel_h[k] - 0.45) / height])
        ax.set_xlim(0, len(cols))
        ax.set_ylim(len(advs), 0)
        for i, (a, label) in enumerate(advs):
            for j, (T, n) in enumerate(cols):
                cell = by_key.get((claim, a, T, n))
                if cell is None:
                    if (claim, label) in skipped:
                        ax.add_patch(Rectangle((j, i), 1, 1, facecolor="#eceff1", edgecolor="white", linewidth=2))
                        ax.text(j + 0.5, i + 0.5, "not judged\n(oblivious-only claim)", ha="center", va="center",
                                fontsize=6.5, color="#78909c")
                    continue
                ax.add_patch(Rectangle((j, i), 1, 1, facecolor=VERDICT_FILLS[cell.verdict], edgecolor="white",
                                       linewidth=2))
                ax.text(j + 0.5, i + 0.5, _cell_text(cell), ha="center", va="center", fontsize=7,
                        color=VERDICT_COLOURS[cell.verdict], linespacing=1.15)
        ax.set_xticks([j + 0.5 for j in range(len(cols))])
        ax.set_xticklabels([f"T={T}, n={n}" for T, n in cols], fontsize=7)
        ax.xaxis.tick_top()
        ax.set_yticks([i + 0.5 for i in range(len(advs))])
        ax.set_yticklabels([_short(label, 34) for _, label in advs], fontsize=7.5)
        ax.tick_params(length=0)
        for side in ax.spines.values():
            side.set_visible(False)
        first = next((c for c in cert.cells if c.claim_name == claim), None)
        fig.text(0.1 / width, bottom + ph - 0.08 / height,
                 f"claim {_short(claim, 60)}" + (f": {claim_kind(first)}" if first else ": not judged anywhere"),
                 fontsize=8.5, fontweight="bold", va="top")
        top = bottom
    handles = [Patch(facecolor=VERDICT_FILLS[v], edgecolor=VERDICT_COLOURS[v], label=v) for v in VERDICT_FILLS]
    fig.legend(handles=handles, loc="upper right", ncol=3, fontsize=7.5, frameon=False,
               bbox_to_anchor=(1 - 0.1 / width, 1 - 0.05 / height))
    fig.text(0.1 / width, 1 - 0.12 / height, "Verdict of every cell (rate or mean, with its family-wise interval)",
             fontsize=9, va="top")
    return fig


def claim_kind(cell) -> str:
    """What a cell's claim says, e.g. ``P[regret > bound] <= 0.05``."""
    if cell.kind == "high_probability":
        return f"P[{cell.metric} > bound] <= {cell.delta:g}"
    return f"E[{cell.metric}] <= bound" if cell.kind == "expectation" else f"{cell.metric} <= bound always"


def _short(text: str, limit: int) -> str:
    return text if len(text) <= limit else text[:limit - 1] + "…"


# -- counterexamples ---------------------------------------------------------------------------


def _check_losses(losses) -> np.ndarray:
    arr = np.asarray(losses, dtype=float)
    if arr.ndim != 2 or arr.shape[0] < 1 or arr.shape[1] < 2:
        raise ConfigError(f"losses: must be a (T, n) array with n >= 2, got shape {arr.shape}")
    if not np.all(np.isfinite(arr)) or arr.min() < 0 or arr.max() > 1:
        raise ConfigError("losses: every entry must be a number in [0, 1]")
    return arr


def _bins(T: int, limit: int) -> int:
    return max(1, math.ceil(T / limit))


def loss_strip(ax, losses, max_columns: int = 800):
    """The loss sequence as a heat strip: actions down, rounds across (mean over bins of rounds
    when T exceeds ``max_columns``)."""
    arr = _check_losses(losses)
    T, n = arr.shape
    k = _bins(T, max_columns)
    cut = (T // k) * k
    shown = arr[:cut].reshape(-1, k, n).mean(axis=1) if k > 1 else arr
    image = ax.imshow(shown.T, aspect="auto", interpolation="nearest", cmap="magma_r", vmin=0, vmax=1,
                      extent=(0, cut, n - 0.5, -0.5))
    ax.set_yticks(range(n) if n <= 12 else np.linspace(0, n - 1, 6).astype(int))
    ax.set_ylabel("action", fontsize=8)
    ax.set_title("loss sequence" + (f" (mean over bins of {k} rounds)" if k > 1 else ""), fontsize=8, loc="left")
    ax.tick_params(labelsize=7)
    return image


def leader_gaps(ax, losses, leaders: int = 3, max_points: int = 2000):
    """Cumulative-loss gaps L_i(t) - min_j L_j(t) of the ``leaders`` actions with the smallest
    final totals: where a gap touches zero that action leads; crossings are leader changes."""
    arr = _check_losses(losses)
    T, n = arr.shape
    cum = np.cumsum(arr, axis=0)
    gaps = cum - cum.min(axis=1, keepdims=True)
    order = np.argsort(cum[-1], kind="stable")[:min(leaders, n)]
    stride = _bins(T, max_points)
    t = np.arange(1, T + 1)[::stride]
    for i in order:
        ax.plot(t, gaps[::stride, i], linewidth=1.1, color=ACTION_COLOURS[i % len(ACTION_COLOURS)],
                label=f"action {i} (total {cum[-1, i]:.4g})")
    ax.set_ylabel("gap to leader", fontsize=8)
    ax.set_title(f"cumulative-loss gaps of the {len(order)} leading actions", fontsize=8, loc="left")
    ax.legend(fontsize=6.5, loc="upper left", frameon=False, ncol=min(3, len(order)))
    ax.tick_params(labelsize=7)
    ax.grid(True, color="#eceff1", linewidth=0.6)
    return ax


def play_sequence(losses, learner, replicas: int = 4, seed: int = 0):
    """The learner's actions on a fixed sequence, shared by ``replicas`` replicas: (T, replicas),
    with each replica's regret and switches. The learner object is copied, never changed."""
    import copy

    arr = _check_losses(losses)
    replicas = validate.positive_int("replicas", replicas)
    seed = validate.nonneg_int("seed", seed)
    T, n = arr.shape
    live = copy.deepcopy(learner)
    live.reset(n, T, replicas, np.random.default_rng(np.random.SeedSequence(seed)))
    live._protocol_replicas = replicas
    actions = np.asarray(live.play_block(read_only(arr)), dtype=np.int64)
    if actions.shape != (T, replicas) or actions.min() < 0 or actions.max() >= n:
        raise ConfigError(f"learner: returned actions of shape {actions.shape} or out of range on the sequence")
    played = arr[np.arange(T)[:, None], actions].sum(axis=0)
    regret = played - arr.sum(axis=0).min()
    switches = np.count_nonzero(actions[1:] != actions[:-1], axis=0)
    return actions, regret, switches


def action_traces(ax, actions, n_actions: int, labels=None, max_columns: int = 800):
    """Each replica's action over time as a coloured strip (one row per replica)."""
    actions = np.asarray(actions)
    T, replicas = actions.shape
    k = _bins(T, max_columns)
    shown = actions[::k].T
    cmap = ListedColormap([ACTION_COLOURS[i % len(ACTION_COLOURS)] for i in range(n_actions)])
    ax.imshow(shown, aspect="auto", interpolation="nearest", cmap=cmap, vmin=-0.5, vmax=n_actions - 0.5,
              extent=(0, T, replicas - 0.5, -0.5))
    ax.set_yticks(range(replicas))
    ax.set_yticklabels(labels if labels is not None else [f"replica {r}" for r in range(replicas)], fontsize=6.5)
    ax.set_title("the learner's action in each round (colour = action)" + (f"; one round in {k} shown" if k > 1 else ""),
                 fontsize=8, loc="left")
    ax.tick_params(labelsize=7)
    return ax


def counterexample_figure(losses, learner, replicas: int = 4, seed: int = 0, title: str | None = None,
                          highlight=None, size=(9.5, 6.0)) -> Figure:
    """Three stacked panels for a (T, n) loss sequence: heat strip, leader gaps, action traces.

    The learner plays the sequence ``replicas`` times (one shared sequence,
    fresh randomness per replica, from ``seed``). ``highlight`` optionally
    adds a first trace row: ``(actions (T,), label)``, e.g. the recorded
    replica that violated a claim. Size: ``size`` inches (default 9.5 x 6).
    """
    arr = _check_losses(losses)
    T, n = arr.shape
    actions, regret, switches = play_sequence(arr, learner, replicas, seed)
    labels = [f"replay {r}: regret {regret[r]:.4g}, {switches[r]} sw." for r in range(replicas)]
    if highlight is not None:
        trace, label = highlight
        trace = np.asarray(trace, dtype=np.int64).reshape(T, 1)
        actions = np.concatenate([trace, actions], axis=1)
        labels = [label] + labels
    fig = new_figure(*size)
    grid = fig.add_gridspec(3, 2, height_ratios=[1.0, 1.2, 0.35 + 0.14 * actions.shape[1]], width_ratios=[60, 1],
                            hspace=0.45, wspace=0.02)
    ax1 = fig.add_subplot(grid[0, 0])
    image = loss_strip(ax1, arr)
    bar = fig.colorbar(image, cax=fig.add_subplot(grid[0, 1]))
    bar.set_label("loss", fontsize=7)
    bar.ax.tick_params(labelsize=6)
    ax2 = fig.add_subplot(grid[1, 0], sharex=ax1)
    leader_gaps(ax2, arr)
    ax3 = fig.add_subplot(grid[2, 0], sharex=ax1)
    action_traces(ax3, actions, n, labels)
    ax3.set_xlabel("round", fontsize=8)
    ax1.set_xlim(0, T)
    name = getattr(learner, "registry_name", None) or type(learner).__name__
    fig.suptitle(title or f"{name} on a {T}-round, {n}-action sequence", fontsize=9.5, x=0.02, ha="left")
    fig.subplots_adjust(left=0.2, right=0.95, top=0.91, bottom=0.08)
    return fig


__all__ = ["DPI", "new_figure", "png_bytes", "dkw_margin", "survival", "survival_plot", "survival_grid",
           "verdict_grid", "loss_strip", "leader_gaps", "play_sequence", "action_traces", "counterexample_figure"]
