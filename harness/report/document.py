"""A report as a list of blocks, rendered twice: HTML (html.py) and Markdown (markdown.py).

Both renderers walk the same blocks, so the two files say the same things
with the same numbers. Text may hold `code spans` in backticks; renderers
escape everything else.
"""

from __future__ import annotations

from dataclasses import dataclass, field


@dataclass(frozen=True)
class Heading:
    text: str
    level: int = 2
    anchor: str = ""


@dataclass(frozen=True)
class Paragraph:
    text: str


@dataclass(frozen=True)
class Callout:
    """A highlighted paragraph; ``kind`` is caution, pass, fail, inconclusive or warning."""

    text: str
    kind: str = "caution"


@dataclass(frozen=True)
class Bullets:
    items: tuple


@dataclass(frozen=True)
class Code:
    text: str
    language: str = ""


@dataclass(frozen=True)
class Table:
    """``rows`` of strings; ``row_ids`` (HTML ids) and ``row_classes`` are optional, one per row."""

    head: tuple
    rows: tuple
    row_ids: tuple = ()
    row_classes: tuple = ()
    numeric: tuple = ()        # column indices aligned right
    verdict_column: int | None = None


@dataclass(frozen=True)
class Image:
    """A PNG figure; ``name`` is its file stem under figures/ for the Markdown twin."""

    name: str
    caption: str
    png: bytes
    alt: str = ""


@dataclass
class Document:
    title: str
    verdict: str
    blocks: list = field(default_factory=list)

    def add(self, *blocks):
        self.blocks.extend(blocks)
        return self

    def images(self) -> list:
        return [b for b in self.blocks if isinstance(b, Image)]


def split_code(text: str) -> list[tuple[bool, str]]:
    """[(is_code, piece), ...] from text with `code spans`."""
    parts = text.split("`")
    if len(parts) % 2 == 0:  # an unmatched backtick is plain text
        parts = parts[:-2] + [parts[-2] + "`" + parts[-1]]
    return [(i % 2 == 1, p) for i, p in enumerate(parts) if p]


__all__ = ["Heading", "Paragraph", "Callout", "Bullets", "Code", "Table", "Image", "Document", "split_code"]
