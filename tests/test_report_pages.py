"""The report pages: every cell in the HTML and the Markdown, with the certificate's own numbers.

The certificate JSON is read with the json module (not through harness code) and each cell's numbers
are compared with what the pages print (4 significant digits: relative error at most 5e-4).
"""

import base64
import copy
import io
import json
import re
from html.parser import HTMLParser

import pytest
from PIL import Image

from harness.cli import main
from harness.report import write_report

from report_subjects import small_certificate


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    cert = small_certificate()
    out = tmp_path_factory.mktemp("report")
    paths = write_report(cert, out)
    return cert, out, paths


def _close(text, value):
    if value is None:
        return text == "-"
    return float(text) == pytest.approx(value, rel=5e-4, abs=1e-12)


def _interval(text):
    m = re.fullmatch(r"\[(\S+), (\S+)\]", text.strip())
    assert m, text
    return m.group(1), m.group(2)


def check_row(row, cell):
    """One printed row (#, adversary, T, n, claim, kind, bound, replicas, violations, observed, interval,
    verdict, seed) against one cell of the certificate JSON."""
    idx, adv, T, n, claim, kind, bound, replicas, violations, observed, interval, verdict, seed = row
    assert (int(idx), adv, int(T), int(n), claim) == (cell["index"], cell["adversary_label"], cell["horizon"],
                                                      cell["n_actions"], cell["claim_name"])
    assert _close(bound, cell["bound"])
    assert (int(replicas), int(violations), verdict, int(seed)) == (cell["replicas"], cell["violations"],
                                                                    cell["verdict"], cell["seed"])
    what, value = observed.split(" ")
    lo, hi = _interval(interval)
    if cell["kind"] == "expectation":
        assert what == "mean" and _close(value, cell["mean"])
        assert _close(lo, cell["mean_low"]) and _close(hi, cell["mean_high"])
    else:
        assert what == "rate" and _close(value, cell["rate"])
        assert _close(lo, cell["ci_low"]) and _close(hi, cell["ci_high"])
    if cell["kind"] == "high_probability":
        assert f"<= {cell['delta']:g}" in kind


def markdown_cell_rows(text):
    lines = text.splitlines()
    start = next(i for i, line in enumerate(lines) if line.startswith("| # | adversary | T | n | claim"))
    rows = []
    for line in lines[start + 2:]:
        if not line.startswith("|"):
            break
        rows.append([c.strip() for c in re.split(r"(?<!\\)\|", line.strip())[1:-1]])
    return rows


def test_the_markdown_has_every_cell_with_the_certificates_numbers(report):
    _, out, paths = report
    data = json.loads((out / "certificate.json").read_text())
    text = paths["summary"].read_text()
    assert text.startswith(f"# {data['campaign']['name'] or 'certification'}: {data['verdict']}")
    rows = markdown_cell_rows(text)
    assert len(rows) == len(data["cells"]) == 24
    for row, cell in zip(rows, data["cells"]):
        check_row(row, cell)
    assert "never a proof" in text
    assert f"{data['confidence']:g} family-wise" in text and "Bonferroni" in text


class _Cells(HTMLParser):
    """Collects the text of every cell row (tr id="cell-i") and every image of an HTML page."""

    def __init__(self):
        super().__init__()
        self.rows, self.images, self.tags = {}, [], set()
        self._row = self._cell = None

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        self.tags.add(tag)
        if tag == "tr" and (attrs.get("id") or "").startswith("cell-"):
            self._row = attrs["id"]
            self.rows[self._row] = []
        elif tag == "td" and self._row:
            self._cell = []
        elif tag == "img":
            self.images.append(attrs.get("src", ""))

    def handle_endtag(self, tag):
        if tag == "td" and self._cell is not None:
            self.rows[self._row].append("".join(self._cell).strip())
            self._cell = None
        elif tag == "tr":
            self._row = None

    def handle_data(self, data):
        if self._cell is not None:
            self._cell.append(data)


def test_the_html_is_self_contained_and_has_every_cell_with_the_same_numbers(report):
    _, out, paths = report
    data = json.loads((out / "certificate.json").read_text())
    page = paths["html"].read_text()
    parsed = _Cells()
    parsed.feed(page)
    assert not {"script", "link", "iframe"} & parsed.tags
    assert "http://" not in page and "https://" not in page  # nothing fetched from the network
    assert len(parsed.rows) == len(data["cells"])
    for cell in data["cells"]:
        check_row(parsed.rows[f"cell-{cell['index']}"], cell)
    # figures: embedded PNGs identical to the Markdown twin's files
    files = sorted((out / "figures").glob("*.png"))
    assert parsed.images and all(src.startswith("data:image/png;base64,") for src in parsed.images)
    embedded = sorted(base64.b64decode(src.split(",", 1)[1]) for src in parsed.images)
    assert embedded == sorted(f.read_bytes() for f in files)
    for blob in embedded:
        assert Image.open(io.BytesIO(blob)).size[0] > 300


def test_the_report_says_how_it_got_the_distributions_and_checked_them(report):
    _, _, paths = report
    for text in (paths["summary"].read_text(), paths["html"].read_text()):
        assert "exact replay" in text and "Check passed" in text
        assert "verdict-grid.png" in text or "figure-verdict-grid" in text


