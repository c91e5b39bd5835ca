"""Markdown outputs escape user text: no raw HTML, no injected heading, no broken table column.

Reference: markdown-it-py, an independent CommonMark implementation (with the GFM table rule), renders
every markdown file the tool writes; the rendered text must be exactly what the user wrote.
"""

from __future__ import annotations

import html
import json
import re
import textwrap
from pathlib import Path

import pytest
from markdown_it import MarkdownIt

from optmatch.cli.main import main
from optmatch.outputs.markdown import md, md_block, table

HOSTILE_CABLE = "cheap|coax <b>bold</b> # not a heading"
DESCRIPTION = "Our own test scenario.\n# Injected heading\n<script>alert(1)</script> a | b *not emphasis* [link](x)"


def render(text: str) -> str:
    return MarkdownIt("commonmark").enable("table").render(text)


def cells(page: str) -> list[str]:
    """The contents of every table body cell of a rendered page."""
    return re.findall(r"<td[^>]*>(.*?)</td>", page)


@pytest.mark.parametrize("text", ["<img src=x onerror=alert(1)>", "# heading", "a | b", "- item", "1. first",
                                  "---", "`code`", "*em* _em_", "[a](b) ![c](d)", "x\n===", "back\\slash & amp;"])
def test_escaped_text_renders_as_written(text):
    flat = " ".join(text.split())
    # CommonMark: an escaped paragraph is one <p> holding the text itself
    assert render(md_block(text)) == f"<p>{html.escape(flat, quote=False)}</p>\n"
    rendered = render("\n".join(table(["h"], [[md(text)]], "l")))
    assert cells(rendered) == [html.escape(flat, quote=False)]  # one cell, the whole text


@pytest.fixture(scope="module")
def written(tmp_path_factory) -> Path:
    """A study whose description and cable name try to inject HTML, a heading and table columns."""
    root = tmp_path_factory.mktemp("escape")
    study = root / "hostile.yaml"
    body = textwrap.dedent(f"""\
        name: hostile
        description: {json.dumps(DESCRIPTION)}
        system: 50
        load: {{impedance: 60-j80}}
        mask: {{segments: [{{from: 425MHz, to: 442MHz, return_loss: 12}}]}}
        shelf:
          cables:
            {json.dumps(HOSTILE_CABLE)}:
              z0: 50
              vf: 0.66
              attenuation: [{{freq: 100MHz, db_per_100m: 15}}, {{freq: 1GHz, db_per_100m: 55}}]
              max_voltage: 1900
              max_power: {{watts: 300, freq: 100MHz}}
        drive: {{power: 10W}}
        network:
          elements:
            - line: {{length: {{min: 0deg, max: 180deg}}, cable: {json.dumps(HOSTILE_CABLE)}}}
            - shunt_stub: {{length: {{min: 5deg, max: 180deg}}, end: either, cable: {json.dumps(HOSTILE_CABLE)}}}
        search: {{trials: 2, seed: 1, population: 12, generations: 5}}
        """)
    study.write_text(body, encoding="utf-8")
    out = root / "results"
    assert main(["run", str(study), "--out", str(out), "--quiet"]) in (0, 1)
    assert main(["report", str(out)]) == 0
    return out


@pytest.mark.parametrize("name", ["hostile/summary.md", "hostile/cut_list.md", "hostile/study.md", "report.md"])
def test_markdown_files_keep_user_text_as_text(written, name):
    text = (written / name).read_text(encoding="utf-8")
    page = render(text)
    assert "<script" not in page and "<b>" not in page  # no raw HTML gets through
    headings = re.findall(r"<h\d>(.*?)</h\d>", page)
    assert headings and not any("Injected" in h or "not a heading" in h for h in headings)
    if name != "report.md":
        # the cable name stands whole in its table cell: its "|" did not open a new column
        assert html.escape(HOSTILE_CABLE, quote=False) in cells(page)
    if name in ("hostile/summary.md", "hostile/study.md"):
        flat = html.escape(" ".join(DESCRIPTION.split()), quote=False)
        assert f"<p>{flat}</p>" in page  # the description is one paragraph, exactly as written
