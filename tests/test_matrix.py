"""The Markdown traceability matrix: layout, determinism, escaping and `--check`.

Escaping is checked against an outside Markdown parser, markdown-it-py (a CommonMark
implementation, with the GFM table and strikethrough rules enabled): whatever a title
holds must come back as the same text, with no markup, link or HTML made from it.
"""

from __future__ import annotations

import html
import io
import json
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from markdown_it import MarkdownIt

from speclint.cli import main
from speclint.report import CAUTION, REPORTERS, Settings
from speclint.report.markdown import COLUMNS, code, render, text
from speclint.results import (
    CriterionResult,
    LoopResult,
    RequirementResult,
    RunResult,
    TraceCriterion,
    TraceNode,
)

MD = MarkdownIt("commonmark").enable("table").enable("strikethrough")

SYSTEM = """\
speclint: 1
requirements:
  - id: SYS-2
    title: Second root
    origin: customer list, item 2
  - id: SYS-1
    title: First root
    text: The line runs.
    origin: customer list, item 1
"""
LOW = """\
speclint: 1
loops:
  feed:
    output_unit: rad/s
    plant: "2/(s*(s + 1))"
    controller: "K"
    gain: {symbol: K, nominal: 1}
requirements:
  - id: MID-1
    title: Middle
    traces_to: [SYS-1]
  - id: R-1
    title: Feed follows ramps
    traces_to: [MID-1, SYS-2]
    loop: feed
    tracking: {reference: ramp, magnitude: 1, max_error: 0.5}
    margins: {min_phase_margin_deg: 45}
    verification: {method: test, evidence: [bench/run.csv]}
"""


