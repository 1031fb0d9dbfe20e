"""The analysis cache and parallel workers never change an answer.

No outside reference is needed here: every check compares a run that uses the cache (or
worker processes) with a fresh serial analysis of the same specs, byte for byte.
"""

from __future__ import annotations

import gc
import io
import json
import multiprocessing
import os
import shutil
import subprocess
from pathlib import Path

import pytest

import speclint.pipeline
from conftest import REPO
from speclint.cli import main

CACHE = ".speclint_cache"


def _check(*args: str) -> tuple[int, str]:
    out, err = io.StringIO(), io.StringIO()
    code = main(["check", "--format", "json", *args], out, err)
    assert "Traceback" not in err.getvalue() and "internal error" not in err.getvalue()
    return code, out.getvalue()


@pytest.fixture
def demo(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    """A copy of the demo specs with their configuration, as the working folder."""
    shutil.copytree(REPO / "examples", tmp_path / "examples")
    (tmp_path / "pyproject.toml").write_text('[tool.speclint]\npaths = ["examples"]\n')
    monkeypatch.chdir(tmp_path)
    return tmp_path


def _entries(root: Path) -> list[Path]:
    return sorted(p for p in (root / CACHE).rglob("*.json"))


def _fresh() -> str:
    return _check("--no-cache")[1]


def _no_analysis(monkeypatch: pytest.MonkeyPatch) -> None:
    def refuse(task: object) -> object:
        raise AssertionError("a loop was analysed although its entry is cached")

    monkeypatch.setattr(speclint.pipeline, "analyse_loop", refuse)


def test_warm_run_is_byte_identical_and_analyses_nothing(demo, monkeypatch):
    fresh = _fresh()
    assert not (demo / CACHE).exists(), "--no-cache must write nothing"
    code, cold = _check()
    assert cold == fresh
    loops = len(json.loads(cold)["loops"])
    files = len(list((demo / "examples").glob("*.yaml")))
    assert len(_entries(demo)) == loops + files and loops > 0  # an entry per loop, per file
    _no_analysis(monkeypatch)
    code_warm, warm = _check()
    assert (code_warm, warm) == (code, cold)


def test_a_cache_deleted_between_runs_is_written_again(demo):
    # This process remembers the folders it made for entries; they may be gone by the
    # next run (deleted by hand, as the README suggests to clear the cache).
    _check()
    before = [p.relative_to(demo) for p in _entries(demo)]
    shutil.rmtree(demo / CACHE)
    _check()
    assert [p.relative_to(demo) for p in _entries(demo)] == before
    assert (demo / CACHE / ".gitignore").is_file()
    assert not list((demo / CACHE).rglob("*.tmp"))


def test_the_cache_folder_ignores_itself_in_git(demo):
    _check()
    assert (demo / CACHE / ".gitignore").read_text().splitlines()[-1] == "*"
    if shutil.which("git") is None:
        pytest.skip("git is not installed")
    subprocess.run(["git", "init", "-q", str(demo)], check=True)
    listed = subprocess.run(
        ["git", "status", "--porcelain", "--untracked-files=all"],
        cwd=demo,
        capture_output=True,
        text=True,
        check=True,
    ).stdout
    assert "examples/" in listed
    assert CACHE not in listed


def _garbage(path: Path) -> None:
    path.write_bytes(b"\x00\xff\xfe not json at all \x80")


def _truncated(path: Path) -> None:
    text = path.read_text()
    path.write_text(text[: len(text) // 2])


def _empty(path: Path) -> None:
    path.write_text("")


def _wrong_shape(path: Path) -> None:
    entry = _entry(path)
    entry["loop"] = [1, 2, 3]
    path.write_text(json.dumps(entry))


def _entry(path: Path) -> dict:
    """An entry's JSON body; its first line is the seal."""
    return json.loads(path.read_text().partition("\n")[2])


def _a_list(path: Path) -> None:
    path.write_text("[1, 2, 3]")


def _directory(path: Path) -> None:
    path.unlink()
    path.mkdir()
    (path / "stray.txt").write_text("left here by something else")


@pytest.mark.parametrize(
    "spoil",
    [_garbage, _truncated, _empty, _wrong_shape, _a_list, _directory],
    ids=lambda f: f.__name__,
)
def test_a_corrupt_entry_is_ignored_and_rewritten(demo, spoil):
    fresh = _fresh()
    _check()
    entries = _entries(demo)
    for path in entries:
        spoil(path)
    assert _check()[1] == fresh
    for path in entries:
        assert path.is_file()
        assert _entry(path)["key"] == path.stem


def test_a_foreign_entry_under_another_key_is_not_trusted(demo):
    fresh = _fresh()
    _check()
    first, second = _entries(demo)[:2]
    shutil.copyfile(first, second)  # right format, the other loop's analysis
    assert _check()[1] == fresh
    assert _entry(second)["key"] == second.stem


def test_cache_dir_from_the_configuration(demo):
    (demo / "pyproject.toml").write_text(
        '[tool.speclint]\npaths = ["examples"]\ncache_dir = "build/lint-cache"\n'
    )
    fresh = _fresh()
    assert _check()[1] == fresh
    assert not (demo / CACHE).exists()
    assert (demo / "build" / "lint-cache" / ".gitignore").is_file()
    assert list((demo / "build" / "lint-cache").rglob("*.json"))


def test_a_cache_folder_that_cannot_be_written_means_no_cache(demo):
    # A regular file where the folder should be: creating it fails even for root.
    (demo / "pyproject.toml").write_text(
        '[tool.speclint]\npaths = ["examples"]\ncache_dir = "in-the-way"\n'
    )
    (demo / "in-the-way").write_text("a file, not a folder\n")
    fresh = _fresh()
    assert _check()[1] == fresh
    assert _check()[1] == fresh
    assert (demo / "in-the-way").read_text() == "a file, not a folder\n"


@pytest.mark.skipif(os.name != "posix" or os.geteuid() == 0, reason="root writes anywhere")
def test_a_read_only_cache_folder_means_no_cache(demo):
    fresh = _fresh()
    folder = demo / CACHE
    folder.mkdir()
    folder.chmod(0o500)
    try:
        assert _check()[1] == fresh
        assert list(folder.iterdir()) == []
    finally:
        folder.chmod(0o700)


def _loops_file(count: int) -> str:
    """`count` position loops of degree 3 or 4, some with dead time, each with three
    requirements (tracking, error constant, margins)."""
    loops, reqs = [], []
    for i in range(count):
        tau = f"0.0{i % 9 + 1}"
        lag = f" * 1/(0.00{i % 5 + 2}*s + 1)" if i % 2 else ""
        delay = "\n    delay: 0.002" if i % 6 == 5 else ""
        loops.append(
            f"  axis-{i}:\n"
            f'    plant: "{20 + i}/(s*({tau}*s + 1)){lag}"\n'
            f'    controller: "K"\n'
            f"    gain: {{symbol: K, nominal: {0.5 + 0.1 * (i % 7)}, limits: [0.01, 100]}}{delay}\n"
        )
        reqs.append(
            f"  - id: AX-{i}-1\n    origin: test\n    loop: axis-{i}\n"
            f"    tracking: {{reference: ramp, magnitude: 10, max_error: {0.2 + 0.05 * (i % 5)}}}\n"
            f"    verification: {{method: analysis}}\n"
            f"  - id: AX-{i}-2\n    origin: test\n    loop: axis-{i}\n"
            f"    error_constants: {{min_kv: {10 + i}}}\n"
            f"    verification: {{method: analysis}}\n"
            f"  - id: AX-{i}-3\n    origin: test\n    loop: axis-{i}\n"
            f"    margins: {{min_gain_margin_db: 6, min_phase_margin_deg: {30 + i % 4 * 5}}}\n"
            f"    verification: {{method: analysis}}\n"
        )
    return "speclint: 1\nloops:\n" + "".join(loops) + "requirements:\n" + "".join(reqs)


def test_two_workers_give_the_serial_answer(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "axes.yaml").write_text(_loops_file(30))
    serial = _check("axes.yaml", "--no-cache", "--jobs", "1")
    parallel = _check("axes.yaml", "--no-cache", "--jobs", "2")
    assert parallel == serial
    assert len(json.loads(serial[1])["loops"]) == 30
    # The same through the cache: entries written by workers read back identically.
    assert _check("axes.yaml", "--jobs", "2") == serial
    assert _check("axes.yaml", "--jobs", "2") == serial
    # Workers freeze what they inherit from the fork server, never this process's objects:
    # a process that goes on (this test run) goes on collecting them.
    assert gc.get_freeze_count() == 0


def test_without_workers_the_loops_are_analysed_in_the_run_itself(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "axes.yaml").write_text(_loops_file(6))
    serial = _check("axes.yaml", "--no-cache", "--jobs", "1")

    def refused():
        raise OSError(11, "Resource temporarily unavailable")

    monkeypatch.setattr(speclint.pipeline, "worker_context", refused)
    assert _check("axes.yaml", "--no-cache", "--jobs", "2") == serial


def test_a_worker_that_dies_costs_no_answer(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "axes.yaml").write_text(_loops_file(6))
    serial = _check("axes.yaml", "--no-cache", "--jobs", "1")
    from speclint import judge

    real, parent = judge.judge_loop, os.getpid()

    def dies_in_a_worker(loop, requirements):
        if os.getpid() != parent and loop.name == "axis-3":
            os._exit(9)  # as the out-of-memory killer would end it
        return real(loop, requirements)

    monkeypatch.setattr(judge, "judge_loop", dies_in_a_worker)
    # Forked from this process, so that the workers see the stand-in.
    fork = multiprocessing.get_context("fork")
    monkeypatch.setattr(speclint.pipeline, "worker_context", lambda: fork)
    assert _check("axes.yaml", "--no-cache", "--jobs", "2") == serial


def test_workers_keep_their_answers_in_the_run_s_own_cache(tmp_path, monkeypatch):
    # The workers write the entries; they come from a fork server that may have been
    # started in another working folder (by an earlier run of this process).
    entries = []
    for name in ("first", "second"):
        folder = tmp_path / name
        folder.mkdir()
        (folder / "axes.yaml").write_text(_loops_file(4))
        monkeypatch.chdir(folder)
        code, cold = _check("axes.yaml", "--jobs", "2")
        entries.append(sorted(p.name for p in (folder / ".speclint_cache").rglob("*.json")))
        assert _check("axes.yaml", "--jobs", "2") == (code, cold)
    # One entry per loop and one for the file, in each run's own folder.
    assert [len(e) for e in entries] == [5, 5]
    assert entries[0] == entries[1]  # the same files and loops: the same keys


def test_workers_are_started_early_only_for_many_loops_read_afresh(monkeypatch):
    from multiprocessing import forkserver

    from speclint.model import SpecFile

    started: list[bool] = []
    monkeypatch.setattr(forkserver, "ensure_running", lambda: started.append(True))
    monkeypatch.setattr(speclint.pipeline, "usable_cores", lambda: 2)
    ten = SpecFile(path="a.yaml", loops=(object(),) * 10)  # only their number counts here
    early = speclint.pipeline.FreshFiles(0, None)
    early.add(None, [], ten)
    early.add(None, [], ten)
    assert started == []  # 20 loops: they are analysed in this process
    early.add(None, [], ten)
    early.add(None, [], ten)
    assert started == [True]  # once, at 24 or more
    serial = speclint.pipeline.FreshFiles(1, None)
    for _ in range(10):
        serial.add(None, [], ten)
    assert started == [True]
    monkeypatch.setattr(speclint.pipeline, "usable_cores", lambda: 1)
    one_core = speclint.pipeline.FreshFiles(0, None)
    for _ in range(10):
        one_core.add(None, [], ten)
    assert started == [True]


def test_loops_go_to_workers_a_few_at_a_time_and_never_two_files_at_once():
    from speclint.findings import Location
    from speclint.model import Loop

    def loop(path):
        return Loop(name="x", location=Location(path, 1, 1), plant=None), []  # type: ignore[arg-type]

    many = [loop("a.yaml")] * 70 + [loop("b.yaml")] * 3 + [loop("a.yaml")] * 10
    chunks = speclint.pipeline._chunks(many, 2)
    assert [i for chunk in chunks for i in chunk] == list(range(83))  # each once, in order
    assert {len(c) for c in chunks} <= set(range(1, speclint.pipeline.CHUNK + 1))
    for chunk in chunks:
        assert len({many[i][0].location.path for i in chunk}) == 1
        assert chunk == list(range(chunk[0], chunk[-1] + 1))
    assert len(chunks) == 18 + 1 + 3  # a: 70 → 18, b: 3 → 1, a again: 10 → 3
    # Too few loops to give each worker several chunks: one loop each.
    assert speclint.pipeline._chunks(many[:20], 2) == [[i] for i in range(20)]


def test_a_chunk_leaves_its_loops_once_enough_ran_out_of_time(monkeypatch):
    from speclint.findings import Location
    from speclint.rules import finding

    calls: list[int] = []

    def out_of_time(task, keep):
        calls.append(task)
        return None, [], [finding("SL407", "took longer", Location("a.yaml", 1, 1))]

    monkeypatch.setattr(speclint.pipeline, "analyse_and_keep", out_of_time)
    done = speclint.pipeline.analyse_chunk([(i, None) for i in range(6)])
    limit = speclint.pipeline.MAX_EXPIRED_PER_FILE
    assert calls == list(range(limit))
    assert [d is None for d in done] == [False] * limit + [True] * (6 - limit)


def test_the_default_uses_workers_only_for_many_loops():
    assert speclint.pipeline.default_jobs(1) == 1
    assert speclint.pipeline.default_jobs(23) == 1
    assert speclint.pipeline.default_jobs(500) == speclint.pipeline.usable_cores()


def test_an_entry_that_arrives_with_the_repository_cannot_change_a_verdict(demo):
    # A pull request could commit cache entries with verdicts of its author's choosing; the
    # seal (a keyed hash with a key outside the repository) makes them count as misses.
    fresh = _fresh()
    assert '"status": "unreachable"' in fresh
    _check()
    forged_entries = 0
    for path in _entries(demo):
        seal, _, body = path.read_text().partition("\n")
        forged = body.replace('"status": "unreachable"', '"status": "met"')
        if forged != body:
            path.write_text(f"{seal}\n{forged}")
            forged_entries += 1
    assert forged_entries > 0
    assert _check()[1] == fresh


def test_an_unchanged_file_is_neither_parsed_nor_validated_again(demo, monkeypatch):
    _, cold = _check()

    def refuse(*args: object) -> object:
        raise AssertionError("an unchanged file was read again")

    monkeypatch.setattr(speclint.pipeline, "read_spec", refuse)
    monkeypatch.setattr(speclint.pipeline, "validate", refuse)
    assert _check()[1] == cold


_AWKWARD = """\
speclint: 1
loops:
  drive:
    description: "quoted: 0.1, true, null"
    plant: "2.50/(s*(0.125*s + 1))"
    controller: K
    gain: {symbol: K, nominal: 1.10, limits: [0.01, 1e3]}
requirements:
  - id: REQ-1.10
    loop: drive
    text: 1.10
    criteria: {tracking: {ramp: {max_error: 0.05}}, margins: {phase_deg: 45}}
    flag: true
    nothing: null
    count: 7
    dup: 1
    dup: 2
"""


def _places(spec: object) -> list[object]:
    """Every loop's and requirement's places (left out of the records' equality)."""
    items = [*spec.loops, *spec.requirements]  # type: ignore[attr-defined]
    return [(item.name if hasattr(item, "name") else item.id, item.places) for item in items]


@pytest.mark.parametrize(
    "name", ["awkward", "film-and-infeed.yaml", "jaw-and-heat.yaml", "system.yaml"]
)
def test_a_kept_file_comes_back_exactly_as_built(tmp_path, name):
    # Exact numbers stay Fractions, tuples stay tuples, every place comes back; the
    # records' reprs (which show types: Fraction(1, 10), (…) against […]) must match.
    from speclint.build import build, buildable
    from speclint.cache import Cache, file_key
    from speclint.load import read_spec
    from speclint.validate import validate

    raw = _AWKWARD.encode() if name == "awkward" else (REPO / "examples" / name).read_bytes()
    loaded = read_spec(name, raw)
    doc = loaded.document
    assert doc is not None
    found = loaded.findings + validate(doc)
    assert buildable(doc)
    spec, built = build(doc)
    found += built
    assert spec.loops or spec.requirements
    cache = Cache(tmp_path / "cache")
    key = file_key(name, raw)
    cache.put_file(key, found, spec)
    kept = cache.get_file(key)
    assert kept is not None
    kept_found, kept_spec = kept
    assert kept_found == found
    assert repr(kept_spec) == repr(spec) and kept_spec == spec
    assert _places(kept_spec) == _places(spec)
