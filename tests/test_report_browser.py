"""The HTML report opens in headless Chromium and shows every cell and every figure.

Needs Debian's chromium package (.ci/run installs it when absent); without it the test is skipped and
says so. The report is copied and a probe script is appended to the copy (the report itself has no
script): once the page has loaded it records, for every cell row, whether it is laid out with a
non-zero height and shows its verdict, and for every figure, whether the PNG decoded to its own size.
Chromium's --dump-dom prints the page after scripts ran, probe result included.
"""

import base64
import html
import io
import json
import re
import shutil
import subprocess

import pytest
from PIL import Image

from harness.report import write_report

from report_subjects import small_certificate

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")

PROBE = """
<script>
window.addEventListener("load", function () {
  var rows = Array.from(document.querySelectorAll("tr[id^=cell-]")).map(function (tr) {
    var box = tr.getBoundingClientRect();
    var style = getComputedStyle(tr);
    return {id: tr.id, height: box.height, width: box.width, visible: style.visibility === "visible" &&
            style.display !== "none", verdict: tr.querySelector("td.verdict").textContent};
  });
  var images = Array.from(document.images).map(function (img) {
    return {complete: img.complete, width: img.naturalWidth, height: img.naturalHeight,
            shown: img.getBoundingClientRect().width};
  });
  var out = document.createElement("pre");
  out.id = "probe";
  out.textContent = "PROBE" + JSON.stringify({rows: rows, images: images}) + "PROBE";
  document.body.appendChild(out);
});
</script>
"""


@pytest.mark.browser
@pytest.mark.skipif(CHROMIUM is None, reason="headless Chromium not installed (Debian package 'chromium'; "
                                              ".ci/run installs it): the browser check of the HTML report is skipped")
def test_the_html_report_opens_in_headless_chromium_and_shows_every_cell(tmp_path):
    cert = small_certificate()
    paths = write_report(cert, tmp_path / "report")
    page = paths["html"].read_text()
    probed = tmp_path / "probed.html"
    probed.write_text(page.replace("</body>", PROBE + "</body>"))
    cmd = [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
           "--disable-component-update", "--disable-sync", "--no-first-run", f"--user-data-dir={tmp_path / 'profile'}",
           "--window-size=1280,2000", "--virtual-time-budget=5000", "--dump-dom", probed.as_uri()]
    done = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    found = re.search(r'<pre id="probe">PROBE(.*?)PROBE</pre>', done.stdout, re.S)
    assert found, f"no probe output; chromium exit {done.returncode}: {done.stderr[-500:]}"
    probe = json.loads(html.unescape(found.group(1)))
    assert [r["id"] for r in probe["rows"]] == [f"cell-{c.index}" for c in cert.cells]
    for row, cell in zip(probe["rows"], cert.cells):
        assert row["visible"] and row["height"] > 5 and row["width"] > 300, row
        assert row["verdict"] == cell.verdict
    pngs = [Image.open(io.BytesIO(base64.b64decode(src))).size
            for src in re.findall(r'src="data:image/png;base64,([^"]+)"', page)]
    assert len(probe["images"]) == len(pngs) >= 4
    for shown, size in zip(probe["images"], pngs):
        assert shown["complete"] and (shown["width"], shown["height"]) == size and shown["shown"] > 300
