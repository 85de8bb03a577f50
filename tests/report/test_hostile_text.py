"""Text from the plan file cannot be turned against the reader of an output.

A title, stock id or species name is free text. In the CSV it must not start a spreadsheet
formula; in the Markdown sheets it must not add a table row, raw HTML, a link or emphasis; in
the HTML sheets it must not add a tag; in the terminal it must not be read as rich markup.

Outside checks: the Markdown is rendered by markdown-it-py (a CommonMark implementation with
the GitHub table extension, installed with rich), not by our code; the CSV is read back by
Python's csv module; the HTML by html.parser. The hostile plan is the embedded default plan
with its stock ids and species names replaced in the plan file's text, a title with line
breaks put in after reading, and designed by the planner.
"""

from __future__ import annotations

import csv
import dataclasses
import html
import io
import re
from html.parser import HTMLParser
from importlib.resources import files

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from markdown_it import MarkdownIt
from rich.console import Console

from planner.pipeline import combined_plan, design_plan
from planner.planfile import parse_plan
from planner.predict.montecarlo import simulate
from planner.predict.uncertainty import propagate
from planner.report._format import csv_text, markdown_text
from planner.report.outdir import plan_files
from planner.report.sheets import BenchSlot, bench_sheet_md, mixtures_csv
from planner.report.simulation import TERMINAL_BUDGET_ROWS, render_simulation
from planner.report.terminal import render_plan
from planner.report.variants_index import variants_files
from planner.result import Check

DATE = "2031-02-03"

#: A title that tries every trick at once: a forged table row after a line break, raw HTML,
#: a spreadsheet formula, Markdown emphasis and a link, and rich console markup.
HOSTILE_TITLE = (
    "=HYPERLINK(1) |x|\n| forged | row |\r\n<script>alert(1)</script> **bold** "
    "[link](https://example.invalid) [bold red]red[/] [link=https://example.invalid]y[/link]"
)
#: Stock ids (free text) and product species names (free text with a readable charge, see
#: planner.chem.species.charge_from_name) that start a formula or carry markup.
STOCK_IDS = {
    "iron-strong": "+[bold]iron[/]-strong",
    "iron-dilute": "-iron|dilute [red]x[/red]",
    "thiocyanate": "@<b>thio</b>[i]cyanate[/i]",
    "acid": "=[bold]acid[/]",
}
SPECIES_NAMES = {"FeSCN2+": "=FeSCN2+", "Fe(SCN)2+": "@Fe(SCN)2+"}
FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def _toml_string(text: str) -> str:
    """A TOML basic string (the few escapes this module needs)."""
    return '"' + text.replace("\\", "\\\\").replace('"', '\\"') + '"'


def _hostile_plan_text() -> str:
    """The embedded default plan with hostile stock ids and species names."""
    text = files("planner").joinpath("data/default.toml").read_text(encoding="utf-8")
    for old, new in STOCK_IDS.items():
        text = text.replace(f'id = "{old}"', f"id = {_toml_string(new)}")
    for old, new in SPECIES_NAMES.items():
        text = text.replace(f'name = "{old}"', f"name = {_toml_string(new)}")
    return text


@pytest.fixture(scope="module")
def hostile():
    """The default scenario, designed, with hostile stock ids, species names and title."""
    inputs = parse_plan(_hostile_plan_text())
    assert {s.id for s in inputs.stocks} == set(STOCK_IDS.values())
    assert set(inputs.reaction.species_names()) == set(SPECIES_NAMES.values())
    # The title goes in after reading: line breaks reach the reports from a saved plan.json or
    # the Python API whatever the plan file accepts.
    return design_plan(dataclasses.replace(inputs, title=HOSTILE_TITLE))


@pytest.fixture(scope="module")
def benign():
    """The same plan as written in the package (same design, plain text)."""
    text = files("planner").joinpath("data/default.toml").read_text(encoding="utf-8")
    return design_plan(parse_plan(text))


def _markdown_sheets(plan):
    out = {n: t for n, t in plan_files(plan, date=DATE).items() if n.endswith(".md")}
    for name, text in variants_files(
        [plan], combined=combined_plan((plan,)), date=DATE, seed=1
    ).items():
        if name in ("index.md", "prep-sheet.md"):
            out[f"variants/{name}"] = text
    return out


