"""Each known hazard of hostile spec files, handled where it arises, and each bound enforced.

The end-to-end corpus is in test_hostile.py; here each hazard is pinned down at the stage
that owns it, with the reason it is a hazard beside the check.
"""

from __future__ import annotations

import contextlib
import json
import multiprocessing
import re
import time
from fractions import Fraction

import numpy as np
import pytest
import sympy
import yaml

from conftest import REPO, findings_of
from speclint.analysis.algebra import K, LoopAlgebra, Ratio, S, poly
from speclint.analysis.gainset import GainSet
from speclint.analysis.margins import (
    MarginsUnsupported,
    margin_gains,
    margins_at,
    stable_gains_delayed,
)
from speclint.expr import MAX_MAGNITUDE, ExprError, parse_block
from speclint.load import MAX_DEPTH, _nesting_bound, read_spec
from speclint.validate import spec_schema, validate

BASE = """\
speclint: 1
title: Limits
loops:
  feed:
    plant: "1/(s*(s + 2))"
    controller: "K"
    gain: {symbol: K, nominal: 1}
requirements:
  - id: H-1
    loop: feed
    origin: limits test
    tracking: {reference: step, magnitude: 1, max_error: 0.5}
    verification: {method: analysis}
"""


def rules_at(raw: bytes) -> list[tuple[str, int | None, int | None]]:
    result = read_spec("x.yaml", raw)
    return [(f.rule, f.location.line, f.location.column) for f in result.findings]


# --------------------------------------------------------------------------------------------
# Nesting: libyaml must never see text it could recurse on (it crashed the process at some
# 25,000 brackets in versions we met), and the pure parser's composer must stop at the cap.


@pytest.mark.parametrize(
    "line",
    [
        "- " * 30_000 + "x",
        "? " * 30_000 + "x",
        "-\t" * 30_000 + "x",
        "[" * 30_000,
        "{a: " * 30_000,
    ],
    ids=["dashes", "question-marks", "dash-tab", "brackets", "braces"],
)
def test_nesting_scan_sees_every_indicator(line: str) -> None:
    # The scan must bound the nesting by more than the C parser's safe depth, so that such
    # text goes to the pure-Python parser.
    assert _nesting_bound("x:\n  " + line + "\n") > 1000


def test_nesting_scan_keeps_ordinary_specs_on_the_fast_parser() -> None:
    text = (REPO / "examples" / "film-and-infeed.yaml").read_text(encoding="utf-8")
    assert _nesting_bound(text) < 50


@pytest.mark.parametrize("opener", ["- ", "? ", "[", "{a: "])
def test_deep_nesting_is_refused_by_the_composer(opener: str) -> None:
    raw = ("speclint: 1\nx:\n  " + opener * 30_000 + "1\n").encode()
    start = time.perf_counter()
    found = rules_at(raw)
    assert time.perf_counter() - start < 5
    assert found and found[0][0] in ("SL108", "SL111", "SL103"), found
    assert all(line is not None and column is not None for _, line, column in found)


def test_depth_cap_counts_levels_exactly() -> None:
    # MAX_DEPTH collections nest fine; one more is refused.
    ok = "x: " + "[" * (MAX_DEPTH - 1) + "]" * (MAX_DEPTH - 1) + "\n"
    deep = "x: " + "[" * MAX_DEPTH + "]" * MAX_DEPTH + "\n"
    assert rules_at(ok.encode()) == []
    assert [r for r, _, _ in rules_at(deep.encode())] == ["SL108"]


# --------------------------------------------------------------------------------------------
# Numbers


def test_integers_beyond_the_conversion_limit_never_reach_int() -> None:
    # Python refuses to convert more than 4,300 digits (ValueError, outside yaml.YAMLError).
    with pytest.raises(ValueError):
        int("9" * 5000)
    assert rules_at(b"speclint: 1\ndelay: " + b"9" * 5000 + b"\n") == [("SL112", 2, 8)]


