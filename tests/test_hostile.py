"""The hostile corpus: spec files written to break a CI job, each run through `speclint check`.

Every case must give the expected finding at its exact line and column, exit 1, never an
internal error (SL001), write nothing but the --output file, and keep user text inert in
the console and GitHub formats. The small files live in tests/hostile/ (byte-exact; see
its .gitattributes); the big ones are generated here. Expected places were worked out
from the text of each file (1-based line and column of the offending character).

Timing: `benchmarks/hostile_corpus.py` measures every case against the 2-second target;
here only hangs are caught (a real process with a generous timeout), so the suite cannot
flake on a busy machine.
"""

from __future__ import annotations

import hashlib
import io
import json
import os
import re
import subprocess
import sys
from collections.abc import Callable
from pathlib import Path

import pytest

from conftest import REPO
from speclint.cli import main
from speclint.load import MAX_FILE_BYTES, MAX_NODES

CORPUS = Path(__file__).parent / "hostile"

# Expected finding per corpus file: (rule, line, column).
EXPECTED: dict[str, tuple[str, int, int]] = {
    # YAML features that build objects or multiply data
    "alias-bomb": ("SL106", 3, 8),
    "merge-key-alias": ("SL106", 9, 11),
    "python-object-apply": ("SL109", 2, 8),
    "python-name": ("SL109", 2, 8),
    "python-module-key": ("SL111", 2, 3),
    "local-tag": ("SL109", 3, 8),
    "tag-directive": ("SL109", 3, 11),
    "set-tag": ("SL109", 2, 8),
    "two-documents": ("SL115", 15, 1),
    # expressions that would run code if evaluated (the text starts at column 13)
    "expr-import": ("SL301", 5, 36),  # the call's "(" after .system
    "expr-attribute": ("SL301", 5, 14),  # s.real: the "."
    "expr-dunder": ("SL301", 5, 53),
    "expr-lambda": ("SL301", 5, 13),
    "expr-call": ("SL301", 5, 14),  # K(s+1): the "(" that makes it a call
    "expr-comprehension": ("SL301", 5, 13),
    "expr-fstring": ("SL301", 5, 13),
    "expr-walrus": ("SL301", 5, 14),
    "expr-subscript": ("SL301", 5, 13),
    "expr-string": ("SL301", 5, 13),
    "expr-await": ("SL301", 5, 13),
    # sizes inside expressions
    "expr-huge-exponent": ("SL303", 5, 15),
    "expr-power-tower": ("SL303", 5, 16),  # 10^10 as an exponent
    "expr-long-integer": ("SL303", 5, 13),
    "expr-1e999": ("SL303", 5, 13),
    "expr-coefficient-range": ("SL303", 5, 16),
    "expr-deep-parentheses": ("SL303", 5, 63),  # the 51st "("
    "expr-degree-41": ("SL303", 5, 16),
    "expr-divide-by-zero": ("SL304", 5, 15),  # 1/0: the 0
    "expr-zero-divisor": ("SL304", 5, 16),
    "expr-zero-block": ("SL305", 5, 13),
    "expr-nan-name": ("SL302", 5, 13),
    "expr-lookalike-s": ("SL302", 5, 16),  # Cyrillic dze
    "expr-lookalike-gain": ("SL302", 6, 18),  # Greek capital kappa
    "expr-fullwidth": ("SL302", 5, 16),
    "expr-control-char": ("SL113", 5, 12),  # "\x00" escape in the quoted value
    "expr-not-text": ("SL203", 5, 12),
    # numbers
    "nan-literal": ("SL112", 8, 12),
    "inf-literal": ("SL112", 7, 32),
    "negative-inf": ("SL112", 13, 58),
    "nan-quoted": ("SL203", 8, 12),
    "inf-quoted-percent": ("SL204", 13, 58),
    "nan-percent": ("SL204", 13, 58),
    "exponent-1e999": ("SL112", 13, 44),
    "number-1e31": ("SL112", 7, 32),
    "number-1e-31": ("SL112", 8, 12),
    "integer-61-digits": ("SL112", 13, 44),
    "hex-huge": ("SL112", 7, 32),
    "date-as-number": ("SL203", 7, 32),
    "boolean-as-number": ("SL203", 7, 32),
    "yes-as-number": ("SL203", 13, 44),
    "null-as-number": ("SL203", 7, 32),
    "negative-zero-gain": ("SL204", 7, 32),
    "percent-newline": ("SL204", 13, 58),
    "id-block-scalar": ("SL204", 9, 9),
    # structure
    "empty": ("SL104", 1, 1),
    "whitespace-only": ("SL104", 1, 1),
    "comments-only": ("SL104", 1, 1),
    "top-level-list": ("SL110", 1, 1),
    "top-level-scalar": ("SL110", 1, 1),
    "top-level-null": ("SL104", 1, 1),
    "key-integer": ("SL201", 2, 1),
    "key-boolean": ("SL201", 2, 1),
    "key-null": ("SL201", 2, 1),
    "key-sequence": ("SL111", 2, 3),
    "key-mapping": ("SL111", 2, 1),
    "loop-name-integer": ("SL204", 3, 3),
    "duplicate-key": ("SL105", 7, 5),
    "constant-named-s": ("SL309", 8, 17),
    "gain-symbol-s": ("SL309", 7, 20),
    "evidence-outside": ("SL610", 14, 45),
    # encodings, line ends, invisible characters
    "invalid-utf8": ("SL102", 2, 11),
    "utf16": ("SL102", 1, 1),
    "overlong-utf8": ("SL102", 2, 8),
    "surrogate-utf8": ("SL102", 2, 8),
    "bom-start": ("SL201", 15, 1),
    "bom-middle": ("SL113", 3, 1),
    "bom-escaped-key": ("SL113", 5, 5),
    "crlf": ("SL201", 15, 1),
    "cr": ("SL201", 15, 1),
    "tab-indent": ("SL103", 5, 1),
    "nul-byte": ("SL113", 2, 15),
    "escape-raw": ("SL113", 2, 16),
    "escape-quoted-title": ("SL113", 2, 8),
    "escape-quoted-key": ("SL113", 2, 1),
    "newline-forged-key": ("SL113", 2, 1),
    "c1-control": ("SL113", 2, 16),
    "bidi-override": ("SL113", 10, 17),
    "line-separator-key": ("SL113", 2, 1),
    "markup-key": ("SL201", 2, 1),
}

