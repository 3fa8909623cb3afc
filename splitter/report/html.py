"""Render the appendix document as one self-contained HTML page.

Figures are embedded as base64 data URIs (SVG when it is small enough, PNG
otherwise), the style sheet is inline, and the page names no font, script or
image on any network: it reads the same offline, attached to a manuscript
submission or printed.
"""

from __future__ import annotations

import base64
import html
import re
from pathlib import Path

from splitter.report.document import Bullets, Code, Document, Figure, Heading, Table, Text

#: SVGs larger than this are embedded as PNG to keep the page light.
MAX_SVG_BYTES = 1_500_000

CSS = """
:root { color-scheme: light; }
body { font-family: "DejaVu Serif", Georgia, "Times New Roman", serif; font-size: 15px; line-height: 1.5;
       color: #1a1a1a; background: #ffffff; max-width: 60rem; margin: 2rem auto; padding: 0 1.2rem; }
h1 { font-size: 1.6rem; border-bottom: 2px solid #1a1a1a; padding-bottom: .3rem; }
h2 { font-size: 1.25rem; margin-top: 2.2rem; border-bottom: 1px solid #999; padding-bottom: .15rem; }
h3 { font-size: 1.05rem; margin-top: 1.6rem; }
p.lead { font-size: 1.02rem; }
p.methods { text-align: justify; }
p.warning { border-left: 4px solid #D55E00; padding-left: .8rem; }
code, pre { font-family: "DejaVu Sans Mono", Consolas, monospace; font-size: .82rem; }
pre { background: #f4f4f4; border: 1px solid #ddd; padding: .6rem .8rem; white-space: pre-wrap;
      word-break: break-all; }
table { border-collapse: collapse; margin: .4rem 0 .3rem 0; font-size: .8rem;
        font-family: "DejaVu Sans", Arial, sans-serif; }
p.caption { font-size: .88rem; margin: 1rem 0 .3rem 0; break-after: avoid; }
th, td { border-top: 1px solid #bbb; border-bottom: 1px solid #bbb; padding: .18rem .45rem; text-align: left;
         vertical-align: top; }
th { background: #eeeeee; }
td.num, th.num { text-align: right; font-variant-numeric: tabular-nums; }
td.num, td:first-child { white-space: nowrap; }
tr.not-significant td { background: #f3f3f3; color: #555; font-style: italic; }
tr.summary td { border-top: 2px solid #555; font-weight: bold; }
.table-wrap { overflow-x: auto; margin-bottom: 1.2rem; }
p.note { font-size: .8rem; color: #444; margin: .1rem 0; }
figure { margin: 1rem 0 1.6rem 0; }
figure img { max-width: 100%; height: auto; display: block; border: 1px solid #e2e2e2; }
figcaption { font-size: .86rem; margin-top: .3rem; }
table.inputs td, table.run-files td { overflow-wrap: anywhere; }
@media print {
  body { max-width: none; margin: 0; font-size: 10.5pt; }
  table { font-size: 7pt; }
  th, td { padding: .1rem .22rem; }
  td.num, td:first-child { white-space: normal; }
  figure img { max-width: 100% !important; }
  h2 { break-after: avoid; }
  figure, table, pre { break-inside: avoid; }
  .table-wrap { overflow: visible; }
  tr.not-significant td { background: #eeeeee !important; -webkit-print-color-adjust: exact;
                          print-color-adjust: exact; }
}
@page { margin: 16mm 14mm; }
"""


def _inline(text: str) -> str:
    """Escape text and turn `code` spans into <code> elements."""
    parts = re.split(r"`([^`]*)`", str(text))
    out = []
    for i, part in enumerate(parts):
        out.append(f"<code>{html.escape(part)}</code>" if i % 2 else html.escape(part))
    return "".join(out)


def _slug(text: str) -> str:
    return re.sub(r"[^a-z0-9]+", "-", text.lower()).strip("-")


