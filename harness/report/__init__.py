"""Reports: a certificate as a self-contained HTML page and its Markdown twin, with figures.

``write_report(cert, directory)`` writes into ``directory``:

- ``certificate.json``: the certificate itself;
- ``report.html``: one self-contained page (inline CSS, figures embedded as
  base64 PNG, no script, no network);
- ``summary.md``: the Markdown twin (same blocks, same numbers), linking
- ``figures/*.png``: the verdict grid, tail curves per metric, and one
  counterexample plot per failing claim.

Tail curves need every replica's value, which a certificate does not store:
the report replays each (adversary, T, n) group exactly from the recorded
seed (:mod:`harness.report.replay`; ``replay=False`` skips it, ``limit``
caps it) and checks the replay against the certificate. The figure
functions (:mod:`harness.report.figures`) work on plain arrays too: the
counterexample plots take a ``(T, n)`` losses array and a learner.
"""

from __future__ import annotations

from pathlib import Path

from ..errors import ConfigError
from . import figures
from .certificate import build
from .figures import (action_traces, counterexample_figure, leader_gaps, loss_strip, png_bytes, survival_plot,
                      verdict_grid)
from .html import render as render_html
from .markdown import render as render_markdown
from .replay import DEFAULT_LIMIT, replay_distributions, subjects, trace_replica

FIGURE_DIR = "figures"
_OURS = ("verdict-grid", "survival-", "counterexample-")


def write_report(cert, directory, *, learner=None, adversaries=None, replay: bool = True,
                 limit: int = DEFAULT_LIMIT, n_jobs: int = 1) -> dict:
    """Write the report of ``cert`` into ``directory`` (created if needed); returns the paths written.

    ``learner`` and ``adversaries`` (a list in battery order) are the objects
    that were certified; without them they are rebuilt from the
    certificate's specs when those are registered names (a certificate may
    come from anywhere: code named in it is never imported). What cannot be
    had leaves the tail curves or counterexamples out, with the reason;
    every cell is always there.
    """
    directory = Path(directory)
    try:
        directory.mkdir(parents=True, exist_ok=True)
        (directory / FIGURE_DIR).mkdir(exist_ok=True)
    except OSError as exc:
        raise ConfigError(f"--report {directory}: cannot create the directory ({exc.strerror}); "
                          f"choose a writable path") from None
    subs = subjects(cert, learner, adversaries)
    dists = replay_distributions(cert, subs, limit=limit, n_jobs=n_jobs) if replay else None
    paths = {"certificate": cert.save(directory / "certificate.json")}
    doc = build(cert, dists, subs, certificate_name="certificate.json")
    for old in (directory / FIGURE_DIR).glob("*.png"):
        if old.name.startswith(_OURS):  # stale figures of an earlier report in the same place
            old.unlink()
    for image in doc.images():
        (directory / FIGURE_DIR / f"{image.name}.png").write_bytes(image.png)
    paths["summary"] = directory / "summary.md"
    paths["summary"].write_text(render_markdown(doc, FIGURE_DIR), encoding="utf-8")
    paths["html"] = directory / "report.html"
    paths["html"].write_text(render_html(doc), encoding="utf-8")
    return paths


__all__ = ["write_report", "build", "render_html", "render_markdown", "replay_distributions", "trace_replica",
           "figures", "survival_plot", "verdict_grid", "loss_strip", "leader_gaps", "action_traces",
           "counterexample_figure", "png_bytes"]
