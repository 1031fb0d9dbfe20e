"""The load stage: every malformed file is a located finding and exit 1, never a traceback."""

from __future__ import annotations

from fractions import Fraction

import pytest

from conftest import findings_of
from speclint.load import MAX_FILE_BYTES, read_spec

GOOD_HEAD = "speclint: 1\n"

# (name, file bytes, expected rule, expected line, expected column)
MALFORMED = [
    ("syntax: unclosed flow list", b"speclint: 1\nloops: [1, 2\nx: 3\n", "SL103", 3, 2),
    (
        "syntax: bad indentation",
        b"speclint: 1\nloops:\n  a:\n    plant: x\n   b: 2\n",
        "SL103",
        5,
        4,
    ),
    ("tab used for indentation", b"speclint: 1\nloops:\n\tfeed: 1\n", "SL103", 3, 1),
    ("invalid UTF-8", b"speclint: 1\ntitle: caf\xe9\n", "SL102", 2, 11),
    ("empty file", b"", "SL104", 1, 1),
    ("whitespace only", b"   \n\n  \n", "SL104", 1, 1),
    ("comments only", b"# nothing here\n", "SL104", 1, 1),
    ("top level is a list", b"- speclint: 1\n", "SL110", 1, 1),
    ("top level is a scalar", b"just words\n", "SL110", 1, 1),
    ("duplicate key", b"speclint: 1\ntitle: a\ntitle: b\n", "SL105", 3, 1),
    (
        "duplicate key deep",
        b"speclint: 1\nloops:\n  a:\n    plant: '1'\n    plant: '2'\n",
        "SL105",
        5,
        5,
    ),
    ("alias", b"speclint: 1\ntitle: &t x\ndescription: *t\n", "SL106", 3, 14),
    (
        "alias bomb",
        b"speclint: 1\na: &a [1,1,1,1,1,1,1,1,1]\nb: &b [*a,*a,*a,*a,*a,*a,*a,*a,*a]\nc: &c [*b,*b,*b,*b,*b,*b,*b,*b,*b]\n",
        "SL106",
        3,
        8,
    ),
    (
        "python object tag",
        b"speclint: 1\ntitle: !!python/object/apply:os.system ['true']\n",
        "SL109",
        2,
        8,
    ),
    (
        "non-finite number",
        b"speclint: 1\nloops:\n  a:\n    plant: '1'\n    delay: .nan\n",
        "SL112",
        5,
        12,
    ),
    ("huge integer", b"speclint: 1\ntitle: x\ndelay: " + b"9" * 5000 + b"\n", "SL112", 3, 8),
    ("huge exponent", b"speclint: 1\nx: 1e999999999\n", "SL112", 2, 4),
    (
        "deep flow nesting",
        b"speclint: 1\nx: " + b"[" * 50_000 + b"]" * 50_000 + b"\n",
        "SL108",
        2,
        35,
    ),
    (
        "deep block nesting",
        b"speclint: 1\nx:\n" + b"".join(b" " * i + b"- \n" for i in range(1, 60)),
        "SL108",
        None,
        None,
    ),
    ("NUL byte", b"speclint: 1\ntitle: a\x00b\n", "SL113", 2, 9),
    ("escape character", b"speclint: 1\ntitle: \x1b[2Jx\n", "SL113", 2, 8),
    ("byte-order mark mid-file", "speclint: 1\n\ufeffloops: {}\n".encode(), "SL113", 2, 1),
    ("two documents", b"speclint: 1\n---\nspeclint: 1\n", "SL115", 2, 1),
    ("collection as key", b"speclint: 1\n? [a, b]\n: 1\n", "SL111", 2, 3),
    ("file too large", b"speclint: 1\n" + b"#" * (MAX_FILE_BYTES + 10) + b"\n", "SL107", 1, 1),
]


@pytest.mark.parametrize(
    ("name", "raw", "rule", "line", "column"), MALFORMED, ids=[m[0] for m in MALFORMED]
)
def test_malformed_file_is_a_located_finding(speclint, name, raw, rule, line, column):
    run = speclint({"spec.yaml": raw})
    assert run.code == 1, run.err
    assert run.err == ""
    codes = run.codes
    assert rule in codes, findings_of(run)
    hit = next(f for f in run.report["findings"] if f["rule"] == rule)
    assert hit["path"] == "spec.yaml"
    assert hit["line"] is not None and hit["column"] is not None
    if line is not None:
        assert (hit["line"], hit["column"]) == (line, column), findings_of(run)


def test_yaml_1_2_scalars_stay_strings():
    # YAML 1.1 (PyYAML's default) reads these as booleans and dates; YAML 1.2 does not.
    doc = read_spec("x.yaml", b"a: no\nb: on\nc: 2024-05-01\nd: yes\ne: true\nf: ~\n").document
    assert doc is not None
    assert doc.data == {"a": "no", "b": "on", "c": "2024-05-01", "d": "yes", "e": True, "f": None}


def test_decimals_are_exact_fractions():
    doc = read_spec("x.yaml", b"a: 0.1\nb: 1.10\nc: -2.5e-3\nd: 7\ne: 1.\n").document
    assert doc is not None
    assert doc.data == {
        "a": Fraction(1, 10),
        "b": Fraction(11, 10),
        "c": Fraction(-1, 400),
        "d": 7,
        "e": 1,
    }
    assert isinstance(doc.data["a"], Fraction)
    assert doc.plain_text[("b",)] == "1.10"


def test_marks_for_values_and_keys():
    doc = read_spec("x.yaml", b"top:\n  list:\n    - {k: v}\n    - 2\n").document
    assert doc is not None
    assert doc.location(("top", "list", 0, "k")).line == 3
    assert doc.location(("top", "list", 0, "k")).column == 11
    assert doc.location(("top", "list", 0, "k"), key=True).column == 8
    assert doc.location(("top", "list", 1)).line == 4


def test_crlf_and_cr_line_endings_keep_line_numbers():
    for newline in (b"\r\n", b"\r"):
        raw = newline.join([b"a: 1", b"b: 2", b"b: 3", b""])
        result = read_spec("x.yaml", raw)
        assert [(f.rule, f.location.line) for f in result.findings] == [("SL105", 3)]


def test_leading_byte_order_mark_is_accepted():
    result = read_spec("x.yaml", "\ufeffspeclint: 1\n".encode())
    assert result.findings == []
    assert result.document is not None and result.document.data == {"speclint": 1}


def test_duplicate_key_keeps_the_first_value_and_says_where_it_was():
    result = read_spec("x.yaml", b"a: 1\nb: 2\na: 3\n")
    assert result.document is not None and result.document.data["a"] == 1
    assert "line 1" in result.findings[0].message
