"""Build the report of a certificate as a :class:`~harness.report.document.Document`."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from ..certify import adversary_label
from ..errors import BoundbreakerError
from . import figures
from .document import Bullets, Callout, Code, Document, Heading, Image, Paragraph, Table
from .replay import Distributions, Subjects, trace_cell

MAX_TRACE_ENTRIES = 5_000_000   # T * n of a counterexample sequence held in memory for its plot
TRACE_REPLICAS = 4              # fresh replays drawn under the recorded one



def num(x) -> str:
    """Numbers as the report prints them: 4 significant digits; '-' for none."""
    if x is None:
        return "-"
    if isinstance(x, (int, np.integer)) and not isinstance(x, bool):
        return str(int(x))
    return f"{x:.4g}"


def interval(lo, hi) -> str:
    return "-" if lo is None or hi is None else f"[{num(lo)}, {num(hi)}]"


def sequence_text(cell) -> str:
    if cell.adaptive:
        return "adaptive (responds to each replica's play)"
    return "one sequence shared by all replicas" if cell.shared_sequence else "one sequence per replica"


def build(cert, dists: Distributions | None, subs: Subjects, certificate_name: str = "certificate.json") -> Document:
    name = cert.campaign.get("name") or "certification"
    counts = cert.counts
    doc = Document(title=f"{name}: {cert.verdict}", verdict=cert.verdict)
    caution = cert.statement if "proof" in cert.statement else (
        f"{cert.statement} A pass is evidence on this battery, not a proof.")
    doc.add(Callout(caution, "caution"))
    verdict_line = {"pass": "every cell passed", "fail": f"{counts['fail']} of {len(cert.cells)} cells failed",
                    "inconclusive": f"{counts['inconclusive']} cells were inconclusive and none failed"}
    doc.add(Callout(f"Verdict: {cert.verdict.upper()} ({verdict_line[cert.verdict]}; {counts['pass']} pass, "
                    f"{counts['fail']} fail, {counts['inconclusive']} inconclusive).", cert.verdict))
    doc.add(Bullets((
        f"learner: `{adversary_label(cert.learner)}`",
        f"cells: {len(cert.cells)} ({len(cert.adversaries)} adversaries, {len(cert.horizons)} horizons, "
        f"{len(cert.n_actions)} action counts, {len(cert.claims)} claims"
        + (f"; {len(cert.not_applicable)} (adversary, claim) pairs not judged)" if getattr(cert, "not_applicable", ())
           else ")"),
        f"confidence: {cert.confidence:g} family-wise ({cert.multiplicity}: {cert.cell_confidence:.6g} per cell)",
        f"seed: {cert.seed}; max replicas per cell: {cert.max_replicas}; chunk: {cert.chunk}; switching cost: "
        f"{cert.switching_cost:g}",
        f"campaign: {_campaign_text(cert)}; digest `{cert.digest[:16]}`",
        f"created {cert.created}; certification wall time {cert.wall_time_s:.1f} s",
    )))
    _battery(doc, cert)
    doc.add(Heading("Verdicts at a glance", anchor="grid"))
    doc.add(Image("verdict-grid", "Every cell's verdict: one panel per claim, adversaries down, (T, n) across; each "
                  "cell shows the observed violation rate (or the mean, for expectation claims) and its interval.",
                  figures.png_bytes(figures.verdict_grid(cert)), alt="verdict grid"))
    _cells(doc, cert)
    _failures(doc, cert)
    _tails(doc, cert, dists)
    _not_judged(doc, cert)
    _counterexamples(doc, cert, subs)
    _own_claims(doc, cert, subs.learner)
    _method(doc, cert)
    _replay(doc, cert, certificate_name)
    return doc


def _is_demo(path) -> bool:
    from ..config import demo_path

    try:
        return Path(path).resolve() == demo_path().resolve()
    except OSError:
        return False


def _campaign_text(cert) -> str:
    path = cert.campaign.get("path")
    if not path:
        return "(built in Python)"
    return f"the bundled demo (`boundbreaker certify --demo`, {Path(path).name})" if _is_demo(path) else path


def _battery(doc, cert):
    doc.add(Heading("Battery", anchor="battery"))
    rows, seen = [], set()
    for c in cert.cells:
        if c.adversary_index in seen:
            continue
        seen.add(c.adversary_index)
        rows.append((c.adversary_label, f"`{adversary_label(c.adversary)}`", sequence_text(c)))
    doc.add(Table(("adversary", "spec", "sequences"), tuple(rows)))
    claims = []
    for spec in cert.claims:
        kind = spec["kind"] + (f" (delta {spec['delta']:g})" if spec["kind"] == "high_probability" else "")
        claims.append((spec["name"], spec["metric"], kind, f"`{spec['bound']}`", spec.get("source") or "-"))
    doc.add(Table(("claim", "metric", "kind", "bound", "source"), tuple(claims)))
    doc.add(Paragraph(f"Horizons T: {', '.join(map(str, cert.horizons))}. Numbers of actions n: "
                      f"{', '.join(map(str, cert.n_actions))}."))


CELL_HEAD = ("#", "adversary", "T", "n", "claim", "kind", "bound", "replicas", "violations", "observed",
             "interval", "verdict", "seed")


def cell_row(c) -> tuple:
    if c.kind == "expectation":
        observed, ci = f"mean {num(c.mean)}", interval(c.mean_low, c.mean_high)
    else:
        observed, ci = f"rate {num(c.rate)}", interval(c.ci_low, c.ci_high)
    return (str(c.index), c.adversary_label, str(c.horizon), str(c.n_actions), c.claim_name, figures.claim_kind(c),
            num(c.bound), str(c.replicas), str(c.violations), observed, ci, c.verdict, str(c.seed))


def _cells(doc, cert):
    doc.add(Heading("Every cell", anchor="cells"))
    doc.add(Paragraph("`replicas` is how many replicas the verdict rests on (sampling stops as soon as the "
                      "anytime-valid interval decides); `violations` counts those above the bound; the interval "
                      f"is family-wise at {cert.confidence:g} (rate for per-replica claims, mean for expectation "
                      "claims); `seed` is the group seed that replays the cell."))
    doc.add(Table(CELL_HEAD, tuple(cell_row(c) for c in cert.cells),
                  row_ids=tuple(f"cell-{c.index}" for c in cert.cells),
                  row_classes=tuple(c.verdict for c in cert.cells), numeric=(0, 2, 3, 6, 7, 8, 12),
                  verdict_column=11))


def _failures(doc, cert):
    fails = cert.failures()
    if not fails:
        return
    doc.add(Heading("Failing cells and how to replay them", anchor="failures"))
    doc.add(Paragraph("Each line names a recorded violating replica (for expectation claims, the largest value) "
                      "and the call that replays its chunk alone; the replica is the given row of the result."))
    items = []
    for c in fails:
        items.append(f"cell {c.index}, {c.where}: {c.summary()}. "
                     + (f"Replay `{c.replay_hint()}`" if c.replay else "No replica recorded."))
    doc.add(Bullets(tuple(items)))


def _metrics(cert) -> list:
    claimed = {c.metric for c in cert.cells}
    return ["regret", "switches"] + (["cost_regret"] if "cost_regret" in claimed else [])


def _tails(doc, cert, dists):
    doc.add(Heading("Tails", anchor="tails"))
    if dists is None:
        doc.add(Paragraph("Tail curves were not drawn: the report was written without replay "
                          "(`--no-replay`). The certificate stores summaries per cell, not every replica."))
        return
    if dists.skipped:
        doc.add(Callout(f"Tail curves were not drawn: {dists.skipped}. Pass the objects that were certified "
                        "(`boundbreaker report --learner`; `learner=`, `adversaries=` in Python).", "warning"))
        return
    doc.add(Paragraph(dists.method + _limit_text(cert, dists)))
    for note in dists.notes:
        doc.add(Callout(note[:1].upper() + note[1:] + ".", "warning"))
    if dists.problems:
        doc.add(Callout("The replay does not reproduce the certificate exactly, so these curves may not be the "
                        "replicas the verdicts rest on: " + "; ".join(dists.problems[:6])
                        + (f"; and {len(dists.problems) - 6} more" if len(dists.problems) > 6 else ""), "warning"))
    else:
        doc.add(Paragraph("Check passed: every replayed cell gives the certificate's violation count and every "
                          "recorded replica its recorded value."))
    rows = list(dict.fromkeys(c.adversary_label for c in cert.cells))
    cols = [f"T={T}, n={n}" for T, n in sorted({(c.horizon, c.n_actions) for c in cert.cells})]
    for metric in _metrics(cert):
        panels = {}
        for c in cert.cells:
            g = dists.group(c)
            if g is None:
                continue
            key = (c.adversary_label, f"T={c.horizon}, n={c.n_actions}")
            values, claims = panels.setdefault(key, (g.values(metric), []))
            if c.metric == metric:
                claims.append({"name": c.claim_name, "bound": c.bound, "kind": c.kind, "delta": c.delta,
                               "verdict": c.verdict})
        fig = figures.survival_grid(panels, rows, cols, metric, confidence=0.95)
        doc.add(Image(f"survival-{metric.replace('_', '-')}",
                      f"P[{metric} > x] (log scale) of every replayed replica in each (adversary, T, n) group, with "
                      f"a 95% DKW band (Massart 1990). Vertical lines mark each claim's bound (line style per claim, "
                      f"see the legend), coloured by its verdict; a dotted horizontal line marks a high-probability "
                      f"claim's delta, which holds when the curve passes below the marker at (bound, delta); a "
                      f"triangle on the top edge marks the sample mean, for expectation claims.",
                      figures.png_bytes(fig), alt=f"survival curves of {metric}"))


def _limit_text(cert, dists) -> str:
    cut = [g for g in dists.groups.values() if g.replicas < g.replicas_run]
    if not cut:
        return " Every group was replayed in full."
    return (f" Groups that played more than {dists.limit} replicas were replayed on their first whole chunks "
            f"({len(cut)} of {len(dists.groups)} groups; still exactly the first replicas certification played).")


def _not_judged(doc, cert):
    rows = getattr(cert, "not_applicable", ())
    if not rows:
        return
    doc.add(Heading("Not judged", anchor="not-judged"))
    doc.add(Paragraph("These claims are made for oblivious adversaries only, so they were not judged on these "
                      "adaptive adversaries (no cell, no verdict):"))
    doc.add(Bullets(tuple(f"claim `{r['claim_name']}` on {r['adversary_label']}: {r['reason']}" for r in rows)))


def _counterexamples(doc, cert, subs):
    picked, seen = [], set()
    for c in cert.failures():
        if c.claim_name not in seen and c.replay and c.kind != "expectation":
            seen.add(c.claim_name)
            picked.append(c)
    if not picked:
        return
    doc.add(Heading("Counterexamples", anchor="counterexamples"))
    learner = subs.learner
    if learner is None:
        doc.add(Callout(f"Counterexample plots were not drawn: {subs.learner_problem}. Pass the learner "
                        "(`boundbreaker report --learner`, or `learner=` in Python).", "warning"))
        return
    doc.add(Paragraph("For each failing claim, the first recorded violating replica is replayed exactly (its loss "
                      "sequence and its actions are recorded as it plays). Under it, the learner plays that same "
                      f"sequence {TRACE_REPLICAS} more times with fresh randomness (seed 0), which shows whether the "
                      "violation is the sequence's doing or the draw's."))
    for c in picked:
        if c.horizon * c.n_actions > MAX_TRACE_ENTRIES:
            doc.add(Paragraph(f"cell {c.index}: T x n = {c.horizon * c.n_actions} is too large to plot here; "
                              f"replay it with `{c.replay_hint()}`."))
            continue
        adversary = subs.adversaries.get(c.adversary_index)
        if adversary is None:
            doc.add(Callout(f"cell {c.index}: {subs.adversary_problems[c.adversary_index]}; no plot.", "warning"))
            continue
        try:
            trace = trace_cell(c, learner, adversary)
        except BoundbreakerError as exc:
            doc.add(Callout(f"cell {c.index}: the recorded replica could not be replayed: {exc}", "warning"))
            continue
        r = c.replay[0]
        label = f"recorded replica {r['replica']}: {c.metric} {trace.regret if c.metric == 'regret' else trace.switches:.4g}"
        fig = figures.counterexample_figure(trace.losses, learner, replicas=TRACE_REPLICAS, seed=0,
                                            highlight=(trace.actions, label),
                                            title=f"cell {c.index}: claim {c.claim_name!r} on {c.adversary_label}, "
                                                  f"T={c.horizon}, n={c.n_actions} (bound {num(c.bound)})")
        doc.add(Image(f"counterexample-cell-{c.index}",
                      f"Cell {c.index} ({c.claim_name}): the loss sequence of recorded replica {r['replica']} "
                      f"({sequence_text(c)}), the cumulative-loss gaps of its leading actions, and the actions "
                      f"played: the recorded replica first (its {c.metric} {num(r['value'])} exceeds the bound "
                      f"{num(c.bound)}), then {TRACE_REPLICAS} fresh replays on the same sequence.",
                      figures.png_bytes(fig), alt=f"counterexample for cell {c.index}"))


def _own_claims(doc, cert, learner):
    claims = tuple(getattr(learner, "claims", ()) or ()) if learner is not None else ()
    if not claims:
        return
    doc.add(Heading("The learner's own claims", anchor="learner-claims"))
    judged = {c.claim_name for c in cert.cells}
    doc.add(Paragraph(f"`{adversary_label(cert.learner)}` carries {len(claims)} claim(s) of its own. The bound is "
                      f"evaluated at every (T, n) of this battery; 'judged here' gives the verdicts of the cells "
                      f"that judged the claim in this certificate."))
    rows = []
    for claim in claims:
        spec = claim.spec()
        at = "; ".join(f"T={T}, n={n}: {num(_safe_bound(claim, T, n))}" for T in cert.horizons for n in cert.n_actions)
        if claim.name in judged:
            verdicts = [c.verdict for c in cert.cells if c.claim_name == claim.name]
            seen = ", ".join(f"{verdicts.count(v)} {v}" for v in ("pass", "fail", "inconclusive") if v in verdicts)
        else:
            seen = "not judged (set `use_learner_claims = true` in the campaign to judge it)"
        kind = spec["kind"] + (f" (delta {spec['delta']:g})" if spec["kind"] == "high_probability" else "")
        rows.append((spec["name"], spec["metric"], kind, f"`{spec['bound']}`", at, spec.get("source") or "-", seen))
    doc.add(Table(("claim", "metric", "kind", "bound", "bound on this battery", "source", "judged here"),
                  tuple(rows)))


def _safe_bound(claim, T, n):
    try:
        return claim.bound_at(T, n)
    except BoundbreakerError:
        return None


def _method(doc, cert):
    doc.add(Heading("Method and confidence", anchor="method"))
    kinds = {c.kind for c in cert.cells}
    items = []
    if "high_probability" in kinds:
        items.append("High-probability claims (P[metric > bound] <= delta): the violation rate is followed by an "
                     "anytime-valid confidence sequence; the cell fails once the rate is shown above delta, passes "
                     "once it is shown below delta, and is inconclusive if the replicas settle neither.")
    if "expectation" in kinds:
        items.append("Expectation claims (E[metric] <= bound): the same with the mean, through a confidence "
                     "sequence on the metric's worst-case range (regret in [-T, T], switches in [0, T-1]).")
    if "always" in kinds:
        items.append("Always claims (a hard cap): one violating replica fails the cell, with the seed that replays "
                     "it; with none the cell passes, and the interval bounds the violation rate.")
    items.append(f"Family-wise confidence {cert.confidence:g}: every cell runs at {cert.cell_confidence:.6g} "
                 f"({cert.multiplicity}), so with probability at least {cert.confidence:g} every interval covers "
                 "its cell's true rate or mean at once; the sequences are anytime-valid, so stopping early "
                 "inflates no error.")
    items.append("Sequences: a shared adversary draws one sequence for all replicas (probabilities are over the "
                  "learner's randomness on it); otherwise each replica gets its own (probabilities are over the "
                  "sequence and the learner).")
    doc.add(Bullets(tuple(items)))
    methods = {}
    for c in cert.cells:
        methods.setdefault((c.method, c.reference), []).append(c.index)
    doc.add(Table(("method", "reference", "cells"),
                  tuple((m, r, _ranges(ix)) for (m, r), ix in methods.items())))


def _ranges(indices) -> str:
    out, start, prev = [], None, None
    for i in sorted(indices):
        if start is None:
            start = prev = i
        elif i == prev + 1:
            prev = i
        else:
            out.append(f"{start}-{prev}" if prev > start else str(start))
            start = prev = i
    if start is not None:
        out.append(f"{start}-{prev}" if prev > start else str(start))
    return ", ".join(out)


def _replay(doc, cert, certificate_name):
    doc.add(Heading("Replay", anchor="replay"))
    path = cert.campaign.get("path")
    items = []
    if path:
        command = "boundbreaker certify --demo" if _is_demo(path) else f"boundbreaker certify {path}"
        items.append(f"The whole certification: `{command}` (same campaign digest "
                     f"`{cert.digest[:16]}`, same seed {cert.seed}) gives the same cells; results never depend on "
                     "the number of jobs.")
    items.append(f"This report: `boundbreaker report {certificate_name}` rebuilds it from the certificate (tails "
                 "by exact replay).")
    items.append("A group's replicas: `harness.run(learner, adversary, T, n, replicas=replicas_run, seed=<cell seed>, "
                 f"chunk={cert.chunk})`; replica r is row r % {cert.chunk} of chunk r // {cert.chunk}.")
    doc.add(Bullets(tuple(items)))
    first = next((c for c in cert.cells if c.replay), None)
    if first is not None:
        doc.add(Code("\n".join([
            "from harness.certify import Certificate, build_from_spec, replay_replica",
            f"cert = Certificate.load({certificate_name!r})",
            "learner = build_from_spec(cert.learner, 'learner')   # or the learner object you certified",
            f"cell = cert.cells[{first.index}]",
            "value = replay_replica(cell, learner)   # equals cell.replay[0]['value'] exactly",
        ]), "python"))
    doc.add(Paragraph(f"Versions at certification: {json.dumps(cert.versions, sort_keys=True)}."))


__all__ = ["build", "num", "interval", "cell_row", "CELL_HEAD"]
