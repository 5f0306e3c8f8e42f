"""HTML writer: one self-contained page (inline CSS, figures as base64 PNG, no script, no network)."""

from __future__ import annotations

import base64
import html
import re

from .document import Bullets, Callout, Code, Document, Heading, Image, Paragraph, Table, split_code

CSS = """
body{font-family:system-ui,-apple-system,"Segoe UI",Roboto,"Helvetica Neue",Arial,sans-serif;margin:0;color:#1f2933;
background:#f7f8fa;line-height:1.45}
main{max-width:1180px;margin:0 auto;padding:24px 28px 60px;background:#fff;box-shadow:0 0 0 1px #e4e7eb}
h1{font-size:1.7em;margin:.2em 0 .4em}h2{font-size:1.25em;margin-top:1.8em;border-bottom:1px solid #e4e7eb;
padding-bottom:.2em}h3{font-size:1.05em;margin-top:1.4em}
code{font-family:ui-monospace,SFMono-Regular,Menlo,Consolas,monospace;font-size:.88em;background:#f0f2f5;
padding:.05em .3em;border-radius:3px}
pre{background:#f0f2f5;padding:10px 12px;border-radius:4px;overflow-x:auto;font-size:.85em}pre code{background:none;padding:0}
table{border-collapse:collapse;font-size:.84em;margin:.6em 0 1.2em;width:100%}
th,td{border-bottom:1px solid #e4e7eb;padding:4px 7px;text-align:left;vertical-align:top}
th{background:#f0f2f5;position:sticky;top:0}td.num{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}
tr.pass td.verdict{color:#2e7d32;font-weight:600}tr.fail td.verdict{color:#c62828;font-weight:700}
tr.inconclusive td.verdict{color:#9a6700;font-weight:600}tr.fail{background:#fff5f5}
.callout{border-left:5px solid;padding:8px 12px;margin:1em 0;border-radius:3px}
.callout.caution{border-color:#9a6700;background:#fff8e6}.callout.warning{border-color:#c62828;background:#fff0f0}
.callout.pass{border-color:#2e7d32;background:#eef8ef}.callout.fail{border-color:#c62828;background:#fdeeee}
.callout.inconclusive{border-color:#9a6700;background:#fff8e6}
figure{margin:1em 0 1.6em}figure img{max-width:100%;height:auto;border:1px solid #e4e7eb}
figcaption{font-size:.85em;color:#52606d;margin-top:.3em}
.badge{display:inline-block;padding:.1em .6em;border-radius:4px;color:#fff;font-size:.8em;vertical-align:middle}
.badge.pass{background:#2e7d32}.badge.fail{background:#c62828}.badge.inconclusive{background:#9a6700}
nav{font-size:.88em;margin:.4em 0 1em}nav a{margin-right:1em;color:#1d4ed8;text-decoration:none}
"""


def _inline(text: str) -> str:
    return "".join(f"<code>{html.escape(p)}</code>" if code else html.escape(p) for code, p in split_code(text))


def _anchor(text: str) -> str:
    return re.sub(r"[^a-z0-9]+", "-", text.lower()).strip("-")


def render(doc: Document) -> str:
    body = []
    headings = [b for b in doc.blocks if isinstance(b, Heading) and b.level == 2]
    body.append(f'<h1>{html.escape(doc.title.rsplit(": ", 1)[0])}: '
                f'<span class="badge {html.escape(doc.verdict)}">{html.escape(doc.verdict.upper())}</span></h1>')
    if headings:
        body.append("<nav>" + "".join(f'<a href="#{b.anchor or _anchor(b.text)}">{html.escape(b.text)}</a>'
                                      for b in headings) + "</nav>")
    for b in doc.blocks:
        if isinstance(b, Heading):
            body.append(f'<h{b.level} id="{b.anchor or _anchor(b.text)}">{html.escape(b.text)}</h{b.level}>')
        elif isinstance(b, Paragraph):
            body.append(f"<p>{_inline(b.text)}</p>")
        elif isinstance(b, Callout):
            body.append(f'<div class="callout {html.escape(b.kind)}">{_inline(b.text)}</div>')
        elif isinstance(b, Bullets):
            body.append("<ul>" + "".join(f"<li>{_inline(i)}</li>" for i in b.items) + "</ul>")
        elif isinstance(b, Code):
            body.append(f"<pre><code>{html.escape(b.text)}</code></pre>")
        elif isinstance(b, Table):
            body.append(_table(b))
        elif isinstance(b, Image):
            data = base64.b64encode(b.png).decode("ascii")
            body.append(f'<figure id="figure-{html.escape(b.name)}"><img alt="{html.escape(b.alt or b.caption)}" '
                        f'src="data:image/png;base64,{data}"><figcaption>{_inline(b.caption)}</figcaption></figure>')
    return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
            f"<title>{html.escape(doc.title)}</title>\n<style>{CSS}</style>\n</head>\n<body>\n<main>\n"
            + "\n".join(body) + "\n</main>\n</body>\n</html>\n")


def _table(t: Table) -> str:
    rows = []
    for k, row in enumerate(t.rows):
        rid = f' id="{html.escape(t.row_ids[k])}"' if t.row_ids else ""
        cls = f' class="{html.escape(t.row_classes[k])}"' if t.row_classes else ""
        cells = []
        for i, x in enumerate(row):
            kind = "verdict" if i == t.verdict_column else "num" if i in t.numeric else ""
            cells.append(f"<td{f' class={chr(34)}{kind}{chr(34)}' if kind else ''}>{_inline(str(x))}</td>")
        rows.append(f"<tr{rid}{cls}>" + "".join(cells) + "</tr>")
    head = "".join(f"<th>{html.escape(h)}</th>" for h in t.head)
    return f"<table><thead><tr>{head}</tr></thead><tbody>\n" + "\n".join(rows) + "\n</tbody></table>"


__all__ = ["render"]