@pytest.mark.parametrize(
    ("text", "ok"),
    [
        ("1e30", True),
        ("-1e30", True),
        ("1e-30", True),
        ("0", True),
        ("0.0", True),
        ("1e31", False),
        ("1e-31", False),
        ("0.00000000000000000000000000000001", False),
        ("0x" + "f" * 30, False),
        ("10000000000000000000000000000000", False),
    ],
)
def test_numbers_keep_within_the_si_prefix_range(text: str, ok: bool) -> None:
    found = rules_at(f"a: {text}\n".encode())
    assert (found == []) is ok, found
    if not ok:
        assert found == [("SL112", 1, 4)]


def test_non_finite_numbers_never_reach_the_schema() -> None:
    # The hazard: NaN compares false with everything, so it passes JSON Schema's `minimum`.
    from jsonschema import Draft202012Validator

    assert Draft202012Validator({"type": "number", "minimum": 0}).is_valid(float("nan"))
    for literal in (".nan", ".NaN", ".inf", "-.inf", "+.Inf"):
        raw = BASE.replace("nominal: 1", f"nominal: {literal}").encode()
        assert rules_at(raw) == [("SL112", 7, 32)], literal


def test_the_reader_makes_no_floats() -> None:
    doc = read_spec("x.yaml", b"a: [1, 0.5, 2.5e-3, -7, 0x1f, 0o17, 1e30]\n").document
    assert doc is not None
    assert all(isinstance(x, int | Fraction) for x in doc.data["a"])


# --------------------------------------------------------------------------------------------
# Control characters: raw, and produced by the escapes of double-quoted scalars


@pytest.mark.parametrize(
    ("raw", "where"),
    [
        (b'speclint: 1\ntitle: "red \\e[31m"\n', (2, 8)),
        (b'speclint: 1\ntitle: "\\x1b]0;owned\\x07"\n', (2, 8)),
        (b'speclint: 1\ntitle: "a\\rb"\n', (2, 8)),
        (b'speclint: 1\ntitle: "\\u202eevil"\n', (2, 8)),
        (b'speclint: 1\n"x\\n::error::forged": 1\n', (2, 1)),
        (b'speclint: 1\n"\\ufeffloops": {}\n', (2, 1)),
        (b'speclint: 1\n"tab\\there": 1\n', (2, 1)),
        ("speclint: 1\ntitle: a\u202eb\n".encode(), (2, 9)),
        ("speclint: 1\ntitle: a\u2066b\n".encode(), (2, 9)),
    ],
)
def test_control_characters_are_refused_where_they_stand(
    raw: bytes, where: tuple[int, int]
) -> None:
    assert rules_at(raw) == [("SL113", *where)]


def test_line_breaks_and_tabs_stay_allowed_in_quoted_values() -> None:
    doc = read_spec("x.yaml", b'text: "one\\ntwo\\tthree"\n').document
    assert doc is not None and doc.data["text"] == "one\ntwo\tthree"


# --------------------------------------------------------------------------------------------
# Schema patterns: ECMA `$` semantics, and linear time on long input


def schema_patterns() -> list[str]:
    found: list[str] = []

    def walk(node: object) -> None:
        if isinstance(node, dict):
            for key, value in node.items():
                if key == "pattern" and isinstance(value, str):
                    found.append(value)
                walk(value)
        elif isinstance(node, list):
            for item in node:
                walk(item)

    walk(spec_schema())
    return found


# A repeated group that holds a quantifier or an alternation can backtrack exponentially
# (common practice: the "nested quantifier" shape of catastrophic backtracking). An optional
# group (`(...)?`) is tried at most once and is safe.
_NESTED_QUANTIFIER = re.compile(r"\((?:[^()\\]|\\.)*[*+}|](?:[^()\\]|\\.)*\)[*+{]")


def test_schema_patterns_have_no_nested_quantifiers() -> None:
    patterns = schema_patterns()
    assert len(patterns) >= 5
    assert _NESTED_QUANTIFIER.search("^(a+)+$")  # the checker itself can fail
    assert _NESTED_QUANTIFIER.search("^(a|aa)*$")
    for pattern in patterns:
        assert not _NESTED_QUANTIFIER.search(pattern), pattern
        assert pattern.startswith("^") and pattern.endswith("$"), pattern