def test_sections_failing_cells_counterexamples_and_own_claims(report):
    cert, out, paths = report
    text = paths["summary"].read_text()
    for head in ("## Battery", "## Every cell", "## Failing cells and how to replay them", "## Tails",
                 "## Counterexamples", "## The learner's own claims", "## Method and confidence", "## Replay"):
        assert head in text
    for c in cert.failures():
        assert f"cell {c.index}, {c.where}" in text
        if c.replay:
            assert f"seed={c.seed}, index={c.replay[0]['chunk_index']}" in text
    # one counterexample figure per failing per-replica claim, and Hedge's own published claims listed
    failing_claims = {c.claim_name for c in cert.failures() if c.kind != "expectation"}
    assert len(list((out / "figures").glob("counterexample-cell-*.png"))) == len(failing_claims)
    assert "Cesa-Bianchi and Lugosi 2006" in text.split("## The learner's own claims")[1]
    assert "not judged" in text


def test_code_named_in_a_certificate_is_never_imported(tmp_path, monkeypatch):
    """A certificate may come from anywhere: a learner named by module path is not imported (the module
    here would leave a marker file if it were); the report still has every cell and says what to pass."""
    marker = tmp_path / "imported"
    (tmp_path / "planted_learner_mod.py").write_text(f"open({str(marker)!r}, 'w').close()\nclass L: pass\n")
    monkeypatch.syspath_prepend(str(tmp_path))
    cert = small_certificate()
    data = copy.deepcopy(cert.to_dict())  # to_dict shares the specs of the cached certificate
    data["learner"] = {"name": None, "class": "planted_learner_mod:L", "params": {}}
    from harness.certify import Certificate

    paths = write_report(Certificate.from_dict(data), tmp_path / "r")
    assert not marker.exists()
    text = paths["summary"].read_text()
    assert len(markdown_cell_rows(text)) == len(cert.cells)
    assert "Tail curves were not drawn: the learner was not rebuilt" in text
    assert "does not import code named in a file" in text and "--learner" in text
    assert "Counterexample plots were not drawn" in text
    assert not list((tmp_path / "r" / "figures").glob("survival-*.png"))


def test_report_cli_rebuilds_the_report_from_a_saved_certificate(tmp_path, capsys):
    cert = small_certificate()
    path = cert.save(tmp_path / "cert.json")
    code = main(["report", str(path), "--out", str(tmp_path / "r"), "--no-replay"])
    out, err = capsys.readouterr()
    assert code == 0, err
    assert "report.html" in out and (tmp_path / "r" / "report.html").exists()
    assert "without replay" in (tmp_path / "r" / "summary.md").read_text()
    # --learner names the certified learner explicitly (here with the certificate's own parameters)
    code = main(["report", str(path), "--out", str(tmp_path / "s"), "--learner", "hedge", "--replay-limit", "256"])
    out, err = capsys.readouterr()
    assert code == 0, err
    assert "Check passed" in (tmp_path / "s" / "summary.md").read_text()


@pytest.mark.parametrize("argv, text", [
    (["report", "{t}/missing.json"], "no such certificate file"),
    (["report", "{t}/bad.json"], "not valid JSON"),
    (["report", "{c}", "--replay-limit", "0"], "--replay-limit"),
    (["report", "{c}", "--jobs", "0"], "--jobs"),
    (["report", "{c}", "--out", "{c}"], "is a file"),
    (["report", "{c}", "--learner-param", "eta=1"], "only with --learner"),
    (["report", "{c}", "--learner", "nope"], "--learner"),
])
def test_report_cli_bad_input_exits_2_with_one_line(tmp_path, capsys, argv, text):
    (tmp_path / "bad.json").write_text("{not json")
    cert = tmp_path / "c.json"
    cert.write_text("{}")
    code = main([a.format(t=tmp_path, c=cert) for a in argv])
    out, err = capsys.readouterr()
    assert code == 2 and text in err and err.count("\n") == 1 and out == ""


def test_certify_report_writes_the_html_page(tmp_path, capsys):
    campaign = tmp_path / "c.toml"
    campaign.write_text('[campaign]\nname = "tiny"\nmax_replicas = 256\n[learner]\nname = "hedge"\n'
                        '[[claims]]\nmetric = "switches"\nkind = "always"\nbound = 3\n'
                        '[[adversaries]]\nname = "alternating"\n[grid]\nhorizons = 50\nn_actions = 2\n')
    code = main(["certify", str(campaign), "--report", str(tmp_path / "r")])
    out, _ = capsys.readouterr()
    assert code == 1
    for name in ("certificate.json", "summary.md", "report.html"):
        assert (tmp_path / "r" / name).exists() and f"wrote {tmp_path / 'r' / name}" in out
    assert (tmp_path / "r" / "figures" / "verdict-grid.png").exists()


def test_pairs_not_judged_are_shown_as_such(tmp_path):
    """A claim made for oblivious adversaries only (Claim.scope) is not judged on an adaptive one: the
    report lists the pair and the verdict grid shows a grey 'not judged' box instead of a verdict."""
    import adversaries
    from harness import Claim, certify
    from harness.learners import get as get_learner
    from harness.report import figures

    claims = [Claim("switches", 3, kind="always", name="cap"),
              Claim("regret", 50, delta=0.05, name="oblivious-only", scope="oblivious")]
    cert = certify(get_learner("hedge"), claims, [adversaries.get("alternating"), adversaries.get("chase")],
                   horizons=60, n_actions=2, max_replicas=256, seed=1, labels=["flapping pair", "chaser"])
    assert len(cert.cells) == 3 and cert.not_applicable
    text = write_report(cert, tmp_path)["summary"].read_text()
    assert "## Not judged" in text and "claim `oblivious-only` on chaser" in text
    assert len(markdown_cell_rows(text)) == 3
    fig = figures.verdict_grid(cert)
    texts = [t.get_text() for ax in fig.axes for t in ax.texts]
    assert sum(t.startswith("not judged") for t in texts) == 1 and len(texts) == 4
