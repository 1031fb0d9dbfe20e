"""`speclint stamp`: every byte outside the review record stays; refusals change nothing.

Each preservation test compares the whole file, byte for byte, with the original plus
exactly the expected review lines. The atomic replace (a temporary file in the same
folder, then a rename) is common practice for writes that must never leave half a file.
"""

from __future__ import annotations

import io
import os
import stat
from pathlib import Path

import pytest

from speclint import stamp as stamp_module
from speclint import trace
from speclint.build import build
from speclint.cli import main
from speclint.load import read_spec
from speclint.validate import validate

BY, DATE = "Ana Ruiz", "2025-03-04"

STYLED = """\
# Ünïcode comment — ≥ 5 °C
speclint: 1
title: 'Tray sealer — "jaw" loops'   # quoted title

loops:
    jaw:
        plant: "1/(s*(s + 1))"   # comment after
        controller: 'K'
        gain: {symbol: K, nominal: 2}

requirements:
    -   id: R-1
        text: >-
            The jaw shall follow
            the profile — within 0.1 rad.
        traces_to: [SYS-1]
        loop: jaw
        tracking:
            reference: ramp
            magnitude: 1
            max_error: 0.5
        verification: {method: analysis}   # trailing comment

        # a comment between requirements

    -   id: SYS-1
        origin: "customer list, item 1"
        text: |
            Literal text
            kept as is.
"""

COMPACT = """\
speclint: 1
requirements:
  - id: SYS-1
    origin: customer list
    verification: {method: inspection}
  - id: SYS-2
    origin: customer list, item 2
    verification: {method: inspection}"""


