"""Markdown writer: the twin of the HTML page, figures linked from ``figures/``."""

from __future__ import annotations

from .document import Bullets, Callout, Code, Document, Heading, Image, Paragraph, Table

_CALLOUT = {"caution": "Caution", "pass": "Pass", "fail": "Fail", "inconclusive": "Inconclusive",
            "warning": "Warning"}


def _cell(text: str) -> str:
    return str(text).replace("|", "\\|").replace("\n", " ")


def render(doc: Document, figure_dir: str = "figures") -> str:
    out = [f"# {doc.title}", ""]
    for b in doc.blocks:
        if isinstance(b, Heading):
            out += ["#" * b.level + " " + b.text, ""]
        elif isinstance(b, Paragraph):
            out += [b.text, ""]
        elif isinstance(b, Callout):
            out += [f"> **{_CALLOUT.get(b.kind, b.kind.title())}.** {b.text}", ""]
        elif isinstance(b, Bullets):
            out += [f"- {item}" for item in b.items] + [""]
        elif isinstance(b, Code):
            out += [f"```{b.language}", b.text.rstrip("\n"), "```", ""]
        elif isinstance(b, Table):
            out.append("| " + " | ".join(_cell(h) for h in b.head) + " |")
            out.append("|" + "|".join("---:" if i in b.numeric else "---" for i in range(len(b.head))) + "|")
            for row in b.rows:
                out.append("| " + " | ".join(_cell(x) for x in row) + " |")
            out.append("")
        elif isinstance(b, Image):
            out += [f"![{b.alt or b.caption}]({figure_dir}/{b.name}.png)", "", f"*{b.caption}*", ""]
    return "\n".join(out).rstrip("\n") + "\n"


__all__ = ["render"]