BASE = (CORPUS / "duplicate-key.yaml").read_text(encoding="utf-8").replace('    plant: "1/s"\n', "")


def _loops(n: int) -> bytes:
    return (
        "speclint: 1\nloops:\n" + "".join(f"  l{i}: {{plant: '1/(s + 1)'}}\n" for i in range(n))
    ).encode()


def _requirements(n: int) -> bytes:
    body = "".join(f"  - {{id: R-{i}, origin: x}}\n" for i in range(n))
    return ("speclint: 1\nrequirements:\n" + body).encode()


def _indented(levels: int) -> bytes:
    return ("speclint: 1\nx:\n" + "".join(" " * i + "a:\n" for i in range(1, levels))).encode()


# Cases too big to commit: (content, rule, line, column).
GENERATED: dict[str, tuple[Callable[[], bytes], str, int, int]] = {
    "flow-brackets-30000": (
        lambda: b"speclint: 1\nx: " + b"[" * 30_000 + b"]" * 30_000,
        "SL108",
        2,
        35,
    ),
    "flow-unclosed-30000": (lambda: b"speclint: 1\nx: " + b"[" * 30_000, "SL108", 2, 35),
    "flow-mappings-30000": (
        lambda: b"speclint: 1\nx: " + b"{a: " * 30_000 + b"1" + b"}" * 30_000,
        "SL108",
        2,
        128,
    ),
    "block-dashes-30000": (
        lambda: b"speclint: 1\nx:\n  " + b"- " * 30_000 + b"1\n",
        "SL108",
        3,
        65,
    ),
    "block-questions-30000": (
        lambda: b"speclint: 1\nx:\n  " + b"? " * 30_000 + b"1\n",
        "SL111",
        3,
        5,
    ),
    "block-indentation-1000": (lambda: _indented(1000), "SL108", 34, 33),
    "long-line": (lambda: b"speclint: 1\ntitle: " + b"x" * 500_000 + b"\n", "SL204", 2, 8),
    "long-key": (lambda: b"speclint: 1\n" + b"k" * 200_000 + b": 1\n", "SL103", 2, 200_001),
    "expr-100k-parentheses": (
        lambda: BASE.replace(
            '"1/(s*(s + 2))"', '"' + "(" * 100_000 + "s" + ")" * 100_000 + '"'
        ).encode(),
        "SL204",
        5,
        12,
    ),
    "integer-5000-digits": (
        lambda: b"speclint: 1\ntitle: x\ndelay: " + b"9" * 5000 + b"\n",
        "SL112",
        3,
        8,
    ),
    "nodes-over-cap": (
        lambda: b"speclint: 1\nx: [" + b"1," * MAX_NODES + b"1]\n",
        "SL114",
        2,
        5 + 2 * (MAX_NODES - 5),  # the 100,001st node: 5 before the list's items
    ),
    "file-over-1-mib": (lambda: b"speclint: 1\n#" + b"x" * MAX_FILE_BYTES + b"\n", "SL107", 1, 1),
    "loops-over-cap": (lambda: _loops(2500), "SL204", 2003, 3),  # the 2,001st loop
    "requirements-over-cap": (lambda: _requirements(2500), "SL204", 2003, 5),
}