def call(*argv: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    code_ = main(list(argv), out, err)
    return code_, out.getvalue(), err.getvalue()


@pytest.fixture
def repo(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    monkeypatch.chdir(tmp_path)
    (tmp_path / "system.yaml").write_text(SYSTEM, encoding="utf-8")
    (tmp_path / "low.yaml").write_text(LOW, encoding="utf-8")
    (tmp_path / "bench").mkdir()
    (tmp_path / "bench" / "run.csv").write_text("t,y\n")
    return tmp_path


def tables(markdown: str) -> list[list[list[str]]]:
    """Each table as rows of cell texts, as a CommonMark parser reads them."""
    out: list[list[list[str]]] = []
    row: list[str] | None = None
    for token in MD.parse(markdown):
        if token.type == "table_open":
            out.append([])
        elif token.type == "tr_open":
            row = []
        elif token.type == "tr_close":
            assert row is not None
            out[-1].append(row)
            row = None
        elif token.type == "inline" and row is not None:
            row.append("".join(c.content for c in token.children or []))
    return out


def test_layout_top_down_with_criteria_rows(repo):
    code_, out, _ = call("matrix")
    assert code_ == 0
    sections = [line for line in out.splitlines() if line.startswith("#")]
    assert sections == [
        "# Traceability matrix",
        "## Summary",
        "## Requirements by root",
        "### SYS-1 — First root",
        "### SYS-2 — Second root",
        "## Trace findings",
        "## Caution",
    ]
    first_root = tables(out)[2]  # after the two summary tables
    assert first_root[0] == list(COLUMNS)
    names = [row[0] for row in first_root[1:]]
    assert names == ["SYS-1 First root", "↳ MID-1 Middle", "↳↳ R-1 Feed follows ramps", "", ""]
    r1, tracking, margin = first_root[3:6]
    assert r1[1] == "feed" and r1[7] == "test" and r1[8] == "bench/run.csv" and r1[9] == "none"
    assert tracking[2:4] == ["tracking, ramp", "≤ 0.5 rad/s"]
    assert margin[2:4] == ["margins, phase margin", "≥ 45°"]
    # R-1 serves two roots: it is shown under each.
    assert [row[0] for row in tables(out)[3][1:]][:2] == [
        "SYS-2 Second root",
        "↳ R-1 Feed follows ramps",
    ]


def test_summary_counts_agree_with_the_json_report(repo):
    _, out, _ = call("matrix")
    _, report, _ = call("check", "--format", "json")
    statuses = json.loads(report)["summary"]["statuses"]
    verdicts = {row[0]: row[1] for row in tables(out)[0][1:]}
    for word in ("met", "retune", "unreachable", "conflict", "unstable", "invalid"):
        assert int(verdicts[word]) == statuses.get(word, 0)
    assert verdicts["total"] == "4"


def test_same_input_same_bytes_in_any_order(repo):
    one = call("matrix")[1]
    assert call("matrix")[1] == one
    assert call("matrix", "low.yaml", "system.yaml")[1] == one
    assert call("matrix", "system.yaml", "low.yaml")[1] == one


def test_check_format_markdown_is_the_same_renderer(repo):
    _, checked, _ = call("check", "--format", "markdown")
    assert checked == call("matrix")[1]


def test_caution_closes_the_matrix(repo):
    out = call("matrix")[1]
    assert out.rstrip().endswith(CAUTION)
    assert "IEC 61508" in CAUTION


def test_requirements_reaching_no_root_are_listed(repo):
    (repo / "loose.yaml").write_text(
        "speclint: 1\nrequirements:\n  - id: L-1\n    traces_to: [L-2]\n"
        "  - id: L-2\n    traces_to: [L-1]\n  - id: L-3\n    traces_to: [GONE]\n"
    )
    out = call("matrix")[1]
    part = out[out.index("## Not traced to a root") : out.index("## Trace findings")]
    names = [row[0] for row in tables(part)[0][1:]]
    assert names == ["L-1", "L-2", "L-3 (traces to undefined GONE)"]
    findings = out[out.index("## Trace findings") :]
    assert "SL605" in findings and "SL603" in findings


NASTY = "a | b *c* _d_ `e` <b>f</b> [g](http://x) ![h](i) $x^2$ ~~j~~ &amp; \\ # k\nnext line"


def test_user_text_cannot_break_the_table_or_make_markup(repo):
    title = NASTY.replace("\\", "\\\\").replace('"', '\\"').replace("\n", "\\n")
    (repo / "system.yaml").write_text(
        SYSTEM.replace("title: First root", f'title: "{title}"'), encoding="utf-8"
    )
    out = call("matrix")[1]
    kinds = {t.type for token in MD.parse(out) for t in token.children or []}
    assert not kinds & {"link_open", "image", "html_inline", "em_open", "s_open"}
    first_root = tables(out)[2]
    assert all(len(row) == len(COLUMNS) for row in first_root)
    assert first_root[1][0] == "SYS-1 " + " ".join(NASTY.split())


@settings(max_examples=100, deadline=None)
@given(st.text(alphabet=st.sampled_from("ab 1.-+=#*_`[]()<>!|~&$\\:;/\n\tä—"), max_size=30))
def test_escaped_text_reads_back_as_itself(value):
    rendered = MD.renderInline(text(value))
    assert "<" not in rendered.replace("&lt;", "")  # no tag of any kind
    assert html.unescape(rendered) == " ".join(value.split())


@pytest.mark.parametrize("value", ["- item", "+ item", "1. item", "12) item", "# head", "= x"])
def test_line_starts_are_not_lists_or_headings(value):
    rendered = MD.render(f"> {text(value)}")
    assert rendered == f"<blockquote>\n<p>{html.escape(value, quote=False)}</p>\n</blockquote>\n"


def test_paths_are_code_even_with_a_pipe():
    cell = f"| {code('bench/a|b.csv')} |"
    table = MD.render(f"| x |\n|:--|\n{cell}\n")
    assert "<code>bench/a|b.csv</code>" in table


def test_analysed_figures_fill_the_rows():
    node = TraceNode(
        "R-1",
        "a.yaml",
        3,
        title="Ramp",
        origin="list",
        loop="feed",
        criteria=(TraceCriterion("tracking", {"reference": "ramp"}, "≤ 0.5"),),
        verification="analysis",
        review="changed",
        reviewed_by="Ana",
        reviewed_on="2025-03-04",
        changed=("criteria",),
    )
    crit = CriterionResult("tracking", 0.5, 0.31, True, ((0.21, 25.0),), {"reference": "ramp"})
    verdict = RequirementResult("R-1", "a.yaml", 3, "feed", "met", None, (crit,), ((0.21, 25.0),))
    loop = LoopResult("feed", "a.yaml", 1, gain_symbol="K", nominal=1.0)
    result = RunResult(["a.yaml"], [], [loop], [verdict], trace=[node])
    out = REPORTERS["markdown"](result, Settings("0"))
    assert out == render(result, Settings("1"))  # no version in the text
    rows = tables(out)[2]
    assert (
        rows[1][5:7] == ["K: 0.21 to 25", "met"]
        and rows[1][9] == "changed: criteria (Ana, 2025-03-04)"
    )
    assert rows[2][2:7] == ["tracking, ramp", "≤ 0.5", "0.31", "K: 0.21 to 25", "met"]


# -- --check


def test_check_passes_when_current_and_fails_with_a_short_diff(repo):
    assert call("matrix", "--output", "MATRIX.md") == (0, "", "")
    assert call("matrix", "--check", "--output", "MATRIX.md")[0] == 0
    matrix = repo / "MATRIX.md"
    matrix.write_bytes(matrix.read_bytes().replace(b"\n", b"\r\n"))  # a CRLF checkout
    assert call("matrix", "--check", "--output", "MATRIX.md")[0] == 0
    (repo / "system.yaml").write_text(SYSTEM.replace("First root", "First root, renamed"))
    code_, out, _ = call("matrix", "--check", "--output", "MATRIX.md")
    assert code_ == 1
    assert out.startswith(
        "MATRIX.md is out of date; write it again with: speclint matrix --output MATRIX.md"
    )
    assert "-### SYS-1 — First root\n" in out and "+### SYS-1 — First root, renamed\n" in out
    assert len(out.splitlines()) <= 42


def test_check_truncates_a_long_diff(repo):
    (repo / "MATRIX.md").write_text("\n".join(f"line {i}" for i in range(200)))
    code_, out, _ = call("matrix", "--check", "--output", "MATRIX.md")
    assert code_ == 1 and "more diff lines" in out and len(out.splitlines()) == 42


def test_check_on_a_missing_file_and_without_output(repo):
    code_, out, _ = call("matrix", "--check", "--output", "nowhere.md")
    assert code_ == 1 and "does not exist" in out
    code_, _, err = call("matrix", "--check")
    assert code_ == 2 and "--output" in err