def call(*argv: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    code = main(list(argv), out, err)
    return code, out.getvalue(), err.getvalue()


@pytest.fixture
def repo(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    monkeypatch.chdir(tmp_path)
    return tmp_path


def write(path: Path, text: str, newline: str = "\n", bom: bool = False) -> bytes:
    data = ("\ufeff" if bom else "") + text.replace("\n", newline)
    raw = data.encode("utf-8")
    path.write_bytes(raw)
    return raw


def fingerprint_of(raw: bytes, rid: str) -> str:
    doc = read_spec("x.yaml", raw).document
    assert doc is not None
    validate(doc)
    spec, _ = build(doc)
    found = trace.index([spec], [])
    req = next(r for r in found.requirements if r.id == rid)
    value = trace.current_fingerprint(req, found)
    assert value is not None
    return value


def block(indent: int, step: int, nl: str, fp: str) -> bytes:
    pad, inner = " " * indent, " " * (indent + step)
    text = (
        f"{nl}{pad}reviewed:{nl}{inner}fingerprint: "
        f'"{fp}"{nl}{inner}by: "{BY}"{nl}{inner}date: "{DATE}"'
    )
    return text.encode("utf-8")


def line_end(raw: bytes, needle: str) -> int:
    start = raw.index(needle.encode("utf-8"))
    ends = [i for i in (raw.find(b"\r", start), raw.find(b"\n", start)) if i >= 0]
    return min(ends) if ends else len(raw)


@pytest.mark.parametrize("newline", ["\n", "\r\n"])
@pytest.mark.parametrize("bom", [False, True])
def test_insertion_keeps_every_other_byte(repo, newline, bom):
    path = repo / "s.yaml"
    raw = write(path, STYLED, newline, bom)
    code, out, err = call("stamp", "R-1", "SYS-1", "--by", BY, "--date", DATE)
    assert code == 0, err
    assert "R-1: stamped at s.yaml:12" in out and "SYS-1: stamped at s.yaml:26" in out
    fp1, fp2 = fingerprint_of(raw, "R-1"), fingerprint_of(raw, "SYS-1")
    # R-1 ends on its verification line (before the trailing comment's line break); the
    # file's step of 4 spaces is kept. SYS-1 ends with a literal block at the end of file.
    p1 = line_end(raw, "{method: analysis}   # trailing comment")
    p2 = line_end(raw, "kept as is.")
    expected = (
        raw[:p1] + block(8, 4, newline, fp1) + raw[p1:p2] + block(8, 4, newline, fp2) + raw[p2:]
    )
    assert path.read_bytes() == expected
    assert not [p for p in repo.iterdir() if p.name.endswith(".tmp")]


def test_insertion_at_the_end_of_a_file_without_a_final_line_break(repo):
    path = repo / "s.yaml"
    raw = write(path, COMPACT)
    code, _, err = call("stamp", "SYS-2", "--by", BY, "--date", DATE)
    assert code == 0, err
    assert path.read_bytes() == raw + block(4, 2, "\n", fingerprint_of(raw, "SYS-2"))


def test_a_stamped_file_checks_clean_and_the_review_is_current(repo, speclint):
    path = repo / "s.yaml"
    write(path, STYLED)
    assert call("stamp", "R-1", "SYS-1", "--by", BY, "--date", DATE)[0] == 0
    run = speclint({})
    assert "SL611" not in run.codes and "SL103" not in run.codes, run.out
    code, out, _ = call("matrix")
    assert code == 0 and out.count(f"current ({BY}, {DATE})") == 2


def test_an_edit_after_the_stamp_makes_the_review_stale(repo, speclint):
    path = repo / "s.yaml"
    write(path, STYLED)
    assert call("stamp", "R-1", "--by", BY, "--date", DATE)[0] == 0
    path.write_bytes(path.read_bytes().replace(b"within 0.1 rad", b"within 0.2 rad"))
    run = speclint({})
    stale = [f["message"] for f in run.report["findings"] if f["rule"] == "SL611"]
    assert stale == [f"R-1: changed: text since its review by {BY} on {DATE}"]


REVIEWED_BLOCK = """\
speclint: 1
requirements:
  - id: SYS-1
    origin: customer list
    reviewed:   # last review
      fingerprint: '0123456789abcdef'  # old one
      by: Old Name
      date: "2024-01-01"
    verification: {method: inspection}
"""


@pytest.mark.parametrize("newline", ["\n", "\r\n"])
def test_refresh_of_a_block_review_changes_only_its_three_values(repo, newline):
    path = repo / "s.yaml"
    raw = write(path, REVIEWED_BLOCK, newline)
    assert call("stamp", "SYS-1", "--by", BY, "--date", DATE)[0] == 0
    fp = fingerprint_of(raw, "SYS-1")
    old_lines = raw.decode().split(newline)
    new_lines = path.read_bytes().decode().split(newline)
    changed = {
        i: (a, b) for i, (a, b) in enumerate(zip(old_lines, new_lines, strict=True)) if a != b
    }
    assert changed == {
        5: (old_lines[5], f'      fingerprint: "{fp}"  # old one'),
        6: (old_lines[6], f'      by: "{BY}"'),
        7: (old_lines[7], f'      date: "{DATE}"'),
    }


def test_refresh_of_a_flow_review_changes_only_that_line(repo):
    text = REVIEWED_BLOCK.replace(
        "    reviewed:   # last review\n      fingerprint: '0123456789abcdef'  # old one\n"
        '      by: Old Name\n      date: "2024-01-01"\n',
        '    reviewed: {fingerprint: 0123abcd, by: Old Name, date: "2024-01-01"}  # keep\n',
    )
    path = repo / "s.yaml"
    raw = write(path, text)
    assert call("stamp", "SYS-1", "--by", BY, "--date", DATE)[0] == 0
    fp = fingerprint_of(raw, "SYS-1")
    expected = raw.replace(
        b'{fingerprint: 0123abcd, by: Old Name, date: "2024-01-01"}',
        f'{{fingerprint: "{fp}", by: "{BY}", date: "{DATE}"}}'.encode(),
    )
    assert path.read_bytes() == expected


def test_stamping_twice_gives_the_same_bytes(repo):
    path = repo / "s.yaml"
    write(path, STYLED)
    call("stamp", "R-1", "--by", BY, "--date", DATE)
    once = path.read_bytes()
    assert call("stamp", "R-1", "--by", BY, "--date", DATE)[0] == 0
    assert path.read_bytes() == once


def test_quotes_and_backslashes_in_the_name_read_back(repo):
    path = repo / "s.yaml"
    write(path, COMPACT + "\n")
    name = 'Bo "B" Li \\ QA'
    assert call("stamp", "SYS-1", "--by", name, "--date", DATE)[0] == 0
    doc = read_spec("s.yaml", path.read_bytes()).document
    assert doc is not None and doc.data["requirements"][0]["reviewed"]["by"] == name


def test_file_mode_is_kept(repo):
    if os.name == "nt":
        pytest.skip("POSIX permission bits")
    path = repo / "s.yaml"
    write(path, COMPACT)
    path.chmod(0o640)
    assert call("stamp", "SYS-1", "--by", BY, "--date", DATE)[0] == 0
    assert stat.S_IMODE(path.stat().st_mode) == 0o640


# -- refusals: a message, exit 1 (or 2 for the command line), and no change


def _unchanged(repo: Path, files: dict[str, bytes]) -> bool:
    on_disk = {p.name: p.read_bytes() for p in repo.iterdir() if p.is_file()}
    return on_disk == files


def test_unknown_id_with_a_suggestion(repo):
    raw = write(repo / "s.yaml", COMPACT)
    code, _, err = call("stamp", "SYS-3", "--by", BY, "--date", DATE)
    assert code == 1 and "SYS-3: not stamped: no requirement" in err
    assert "did you mean 'SYS-2'?" in err
    assert _unchanged(repo, {"s.yaml": raw})


def test_ambiguous_id_is_refused(repo):
    a = write(repo / "a.yaml", COMPACT)
    b = write(repo / "b.yaml", COMPACT.replace("SYS-2", "SYS-9"))
    code, _, err = call("stamp", "SYS-1", "--by", BY, "--date", DATE)
    assert code == 1 and "defined more than once (a.yaml:3, b.yaml:3)" in err
    assert _unchanged(repo, {"a.yaml": a, "b.yaml": b})


def test_flow_style_requirement_is_refused(repo):
    text = "speclint: 1\nrequirements:\n  - {id: SYS-1, origin: customer list}\n"
    raw = write(repo / "s.yaml", text)
    code, _, err = call("stamp", "SYS-1", "--by", BY, "--date", DATE)
    assert code == 1 and "flow style" in err
    assert _unchanged(repo, {"s.yaml": raw})


def test_unparsable_file_is_named_and_the_others_still_stamped(repo):
    bad = write(repo / "bad.yaml", "speclint: 1\nrequirements: [\n  - id: X\n")
    good = write(repo / "good.yaml", COMPACT)
    code, out, err = call("stamp", "X", "SYS-1", "--by", BY, "--date", DATE)
    assert code == 1
    assert "X: not stamped" in err and "bad.yaml cannot be parsed" in err
    assert "SYS-1: stamped" in out
    assert (repo / "bad.yaml").read_bytes() == bad and (repo / "good.yaml").read_bytes() != good


def test_requirement_with_errors_is_refused(repo):
    raw = write(repo / "s.yaml", COMPACT.replace("origin: customer list\n", "origni: typo\n"))
    code, _, err = call("stamp", "SYS-1", "--by", BY, "--date", DATE)
    assert code == 1 and "has errors" in err
    assert _unchanged(repo, {"s.yaml": raw})


def test_requirement_on_an_undefined_loop_is_refused(repo):
    raw = write(
        repo / "s.yaml",
        COMPACT.replace("origin: customer list\n", "origin: x\n    loop: nowhere\n"),
    )
    code, _, err = call("stamp", "SYS-1", "--by", BY, "--date", DATE)
    assert code == 1 and "'nowhere' is not defined or has errors" in err
    assert _unchanged(repo, {"s.yaml": raw})


@pytest.mark.parametrize(
    "args",
    [
        ["--date", "2025-3-4"],
        ["--date", "2024-02-30"],
        ["--by", "  "],
        ["--by", "Ana\nRuiz"],
        [],
    ],
)
def test_bad_command_lines_exit_2_and_change_nothing(repo, args):
    raw = write(repo / "s.yaml", COMPACT)
    argv = ["stamp", "SYS-1", "--by", BY, "--date", DATE]
    if args and args[0] in argv:
        argv[argv.index(args[0]) + 1] = args[1]
    elif not args:
        argv = ["stamp", "--by", BY]
    code, _, err = call(*argv)
    assert code == 2 and "Traceback" not in err
    assert _unchanged(repo, {"s.yaml": raw})


def test_a_file_changed_after_reading_is_left_as_the_other_writer_left_it(repo, monkeypatch):
    path = repo / "s.yaml"
    write(path, COMPACT)
    theirs = (COMPACT + "\n# saved by an editor meanwhile\n").encode()
    real = stamp_module.review_edits

    def meanwhile(text, index, record, root=None):
        path.write_bytes(theirs)
        return real(text, index, record, root)

    monkeypatch.setattr(stamp_module, "review_edits", meanwhile)
    code, _, err = call("stamp", "SYS-1", "--by", BY, "--date", DATE)
    assert code == 1 and "changed since it was read; nothing written" in err
    assert path.read_bytes() == theirs
    assert not [p for p in repo.iterdir() if p.name.endswith(".tmp")]


def test_a_failed_rename_leaves_the_original_whole(repo, monkeypatch):
    path = repo / "s.yaml"
    raw = write(path, COMPACT)

    def full_disk(src, dst):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "replace", full_disk)
    code, _, err = call("stamp", "SYS-1", "--by", BY, "--date", DATE)
    assert code == 1 and "No space left on device" in err
    assert _unchanged(repo, {"s.yaml": raw})


def test_an_edit_that_would_touch_other_content_is_refused(repo, monkeypatch):
    path = repo / "s.yaml"
    raw = write(path, COMPACT)
    real = stamp_module.review_edits

    def sloppy(text, index, record, root=None):
        edits = real(text, index, record, root)
        at = text.index("customer list")
        return [*edits, stamp_module.Edit(at, at + 8, "client")]

    monkeypatch.setattr(stamp_module, "review_edits", sloppy)
    code, _, err = call("stamp", "SYS-1", "--by", BY, "--date", DATE)
    assert code == 1 and "would change more than the review record" in err
    assert _unchanged(repo, {"s.yaml": raw})


@pytest.mark.parametrize(
    ("tail", "after"),
    [
        ("    traces_to:\n      - SYS-1\n      - SYS-2  # two parents\n", "- SYS-2  # two parents"),
        ("    traces_to:\n    - SYS-1\n", "    - SYS-1"),
        ("    verification:\n      method: test\n      evidence:\n        - a.csv\n", "- a.csv"),
        ("    text: a plain scalar\n      on two lines\n", "on two lines"),
        ("    rationale:\n", "rationale:"),
        ("    text: 'quoted, with a # hash'   # and a comment\n", "# and a comment"),
    ],
)
def test_insertion_after_every_kind_of_last_value(repo, tail, after):
    head = "speclint: 1\nrequirements:\n  - id: R-1\n    origin: customer list\n"
    after_text = "\n  # trailing comment, kept below\n\n  - id: R-2\n    origin: x\n"
    path = repo / "s.yaml"
    raw = write(path, head + tail + after_text)
    code, _, err = call("stamp", "R-1", "--by", BY, "--date", DATE)
    assert code == 0, err
    p = line_end(raw, after)
    assert path.read_bytes() == raw[:p] + block(4, 2, "\n", fingerprint_of(raw, "R-1")) + raw[p:]
