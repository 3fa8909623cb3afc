"""A small document model for the appendix, rendered to Markdown (and HTML in html.py).

The appendix is built once as a list of blocks; both output formats are
rendered from the same list, so the Markdown and the HTML always say the same.
Inline text may hold ``code`` spans in backticks and nothing else.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field


@dataclass(frozen=True)
class Heading:
    level: int
    text: str
    anchor: str = ""


@dataclass(frozen=True)
class Text:
    text: str
    css_class: str = ""


@dataclass(frozen=True)
class Bullets:
    items: tuple


@dataclass(frozen=True)
class Code:
    text: str


@dataclass(frozen=True)
class Table:
    """A table: header, rows of text cells, a caption and notes under it.

    ``row_classes`` (one per row, may be "") lets the HTML mark rows, e.g. folds
    that must not be interpreted.
    """

    caption: str
    columns: tuple
    rows: tuple
    css_class: str = ""
    element_id: str = ""
    row_classes: tuple = ()
    notes: tuple = ()
    source: str = ""


@dataclass(frozen=True)
class Figure:
    """A figure saved as ``<stem>.png`` and ``<stem>.svg`` under the output folder.

    ``stem`` is relative to the output folder (e.g. ``figures/map_blocks``).
    """

    stem: str
    caption: str
    alt: str = ""
    width_pct: int = 100


@dataclass(frozen=True)
class Document:
    title: str
    blocks: tuple = field(default_factory=tuple)


# Characters that would make Markdown read a field value (a record id, a column or
# fold name) as formatting, a link or HTML; backslash-escaped, as html.py escapes
# the same text for HTML. `code` spans are kept as code, as in the HTML.
_MD_SPECIAL = re.compile(r"([\\*_\[\]<>|~&#!])")


def md_inline(text: str) -> str:
    """Escape text for Markdown, keeping `code` spans (the Markdown twin of html._inline).

    Examples
    --------
    >>> print(md_inline("fold <b>1</b> *a* | `x_y`"))
    fold \\<b\\>1\\</b\\> \\*a\\* \\| `x_y`
    """
    parts = re.split(r"(`[^`]*`)", str(text))
    return "".join(p if i % 2 else _MD_SPECIAL.sub(r"\\\1", p) for i, p in enumerate(parts))


def _md_cell(text: str) -> str:
    return md_inline(str(text).replace("\n", " "))


def to_markdown(doc: Document) -> str:
    """Render a document as GitHub-flavoured Markdown (pipe tables)."""
    out = [f"# {md_inline(doc.title)}", ""]
    n_table = n_figure = 0
    for b in doc.blocks:
        if isinstance(b, Heading):
            out += ["#" * (b.level + 1) + " " + md_inline(b.text), ""]
        elif isinstance(b, Text):
            out += [md_inline(b.text), ""]
        elif isinstance(b, Bullets):
            out += [f"- {md_inline(item)}" for item in b.items] + [""]
        elif isinstance(b, Code):
            out += ["```text", b.text.rstrip("\n"), "```", ""]
        elif isinstance(b, Table):
            n_table += 1
            out += [f"**Table {n_table}.** {md_inline(b.caption)}", ""]
            out.append("| " + " | ".join(_md_cell(c) for c in b.columns) + " |")
            out.append("|" + "|".join(" --- " for _ in b.columns) + "|")
            for row in b.rows:
                out.append("| " + " | ".join(_md_cell(c) for c in row) + " |")
            out.append("")
            for note in b.notes:
                out += [f"*{md_inline(note)}*", ""]
            if b.source:
                out += [f"Data: `{b.source}`", ""]
        elif isinstance(b, Figure):
            n_figure += 1
            out += [f"![{md_inline(b.alt or b.caption)}]({b.stem}.png)", "",
                    f"**Figure {n_figure}.** {md_inline(b.caption)} (vector: `{b.stem}.svg`)", ""]
        else:  # pragma: no cover - a programming error, not bad input
            raise TypeError(f"unknown block {type(b).__name__}")
    while out and out[-1] == "":
        out.pop()
    return "\n".join(out) + "\n"