def cases() -> list[tuple[str, Callable[[], bytes], str, int, int]]:
    out = []
    for name, (rule, line, column) in EXPECTED.items():
        path = CORPUS / f"{name}.yaml"
        out.append((name, path.read_bytes, rule, line, column))
    for name, (make, rule, line, column) in GENERATED.items():
        out.append((name, make, rule, line, column))
    return out


def test_every_corpus_file_has_an_expectation() -> None:
    assert sorted(p.stem for p in CORPUS.glob("*.yaml")) == sorted(EXPECTED)
    assert not set(EXPECTED) & set(GENERATED)


def snapshot(folder: Path) -> dict[str, str]:
    return {
        str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(folder.rglob("*"))
        if p.is_file()
    }


# Anything a terminal or a log viewer could act on: C0 controls other than LF, DEL, C1
# controls, Unicode line separators, bidirectional controls.
_RAW_CONTROL = re.compile("[\x00-\x09\x0b-\x1f\x7f-\x9f\u2028\u2029\u202a-\u202e\u2066-\u2069]")


@pytest.mark.parametrize(
    ("name", "make", "rule", "line", "column"),
    cases(),
    ids=lambda v: v if isinstance(v, str) else "",
)
def test_hostile_spec(
    name: str,
    make: Callable[[], bytes],
    rule: str,
    line: int,
    column: int,
    tmp_path: Path,
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    monkeypatch.chdir(tmp_path)
    monkeypatch.delenv("GITHUB_STEP_SUMMARY", raising=False)
    spec = tmp_path / "specs" / f"{name}.yaml"
    spec.parent.mkdir()
    spec.write_bytes(make())
    (tmp_path / "out").mkdir()
    before = snapshot(tmp_path)
    out, err = io.StringIO(), io.StringIO()
    argv = [
        "check",
        f"specs/{name}.yaml",
        "--no-cache",
        "--format",
        "json",
        "--output",
        "out/report.json",
    ]
    code = main(argv, out, err)
    assert (code, out.getvalue(), err.getvalue()) == (1, "", "")
    after = snapshot(tmp_path)
    assert set(after) - set(before) == {"out/report.json"}
    assert {k: v for k, v in after.items() if k in before} == before

    report = json.loads((tmp_path / "out" / "report.json").read_text(encoding="utf-8"))
    found = [(f["rule"], f["line"], f["column"]) for f in report["findings"]]
    shown = "\n".join(
        f"{f['line']}:{f['column']} {f['rule']} {f['message'][:120]}" for f in report["findings"]
    )
    assert (rule, line, column) in found, shown
    assert all(f["rule"] != "SL001" for f in report["findings"]), shown
    assert all(f["path"] == f"specs/{name}.yaml" for f in report["findings"])
    assert all(
        isinstance(f["line"], int) and isinstance(f["column"], int) for f in report["findings"]
    ), shown

    # The console and GitHub reports carry the same findings, inert.
    for fmt in ("console", "github"):
        out, err = io.StringIO(), io.StringIO()
        assert (
            main(
                ["check", f"specs/{name}.yaml", "--no-cache", "--format", fmt, "--color", "always"],
                out,
                err,
            )
            == 1
        )
        text = re.sub("\x1b\\[[0-9;]*m", "", out.getvalue())  # our own colours
        assert not _RAW_CONTROL.search(text), repr(_RAW_CONTROL.search(text))
        if fmt == "github":
            assert all(
                row.startswith(("::error ", "::warning ", "::notice ")) for row in text.splitlines()
            )
        else:
            assert f"specs/{name}.yaml:{line}:{column}: error {rule} " in text
    assert snapshot(tmp_path) == after


# --------------------------------------------------------------------------------------------
# Beyond the other bounds, a loop's analysis has a time budget (20 s). With the budget cut to
# 50 ms here, a model that takes longer is stopped and reported at the loop. Both models
# below take the better part of a second or more: far above the cut, so a faster analysis or
# machine still trips it.

SLOW = {
    "degree-40-loop": BASE.replace('"1/(s*(s + 2))"', '"1/((s + 1.1)^20*(s + 2.3)^20)"'),
    "dead-time-1e30": BASE.replace("    gain:", "    delay: 1e30\n    gain:").replace(
        "tracking: {reference: step, magnitude: 1, max_error: 0.5}",
        "margins: {min_delay_margin_s: 0.001, max_sensitivity_peak: 2}",
    ),
}


@pytest.mark.parametrize("name", sorted(SLOW))
def test_slow_loops_are_stopped_by_the_budget(name: str, speclint, monkeypatch) -> None:
    import speclint.pipeline as pipeline

    monkeypatch.setattr(pipeline, "LOOP_BUDGET_S", 0.05)
    run = speclint({f"{name}.yaml": SLOW[name]}, "--jobs", "1")
    assert run.code == 1
    codes = [(f["rule"], f["line"], f["column"]) for f in run.report["findings"]]
    assert ("SL407", 4, 3) in codes, codes
    assert "SL001" not in run.codes
    assert [r["status"] for r in run.report["requirements"]] == ["invalid"]


# --------------------------------------------------------------------------------------------
# The real process: nothing hangs, nothing crashes, whatever the file


def _real(args: list[str], cwd: Path, timeout: float) -> subprocess.CompletedProcess[str]:
    env = {k: v for k, v in os.environ.items() if k != "GITHUB_STEP_SUMMARY"}
    env["PYTHONPATH"] = str(REPO)
    return subprocess.run(
        [sys.executable, "-m", "speclint", *args],
        cwd=cwd,
        capture_output=True,
        text=True,
        timeout=timeout,
        env=env,
        check=False,
    )


def test_whole_corpus_in_one_real_process(tmp_path: Path) -> None:
    files = sorted(CORPUS.glob("*.yaml"))
    for i, path in enumerate(files):
        # One spec set: the loop and the requirement get names of their own in each file
        # (at the end of their lines, so no expected column moves).
        raw = path.read_bytes().replace(b"feed", b"feed-%d" % i).replace(b"H-1", b"H-1-%d" % i)
        (tmp_path / path.name).write_bytes(raw)
    # Generous: the corpus takes a few seconds; the timeout only catches a hang.
    done = _real(
        ["check", "--no-cache", "--format", "json", *(p.name for p in files)], tmp_path, 120
    )
    assert done.returncode == 1, done.stderr
    assert done.stderr == ""
    report = json.loads(done.stdout)
    assert report["summary"]["files"] == len(files)
    found = {(f["path"], f["rule"], f["line"], f["column"]) for f in report["findings"]}
    for name, (rule, line, column) in EXPECTED.items():
        assert (f"{name}.yaml", rule, line, column) in found, name
    assert not any(f["rule"] == "SL001" for f in report["findings"])


@pytest.mark.parametrize("name", ["flow-brackets-30000", "block-questions-30000", "nodes-over-cap"])
def test_big_cases_in_a_real_process(name: str, tmp_path: Path) -> None:
    make, rule, line, column = GENERATED[name]
    (tmp_path / "spec.yaml").write_bytes(make())
    # A segmentation fault in the YAML parser would show as a negative return code.
    done = _real(["check", "--no-cache", "--format", "json", "spec.yaml"], tmp_path, 20)
    assert done.returncode == 1, done.stderr
    found = [(f["rule"], f["line"], f["column"]) for f in json.loads(done.stdout)["findings"]]
    assert (rule, line, column) in found
