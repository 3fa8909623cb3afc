"""A small document model for the appendix, rendered to Markdown (and HTML in html.py).

The appendix is built once as a list of blocks; both output formats are
rendered from the same list, so the Markdown and the HTML always say the same.
Inline text may hold ``code`` spans in backticks and nothing else.
"""

from __future__ import annotations

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


def _md_cell(text: str) -> str:
    return str(text).replace("|", "\\|").replace("\n", " ")


def to_markdown(doc: Document) -> str:
    """Render a document as GitHub-flavoured Markdown (pipe tables)."""
    out = [f"# {doc.title}", ""]
    n_table = n_figure = 0
    for b in doc.blocks:
        if isinstance(b, Heading):
            out += ["#" * (b.level + 1) + " " + b.text, ""]
        elif isinstance(b, Text):
            out += [b.text, ""]
        elif isinstance(b, Bullets):
            out += [f"- {item}" for item in b.items] + [""]
        elif isinstance(b, Code):
            out += ["```text", b.text.rstrip("\n"), "```", ""]
        elif isinstance(b, Table):
            n_table += 1
            out += [f"**Table {n_table}.** {b.caption}", ""]
            out.append("| " + " | ".join(_md_cell(c) for c in b.columns) + " |")
            out.append("|" + "|".join(" --- " for _ in b.columns) + "|")
            for row in b.rows:
                out.append("| " + " | ".join(_md_cell(c) for c in row) + " |")
            out.append("")
            for note in b.notes:
                out += [f"*{note}*", ""]
            if b.source:
                out += [f"Data: `{b.source}`", ""]
        elif isinstance(b, Figure):
            n_figure += 1
            out += [f"![{b.alt or b.caption}]({b.stem}.png)", "",
                    f"**Figure {n_figure}.** {b.caption} (vector: `{b.stem}.svg`)", ""]
        else:  # pragma: no cover - a programming error, not bad input
            raise TypeError(f"unknown block {type(b).__name__}")
    while out and out[-1] == "":
        out.pop()
    return "\n".join(out) + "\n"