@pytest.mark.parametrize("filler", ["a", "1", "-", "A1-", "9.", " "])
def test_schema_patterns_take_linear_time_on_100_kb(filler: str) -> None:
    text = filler * (100_000 // len(filler)) + "!"
    for pattern in schema_patterns():
        start = time.perf_counter()
        assert re.search(pattern, text) is None
        # Generous: a linear scan of 100 kB takes well under a millisecond.
        assert time.perf_counter() - start < 0.5, pattern


def test_pattern_end_anchor_does_not_accept_a_final_line_break(speclint) -> None:
    # Python's `$` matches before a final "\n"; the schema's patterns are ECMA-262, where it
    # does not. A block scalar (`id: |`) ends in "\n".
    text = BASE.replace("  - id: H-1\n", "  - id: |\n      H-1\n").replace(
        "max_error: 0.5", 'max_error: "5%\\n"'
    )
    run = speclint({"spec.yaml": text})
    assert run.code == 1
    codes = [(f["rule"], f["line"], f["column"]) for f in run.report["findings"]]
    assert ("SL204", 9, 9) in codes, findings_of(run)
    assert ("SL204", 13, 58) in codes, findings_of(run)
    assert "SL001" not in run.codes


# --------------------------------------------------------------------------------------------
# Loops and requirements per file


def test_loops_per_file_are_capped_at_the_first_one_over(speclint) -> None:
    loops = "".join(f"  l{i}: {{plant: '1/(s + 1)'}}\n" for i in range(2001))
    start = time.perf_counter()
    run = speclint({"spec.yaml": "speclint: 1\nloops:\n" + loops})
    assert time.perf_counter() - start < 20
    assert run.code == 1
    hit = [f for f in run.report["findings"] if f["rule"] == "SL204"]
    assert len(hit) == 1, findings_of(run)
    # The 2,001st loop stands on line 2 + 2001.
    assert (hit[0]["line"], hit[0]["column"]) == (2003, 3)
    assert "2,001 entries" in hit[0]["message"] and "2,000" in hit[0]["message"]
    assert run.report["loops"] == []  # none analysed


def test_requirements_per_file_are_capped(speclint) -> None:
    reqs = "".join(f"  - {{id: R-{i}, origin: x}}\n" for i in range(2001))
    run = speclint({"spec.yaml": "speclint: 1\nrequirements:\n" + reqs})
    hit = [f for f in run.report["findings"] if f["rule"] == "SL204"]
    assert [(f["line"], f["column"]) for f in hit] == [(2003, 5)], findings_of(run)


def test_jsonschema_messages_are_cut_short() -> None:
    doc = read_spec(
        "x.yaml", b"speclint: 1\nloops: {a: {plant: '1/s', extra: " + b"x" * 5000 + b"}}\n"
    )
    assert doc.document is not None
    for item in validate(doc.document):
        assert len(item.message) < 400


# --------------------------------------------------------------------------------------------
# Expressions: sizes of numbers


@pytest.mark.parametrize(
    "text",
    ["1e101", "1e-101", "k^8/(s + 1)", "(1e30*s + 1)^4", "1/(1e-60*s*1e-60 + 1)", "s*1e99*1e99"],
)
def test_coefficients_beyond_the_magnitude_bound_are_refused(text: str) -> None:
    result = parse_block(text, "K", {"k": Fraction(10**30)})
    assert isinstance(result, ExprError), result
    assert result.kind == "limit"


def test_coefficients_at_the_magnitude_bound_are_read_exactly() -> None:
    result = parse_block(f"1e{MAX_MAGNITUDE}/(1e-{MAX_MAGNITUDE}*s + 1)", "K", {})
    assert isinstance(result, Ratio)
    assert result.num == poly(sympy.Integer(10) ** MAX_MAGNITUDE)


# --------------------------------------------------------------------------------------------
# Frequency analysis at the edge of double precision: a finding, never an exception


def loop_of(num: sympy.Expr, den: sympy.Expr, delay: Fraction | None = None) -> LoopAlgebra:
    return LoopAlgebra(
        controller=Ratio(poly(K), poly(1)),
        plant=Ratio(poly(num), poly(den)),
        feedback=Ratio.one(),
        delay=delay,
        nominal=Fraction(1),
        limits=GainSet.positive(),
        gain_symbol="K",
    )


TINY = sympy.Rational(1, 10**60)
EXTREME = [
    # Dead time far too short for the loop: its phase reaches -180° beyond 1e300 rad/s.
    loop_of(sympy.Integer(1), S * (S + 2), Fraction(1, 10**30)),
    # Coefficients 120 orders of magnitude apart, with dead time.
    loop_of(sympy.Integer(10) ** 60, S * (S + TINY), Fraction(1, 10**30)),
    # Coefficients 200 orders apart.
    loop_of(sympy.Integer(10) ** 100, S * (S + sympy.Rational(1, 10**100))),
]


@pytest.mark.parametrize("loop", EXTREME)
def test_extreme_loops_give_reasons_not_exceptions(loop: LoopAlgebra) -> None:
    with np.errstate(all="raise"):
        for compute in (
            lambda: margins_at(loop, None),
            lambda: margin_gains(loop, min_gain_margin_db=6, max_sensitivity_peak=2),
            lambda: margin_gains(loop, min_delay_margin_s=Fraction(1, 1000)),
        ):
            try:
                compute()
            except MarginsUnsupported as exc:  # the one exception allowed: it says why
                assert str(exc)
        delayed = stable_gains_delayed(loop)
        assert delayed.gains is not None or delayed.unsupported


def test_a_gain_margin_beyond_double_range_is_met_only_without_phase_crossover() -> None:
    # K/(s(s+2)) has no phase crossover: its gain margin is infinite for every gain (a
    # second-order type-1 loop never reaches -180°; common practice).
    gains = margin_gains(loop_of(sympy.Integer(1), S * (S + 2)), min_gain_margin_db=10**30)
    assert gains.contains(Fraction(1)) and gains.contains(Fraction(10**6))
    # K/(s(s+1)(s+2)) crosses -180° at ω = √2, where K/6 is the gain at the critical point
    # (Routh: stable for K < 6); no finite gain keeps 1e30 dB from it.
    third = loop_of(sympy.Integer(1), S * (S + 1) * (S + 2))
    assert margin_gains(third, min_gain_margin_db=10**30).is_empty()


def test_json_report_has_no_non_finite_numbers(speclint) -> None:
    text = BASE.replace('"1/(s*(s + 2))"', '"1e60/(s*(s + 1e-60))"').replace(
        "    gain:", "    delay: 1e-30\n    gain:"
    )
    run = speclint({"spec.yaml": text})
    assert "SL001" not in run.codes, findings_of(run)
    json.loads(run.out, parse_constant=lambda c: pytest.fail(f"{c} in the JSON report"))
    assert "SL406" in run.codes  # the margins say why they are missing


def test_yaml_safe_loader_would_have_run_code() -> None:
    # Why tags are refused: PyYAML's full loader builds Python objects from them.
    text = "!!python/object/apply:builtins.len [[1, 2, 3]]"
    assert yaml.unsafe_load(text) == 3
    assert rules_at(f"speclint: 1\ntitle: {text}\n".encode()) == [("SL109", 2, 8)]


# --------------------------------------------------------------------------------------------
# Internal errors and the time budget


OTHER = """\
speclint: 1
requirements:
  - id: OK-1
    origin: a second file, checked even when the first one breaks speclint
    bogus: 1
"""


def test_internal_error_in_a_file_is_a_finding_and_exit_2(speclint, monkeypatch) -> None:
    import speclint.pipeline as pipeline

    real = pipeline.validate

    def broken(doc):  # stands for a bug of ours met on one particular file
        if doc.path == "a.yaml":
            raise RuntimeError("stage failed")
        return real(doc)

    monkeypatch.setattr(pipeline, "validate", broken)
    run = speclint({"a.yaml": BASE, "b.yaml": OTHER})
    assert run.code == 2
    assert "Traceback" not in run.err and run.err == ""
    bug = [f for f in run.report["findings"] if f["rule"] == "SL001"]
    assert len(bug) == 1 and bug[0]["path"] == "a.yaml"
    assert "a.yaml" in bug[0]["message"] and "RuntimeError: stage failed" in bug[0]["message"]
    assert "bug" in bug[0]["hint"]
    # The other file was still checked.
    assert ("SL201", "b.yaml") in [(f["rule"], f["path"]) for f in run.report["findings"]]


def test_internal_error_in_a_loop_is_located_at_the_loop(speclint, monkeypatch) -> None:
    from speclint import judge

    def broken(loop, requirements):
        raise ZeroDivisionError("division by zero")

    monkeypatch.setattr(judge, "judge_loop", broken)
    run = speclint({"a.yaml": BASE}, "--jobs", "1")
    assert run.code == 2
    bug = [f for f in run.report["findings"] if f["rule"] == "SL001"]
    assert [(f["line"], f["column"]) for f in bug] == [(4, 3)], findings_of(run)
    statuses = [r["status"] for r in run.report["requirements"]]
    assert statuses == ["invalid"]


def test_internal_error_exit_code_also_with_the_console_report(speclint, monkeypatch) -> None:
    import speclint.pipeline as pipeline

    monkeypatch.setattr(pipeline, "validate", lambda doc: 1 / 0)
    run = speclint({"a.yaml": BASE}, fmt="console")
    assert run.code == 2
    assert "internal error while checking a.yaml" in run.out
    assert "report this as a bug" in run.out


def stubborn(loop, requirements):
    """An analysis that never ends and swallows every ordinary exception on the way."""
    while True:
        with contextlib.suppress(Exception):
            time.sleep(0.01)


MANY = "speclint: 1\nloops:\n" + "".join(
    f"  l{i}:\n    plant: '1/(s + {i + 1})'\n" for i in range(6)
)


@pytest.mark.parametrize("jobs", ["1", "2"])
def test_budget_stops_a_stubborn_analysis_and_then_the_file(speclint, monkeypatch, jobs) -> None:
    import speclint.pipeline as pipeline
    from speclint import judge

    monkeypatch.setattr(judge, "judge_loop", stubborn)
    monkeypatch.setattr(pipeline, "LOOP_BUDGET_S", 0.3)
    # Workers forked from this process, so that they see the stand-ins above (those from the
    # fork server would run the real analysis, with the real budget).
    fork = multiprocessing.get_context("fork")
    monkeypatch.setattr(pipeline, "worker_context", lambda: fork)
    start = time.perf_counter()
    run = speclint({"a.yaml": MANY}, "--jobs", jobs)
    elapsed = time.perf_counter() - start
    assert run.code == 1
    budget = [f for f in run.report["findings"] if f["rule"] == "SL407"]
    assert len(budget) == 6, findings_of(run)
    took = [f for f in budget if "took longer" in f["message"]]
    skipped = [f for f in budget if "not analysed" in f["message"]]
    # Sequentially exactly MAX_EXPIRED_PER_FILE run out; with workers, those already started
    # when the third ran out also finish their budget.
    assert len(took) == pipeline.MAX_EXPIRED_PER_FILE if jobs == "1" else len(took) >= 3
    assert len(took) + len(skipped) == 6
    assert all(f["line"] is not None and f["column"] is not None for f in budget)
    assert elapsed < 30  # six stubborn loops at 0.3 s, well under a second of budget each


def test_time_budget_leaves_no_timer_behind() -> None:
    import signal

    from speclint.pipeline import BudgetExceeded, time_budget

    before = signal.getsignal(signal.SIGALRM)
    with pytest.raises(BudgetExceeded), time_budget(0.05):
        stubborn(None, [])
    assert signal.getitimer(signal.ITIMER_REAL) == (0.0, 0.0)
    assert signal.getsignal(signal.SIGALRM) is before
    with time_budget(5):
        pass
    assert signal.getitimer(signal.ITIMER_REAL) == (0.0, 0.0)


# --------------------------------------------------------------------------------------------
# Output: what reaches a terminal or a CI log


def test_console_escapes_controls_in_paths_and_keeps_markup_as_text(speclint, tmp_path) -> None:
    # A file name is not checked by the load stage; a pull request may choose it freely.
    name = "evil\x1b]0;owned\x07\nspec.yaml:1:1: error SL000 forged\u202e.yaml"
    text = "speclint: 1\n'[bold red]boom[/bold red]': 1\n"
    run = speclint({name: text}, "--color", "always", fmt="console")
    assert run.code == 1
    assert "\x1b]0" not in run.out and "\x07" not in run.out and "\u202e" not in run.out
    assert "\\x1b]0;owned\\x07\\x0aspec.yaml:1:1: error SL000 forged\\u202e.yaml" in run.out
    # No line of the report starts with the forged location.
    assert not any(line.startswith("spec.yaml:1:1") for line in run.out.splitlines())
    # Markup in user text stays text: the brackets are shown, not read as a style.
    assert 'unknown key "[bold red]boom[/bold red]"' in re.sub("\x1b\\[[0-9;]*m", "", run.out)


def test_github_annotations_drop_line_separators_and_bidi_controls(tmp_path) -> None:
    from speclint.findings import Finding, Location, Severity
    from speclint.report import Settings
    from speclint.report.github import render
    from speclint.results import RunResult

    message = "a\u2028::error::forged\u2029b\u202ec\x85d"
    result = RunResult(
        files=["a.yaml"],
        findings=[Finding("SL201", Severity.ERROR, message, Location("a.yaml", 1, 1))],
    )
    out = render(result, Settings("1"), cwd=tmp_path)
    assert out.splitlines()[0].endswith("::a::error::forgedbcd")
    assert not re.search("[\u2028\u2029\u202e\x85]", out)


def test_dangling_links_by_the_thousand_stay_fast(speclint) -> None:
    from speclint.trace import MAX_SUGGESTIONS

    reqs = "".join(
        f"  - {{id: R-{i}, traces_to: [R-{i}x], verification: {{method: test}}}}\n"
        for i in range(1500)
    )
    start = time.perf_counter()
    run = speclint({"spec.yaml": "speclint: 1\nrequirements:\n" + reqs})
    # Generous: about a second here; comparing every dangling ID with every ID took 17 s.
    assert time.perf_counter() - start < 10
    dangling = [f for f in run.report["findings"] if f["rule"] == "SL603"]
    assert len(dangling) == 1500
    suggested = [f for f in dangling if (f["hint"] or "").startswith("did you mean")]
    assert len(suggested) == MAX_SUGGESTIONS
    # The first ones still get the suggestion a typo deserves: R-0x → R-0.
    assert dangling[0]["hint"] == "did you mean 'R-0'?"


def test_unknown_loop_message_lists_a_few_loops_only(speclint) -> None:
    loops = "".join(f"  l{i}: {{plant: '1/(s + 1)'}}\n" for i in range(40))
    text = (
        "speclint: 1\nloops:\n" + loops + "requirements:\n"
        "  - {id: R-1, origin: x, loop: nowhere, verification: {method: test},"
        " tracking: {reference: step, magnitude: 1, max_error: 1}}\n"
    )
    run = speclint({"spec.yaml": text})
    hit = next(f for f in run.report["findings"] if f["rule"] == "SL311")
    assert hit["message"].endswith("and 28 more)")


# --------------------------------------------------------------------------------------------
# Every bound is documented in the README with the value the code enforces


def test_readme_limits_match_the_code() -> None:
    from speclint import expr, load, pipeline, trace

    readme = (REPO / "README.md").read_text(encoding="utf-8")
    section = readme[readme.index("## Limits") : readme.index("## Caution")]
    schema = spec_schema()
    expected = [
        f"| spec file size | 1 MiB ({load.MAX_FILE_BYTES:,} bytes)",
        f"| YAML nesting depth | {load.MAX_DEPTH} levels",
        f"| YAML nodes per file | {load.MAX_NODES:,} |",
        f"at most {load.MAX_NUMBER_DIGITS} digits, a decimal exponent within ±{load.MAX_DECIMAL_EXPONENT}, "
        f"a size within 1e-{load.MAX_MAGNITUDE} to 1e{load.MAX_MAGNITUDE}",
        f"| loops per file | {schema['properties']['loops']['maxProperties']:,} |",
        f"| requirements per file | {schema['properties']['requirements']['maxItems']:,} |",
        f"| expression length | {expr.MAX_LENGTH:,} characters |",
        f"| expression parts (syntax-tree nodes) | {expr.MAX_NODES} |",
        f"| nested brackets in an expression | {expr.MAX_PAREN_DEPTH} |",
        f"| operators nested in an expression | {expr.MAX_TREE_DEPTH} levels |",
        f"at most {expr.MAX_DIGITS} digits, a decimal exponent within ±{expr.MAX_DECIMAL_EXPONENT} |",
        f"a whole number from 0 to {expr.MAX_EXPONENT} |",
        f"| polynomial degree | {expr.MAX_DEGREE} in `s` and {expr.MAX_DEGREE} in the gain",
        f"each within 1e-{expr.MAX_MAGNITUDE} to 1e{expr.MAX_MAGNITUDE}, and at most {expr.MAX_COEFF_BITS:,} bits",
        f"| analysis of one loop | {pipeline.LOOP_BUDGET_S:g} s |",
        f"run out of that time | {pipeline.MAX_EXPIRED_PER_FILE};",
        f"stop after {trace.MAX_SUGGESTIONS} dangling",
        f"against every ID | {trace.ID_PATTERN_BUDGET_S:g} s |",
    ]
    for text in expected:
        assert text in section, text
    schema_expression = schema["$defs"]["expression"]["maxLength"]
    assert schema_expression == expr.MAX_LENGTH


def test_a_backtracking_id_pattern_is_a_configuration_error(tmp_path, monkeypatch) -> None:
    # The configuration is part of the pull request too: (a+)+ backtracks exponentially on
    # an ID of a's that does not match (common practice: catastrophic backtracking).
    import io

    from speclint.cli import main

    monkeypatch.chdir(tmp_path)
    (tmp_path / "speclint.toml").write_text('id_pattern = "(a+)+b"\n')
    (tmp_path / "spec.yaml").write_text(
        "speclint: 1\nrequirements:\n  - {id: " + "a" * 60 + ", origin: x}\n"
    )
    out, err = io.StringIO(), io.StringIO()
    start = time.perf_counter()
    code = main(["check", "spec.yaml", "--no-cache"], out, err)
    assert time.perf_counter() - start < 30
    assert code == 2
    assert "id_pattern" in err.getvalue() and "backtracks" in err.getvalue()
    assert "Traceback" not in err.getvalue()


def test_an_alias_bomb_is_never_expanded() -> None:
    # Nine levels of nine aliases would expand to 9**9 (387 million) strings: printing,
    # comparing or validating that takes minutes and gigabytes. Aliases are refused and
    # stand as None, so the data stays as small as the text.
    raw = (REPO / "tests" / "hostile" / "alias-bomb.yaml").read_bytes()
    start = time.perf_counter()
    result = read_spec("bomb.yaml", raw)
    assert time.perf_counter() - start < 1
    assert result.document is not None
    assert result.document.data["i"] == [None] * 9
    assert len(json.dumps(result.document.data)) < 2 * len(raw)
    assert len([f for f in result.findings if f.rule == "SL106"]) == 8 * 9