def _html_sheets(plan):
    out = {n: t for n, t in plan_files(plan, date=DATE).items() if n.endswith(".html")}
    for name, text in variants_files(
        [plan], combined=combined_plan((plan,)), date=DATE, seed=1
    ).items():
        if name in ("index.html", "prep-sheet.html"):
            out[f"variants/{name}"] = text
    return out


def _markdown():
    """CommonMark with GitHub's tables and strikethrough; raw HTML passes through (html=True),
    so an injected tag would show in the rendering."""
    return MarkdownIt("commonmark", {"html": True}).enable(["table", "strikethrough"])


def _one_line(text: str) -> str:
    return " ".join(text.split())


# ---------------------------------------------------------------------------------------------
# CSV
# ---------------------------------------------------------------------------------------------


def _is_number(cell: str) -> bool:
    try:
        float(cell)
    except ValueError:
        return False
    return True


def test_csv_text_cells_never_start_a_formula(hostile):
    rows = list(csv.reader(io.StringIO(mixtures_csv(hostile))))
    header = rows[0]
    # The product species head their columns; a name starting with = or @ gets an apostrophe
    # (common practice, OWASP CSV injection guidance).
    assert "'=FeSCN2+_M" in header
    assert "'@Fe(SCN)2+_M" in header
    assert "volume_+[bold]iron[/]-strong_mL" in header  # starts with v: left alone
    for row in rows:
        assert len(row) == len(header)
        for cell in row:
            assert _is_number(cell) or not cell.startswith(FORMULA_START), cell
    # Every data cell after id and role is a number a spreadsheet reads as one.
    assert all(_is_number(cell) for row in rows[1:] for cell in row[2:])


def test_csv_neutralises_ids_and_keeps_negative_numbers(plan):
    ids = ("=1+1", "+B1", "-S1", "@SUM(A1:A2)", "\tT1", "\rT2")
    mixtures = tuple(
        dataclasses.replace(m, id=new_id) for m, new_id in zip(plan.mixtures, ids, strict=False)
    )
    first = dataclasses.replace(mixtures[0], absorbance=-0.5, u_absorbance=-1e-05)
    hostile = dataclasses.replace(plan, mixtures=(first, *mixtures[1:]))
    text = mixtures_csv(hostile)
    rows = list(csv.DictReader(io.StringIO(text)))
    assert [r["id"] for r in rows] == ["'=1+1", "'+B1", "'-S1", "'@SUM(A1:A2)", "'\tT1"]
    # Numbers the code writes stay numbers, negative ones included.
    assert rows[0]["absorbance"] == "-0.5"
    assert float(rows[0]["u_absorbance"]) == -1e-05
    assert float(rows[1]["absorbance"]) == plan.mixtures[1].absorbance


def test_csv_drops_nul_and_quotes_separators(plan):
    ids = ("S\x001", 'a,"b"', "line\nbreak")
    mixtures = tuple(
        dataclasses.replace(m, id=new_id) for m, new_id in zip(plan.mixtures, ids, strict=False)
    )
    text = mixtures_csv(dataclasses.replace(plan, mixtures=mixtures))
    assert "\0" not in text
    rows = list(csv.DictReader(io.StringIO(text)))
    assert [r["id"] for r in rows] == ["S1", 'a,"b"', "line\nbreak"]


@pytest.mark.parametrize(
    ("value", "expected"),
    [
        ("=1+1", "'=1+1"),
        ("+1", "'+1"),
        ("-1", "'-1"),
        ("@A1", "'@A1"),
        ("\tx", "'\tx"),
        ("\rx", "'\rx"),
        ("\0=1", "'=1"),
        ("iron", "iron"),
        ("S1", "S1"),
        ("", ""),
    ],
)
def test_csv_text_table(value, expected):
    # The first characters listed by OWASP, "CSV Injection" (= + - @ tab carriage return) and
    # by OWASP ASVS 5.0.0 requirement 1.2.10 (NUL).
    assert csv_text(value) == expected


# ---------------------------------------------------------------------------------------------
# Markdown
# ---------------------------------------------------------------------------------------------


def _table_rows(rendered: str) -> int:
    return rendered.count("<tr>")