def _image_uri(out_dir: Path, stem: str) -> tuple[str, str]:
    svg = out_dir / f"{stem}.svg"
    png = out_dir / f"{stem}.png"
    if svg.exists() and svg.stat().st_size <= MAX_SVG_BYTES:
        return "data:image/svg+xml;base64," + base64.b64encode(svg.read_bytes()).decode("ascii"), "svg"
    if png.exists():
        return "data:image/png;base64," + base64.b64encode(png.read_bytes()).decode("ascii"), "png"
    raise FileNotFoundError(f"{png}: figure missing; it should have been written before the page.")


def to_html(doc: Document, out_dir) -> str:
    """Render ``doc`` as a self-contained page; figures are read from ``out_dir``."""
    out_dir = Path(out_dir)
    body = [f"<h1>{_inline(doc.title)}</h1>"]
    n_table = n_figure = 0
    for b in doc.blocks:
        if isinstance(b, Heading):
            level = min(b.level + 1, 6)
            anchor = b.anchor or _slug(b.text)
            body.append(f'<h{level} id="{html.escape(anchor)}">{_inline(b.text)}</h{level}>')
        elif isinstance(b, Text):
            cls = f' class="{b.css_class}"' if b.css_class else ""
            body.append(f"<p{cls}>{_inline(b.text)}</p>")
        elif isinstance(b, Bullets):
            body.append("<ul>" + "".join(f"<li>{_inline(i)}</li>" for i in b.items) + "</ul>")
        elif isinstance(b, Code):
            body.append(f"<pre>{html.escape(b.text.rstrip())}</pre>")
        elif isinstance(b, Table):
            n_table += 1
            attrs = ""
            if b.element_id:
                attrs += f' id="{html.escape(b.element_id)}"'
            if b.css_class:
                attrs += f' class="{html.escape(b.css_class)}"'
            # A column is numeric (right-aligned, header too) when every filled cell is a number.
            numeric = [all(_numeric(r[j]) for r in b.rows if j < len(r) and str(r[j]).strip() not in ("", "—"))
                       and any(j < len(r) and _numeric(r[j]) for r in b.rows) for j in range(len(b.columns))]
            head = "".join(f'<th class="{"num" if numeric[j] else "text"}">{_inline(c)}</th>'
                           for j, c in enumerate(b.columns))
            rows = []
            for k, row in enumerate(b.rows):
                cls = b.row_classes[k] if k < len(b.row_classes) and b.row_classes[k] else ""
                cells = "".join(f'<td class="{"num" if j < len(numeric) and numeric[j] else "text"}">{_inline(c)}</td>'
                                for j, c in enumerate(row))
                rows.append(f'<tr class="{cls}">{cells}</tr>' if cls else f"<tr>{cells}</tr>")
            notes = "".join(f'<p class="note">{_inline(n)}</p>' for n in b.notes)
            src = f'<p class="note">Data: <code>{html.escape(b.source)}</code></p>' if b.source else ""
            body.append(
                f'<div class="table-wrap"><p class="caption"><b>Table {n_table}.</b> {_inline(b.caption)}</p><table{attrs}>'
                f"<thead><tr>{head}</tr></thead><tbody>{''.join(rows)}</tbody></table>{notes}{src}</div>"
            )
        elif isinstance(b, Figure):
            n_figure += 1
            uri, _ = _image_uri(out_dir, b.stem)
            alt = html.escape(b.alt or b.caption, quote=True)
            body.append(
                f'<figure><img src="{uri}" alt="{alt}" style="width:{int(b.width_pct)}%">'
                f"<figcaption><b>Figure {n_figure}.</b> {_inline(b.caption)}</figcaption></figure>"
            )
        else:  # pragma: no cover
            raise TypeError(f"unknown block {type(b).__name__}")
    return (
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
        "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
        f"<title>{html.escape(doc.title)}</title>\n<style>{CSS}</style>\n</head>\n<body>\n"
        + "\n".join(body)
        + "\n</body>\n</html>\n"
    )


_ONE = r"[<>≤≥]?\s*[-+−]?\d[\d.,eE+−-]*(\s*(km|%))?"
_NUM = re.compile(rf"^{_ONE}(\s*–\s*{_ONE})?$")


def _numeric(cell) -> bool:
    return bool(_NUM.match(str(cell).strip()))
