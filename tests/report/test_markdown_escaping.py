"""Field values in the appendix's Markdown read as text, as they do in its HTML."""

import html

import pytest
from markdown_it import MarkdownIt

from splitter.report.document import Document, Table, md_inline, to_markdown
from splitter.report.html import _inline

VALUES = ["<script>alert(1)</script>", "*bold* and _under_", "a | b", "[link](http://x)", "fold #3!", "x & y",
          "~~gone~~", "back\\slash", "plain words 1.5"]


@pytest.mark.parametrize("value", VALUES)
def test_a_field_value_renders_as_the_same_text_in_markdown_and_html(value):
    # reference: markdown-it-py (CommonMark) renders our escaped Markdown to the HTML our renderer writes
    assert MarkdownIt("commonmark").renderInline(md_inline(value)) == _inline(value) == html.escape(value)


def test_table_cells_are_escaped_and_code_spans_kept():
    md = to_markdown(Document("t", (Table(caption="split `a_b`", columns=("id",), rows=(("<i>p_1</i>",),)),)))
    body = MarkdownIt("commonmark").enable("table").render(md)
    assert "<td>&lt;i&gt;p_1&lt;/i&gt;</td>" in body and "<code>a_b</code>" in body