def test_markdown_sheets_forge_no_row_and_carry_no_html(hostile, benign):
    markdown = _markdown()
    hostile_sheets = _markdown_sheets(hostile)
    benign_sheets = _markdown_sheets(benign)
    assert set(hostile_sheets) == set(benign_sheets)
    for name, text in hostile_sheets.items():
        rendered = markdown.render(text)
        assert "<script" not in text, name
        assert "<script" not in rendered, name
        assert "<b>" not in rendered, name
        assert "<strong>bold</strong>" not in rendered, name
        assert 'href="https://example.invalid"' not in rendered, name
        assert not any(line.startswith("| forged") for line in text.splitlines()), name
        # The same tables with the same rows and cells as the plain plan: nothing forged.
        benign_rendered = markdown.render(benign_sheets[name])
        assert _table_rows(rendered) == _table_rows(benign_rendered), name
        assert rendered.count("<td") == benign_rendered.count("<td"), name
        assert rendered.count("<h1>") == benign_rendered.count("<h1>"), name
        assert rendered.count("<li>") == benign_rendered.count("<li>"), name
        assert rendered.count("<p>") == benign_rendered.count("<p>"), name


def test_markdown_title_reads_as_written(hostile):
    text = bench_sheet_md(hostile, date=DATE, slot=BenchSlot(1, 1))
    tokens = _markdown().parse(text)
    assert [t.type for t in tokens[:3]] == ["heading_open", "inline", "heading_close"]
    children = tokens[1].children or []
    # The heading, as a CommonMark renderer shows it, is the title on one line, plain text.
    assert {c.type for c in children} == {"text"}
    shown = "".join(c.content for c in children)
    assert _one_line(shown) == "Pipetting sheet: " + _one_line(HOSTILE_TITLE)


def test_markdown_stock_ids_and_species_read_as_written(hostile):
    markdown = _markdown()
    text = bench_sheet_md(hostile, date=DATE, slot=BenchSlot(1, 1))
    rendered = html.unescape(markdown.render(text))
    header = re.search(r"<thead>\s*<tr>(.*?)</tr>", rendered, re.DOTALL)
    assert header is not None
    cells = re.findall(r"<th[^>]*>(.*?)</th>", header[1], re.DOTALL)
    # Mixture, one column per stock in order of addition, Total, Reading: the pipe in an id
    # adds none.
    assert len(cells) == 3 + len(STOCK_IDS)
    for new_id in STOCK_IDS.values():
        assert any(new_id in cell for cell in cells), new_id


#: Characters Markdown acts on, with letters, digits, spaces, line breaks and a few others.
_MARKDOWN_ALPHABET = st.sampled_from(list("\\`*_{}[]<>()#+-.!|&~=:;'\"/ \n\r\t") + list("aZ09é×µ"))


CONTEXTS = ("paragraph", "heading", "list", "cell", "quote")

#: Values that each open a block or an inline construct when written raw.
TRICKY = (
    "Plan #",
    "Plan ## ",
    "# heading",
    "###",
    "- item",
    "+",
    "+ item",
    "1. first",
    "2)",
    "---",
    "=",
    "==",
    "> quoted",
    "<b>x</b>",
    "<https://example.invalid>",
    "&amp; &#35;",
    "a | b",
    "`code`",
    "*em* _em_ **strong**",
    "~~gone~~",
    "[text](https://example.invalid)",
    "![alt](x.png)",
    "[ref]: https://example.invalid",
    "back\\slash\\",
    "line\nbreak\r\nand\rmore",
    "    indented",
)


def _renders_as_itself(context, value):
    """Outside check: markdown-it-py, a CommonMark implementation, renders the escaped text;
    the text it shows must be the value itself (on one line, white space collapsed), in every
    place a template puts a value, and nothing but text."""
    text = value.strip()  # line breaks inside stay: the escaping must remove them
    if not text or (text == "-" and context in ("paragraph", "list", "quote")):
        return  # nothing to show; a lone "-" is the documented table placeholder
    escaped = markdown_text(text)
    source = {
        "paragraph": f"{escaped}\n",
        "heading": f"# Sheet: {escaped}\n",
        "list": f"- {escaped}\n",
        "cell": f"| a | b |\n|---|---|\n| {escaped} | x |\n",
        "quote": f"> **id**  \n> {escaped}\n",
    }[context]
    tokens = _markdown().parse(source)
    inline = [t for t in tokens if t.type == "inline"]
    blocks = [t.type for t in tokens if t.nesting == 1]
    expected_blocks = {
        "paragraph": ["paragraph_open"],
        "heading": ["heading_open"],
        "list": ["bullet_list_open", "list_item_open", "paragraph_open"],
        "cell": [
            "table_open",
            "thead_open",
            "tr_open",
            "th_open",
            "th_open",
            "tbody_open",
            "tr_open",
            "td_open",
            "td_open",
        ],
        "quote": ["blockquote_open", "paragraph_open"],
    }[context]
    assert blocks == expected_blocks
    shown = inline[-2 if context == "cell" else -1]
    children = shown.children or []
    # Only plain text (and, in the quote, the label and its line break) comes out.
    allowed = (
        {"text", "hardbreak", "strong_open", "strong_close"} if context == "quote" else {"text"}
    )
    assert {c.type for c in children} <= allowed
    words = "".join(c.content for c in children if c.type == "text")
    prefix = {"heading": "Sheet: ", "quote": "id"}.get(context, "")
    assert _one_line(words) == _one_line(prefix + text)


@pytest.mark.parametrize("context", CONTEXTS)
@pytest.mark.parametrize("value", TRICKY)
def test_markdown_text_renders_tricky_text_as_itself(context, value):
    _renders_as_itself(context, value)


@pytest.mark.parametrize("context", CONTEXTS)
@given(st.text(_MARKDOWN_ALPHABET, min_size=1, max_size=30))
def test_markdown_text_renders_any_text_as_itself(context, value):
    _renders_as_itself(context, value)


@pytest.mark.parametrize("number", ["0.10", "-0.5", "+12.3 %", "7.500e-5", "1 × 250 mL", "-"])
def test_markdown_text_leaves_numbers_alone(number):
    assert markdown_text(number) == number


# ---------------------------------------------------------------------------------------------
# HTML
# ---------------------------------------------------------------------------------------------


class _Tags(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags = []
        self.title = ""
        self._in_title = False

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self._in_title = tag == "title"

    def handle_endtag(self, tag):
        self._in_title = False

    def handle_data(self, data):
        if self._in_title:
            self.title += data


def test_html_sheets_escape_the_hostile_text(hostile):
    for name, text in _html_sheets(hostile).items():
        parser = _Tags()
        parser.feed(text)
        assert "script" not in parser.tags, name
        assert "b" not in parser.tags, name
        assert "<script" not in text, name
        # The document title holds the plan's title as written.
        assert HOSTILE_TITLE.replace("\r\n", "\n") in parser.title.replace("\r\n", "\n"), name


# ---------------------------------------------------------------------------------------------
# Terminal
# ---------------------------------------------------------------------------------------------


def _terminal(renderable, width=200):
    console = Console(width=width, record=True, file=io.StringIO(), color_system=None)
    console.print(renderable)
    return console.export_text(styles=False)


def test_terminal_prints_rich_markup_literally(hostile):
    with_detail = dataclasses.replace(
        hostile,
        checks=(*hostile.checks, Check("[bold]name[/]", "warn", "[red]acid[/] :warning: short")),
    )
    text = _terminal(render_plan(with_detail))
    assert "[bold red]red[/]" in text
    assert "[link=https://example.invalid]y[/link]" in text
    # Stock ids as column headers and in the totals, and a check's name and detail.
    assert text.count("=[bold]acid[/]") >= 2
    assert "+[bold]iron[/]-strong" in text
    assert "[bold]name[/]" in text
    assert "[red]acid[/] :warning: short" in text


def test_simulation_budget_prints_stock_ids_literally(hostile):
    result = simulate(
        hostile.inputs, hostile.mixtures, trials=200, rng=np.random.default_rng(1), global_fit=False
    )
    gum = propagate(hostile.inputs, hostile.mixtures)
    text = _terminal(render_simulation(result, gum, formulas=True), width=400)
    shown = [row.input for row in gum.K.contributors[:TERMINAL_BUDGET_ROWS]]
    # Every stock id carries rich markup, so a row naming a stock shows whether it is read.
    with_markup = [name for name in shown if "[/" in name]
    assert with_markup
    for name in with_markup:
        assert name in text
