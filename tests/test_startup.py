"""What a run imports and what concurrent runs leave behind, seen from real child processes.

A pre-commit hook pays for every import on every commit: a run that only validates, or
whose analyses are all in the cache, must not import sympy, numpy or scipy (about 1.5 s
together, against a few hundred milliseconds for the whole warm run).
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from conftest import REPO

HEAVY = ("sympy", "numpy", "scipy")
VALIDATOR = ("jsonschema",)
PROBE = (
    "import sys, speclint.cli\n"
    "code = speclint.cli.main({argv!r})\n"
    "print(sorted(m for m in {heavy!r} if m in sys.modules))\n"
    "print(code)\n"
)
TEXTUAL = """\
speclint: 1
title: Requirements without loops
requirements:
  - id: SYS-1
    title: The machine wraps 120 packs a minute
    origin: customer list, item 1
    verification: {method: demonstration}
  - id: SYS-2
    title: Film changes without stopping
    traces_to: [SYS-1]
    verification: {method: inspection}
"""


def _env() -> dict[str, str]:
    env = dict(os.environ)
    env["PYTHONPATH"] = str(REPO) + os.pathsep + env.get("PYTHONPATH", "")
    return env


def _probe(cwd: Path, *argv: str, watch: tuple[str, ...] = HEAVY) -> tuple[list[str], int]:
    """Run speclint.cli.main(argv) in a child process; which `watch` modules it imported."""
    script = PROBE.format(argv=list(argv), heavy=watch)
    done = subprocess.run(
        [sys.executable, "-c", script],
        cwd=cwd,
        env=_env(),
        capture_output=True,
        text=True,
        timeout=300,
        check=False,
    )
    assert done.returncode == 0, done.stderr
    lines = done.stdout.strip().splitlines()
    return json.loads(lines[-2].replace("'", '"')), int(lines[-1])


def _demo(tmp_path: Path) -> Path:
    shutil.copytree(REPO / "examples", tmp_path / "examples")
    (tmp_path / "pyproject.toml").write_text('[tool.speclint]\npaths = ["examples"]\n')
    return tmp_path


def test_a_run_that_only_validates_imports_no_analysis_library(tmp_path):
    (tmp_path / "system.yaml").write_text(TEXTUAL)
    assert _probe(tmp_path, "check", "system.yaml", "--output", "out.txt") == ([], 0)
    broken = TEXTUAL.replace("origin:", "orign:")
    (tmp_path / "broken.yaml").write_text(broken)
    assert _probe(tmp_path, "check", "broken.yaml", "--format", "json", "-o", "b.json") == ([], 1)


def test_a_warm_run_imports_no_analysis_library(tmp_path):
    root = _demo(tmp_path)
    cold, code = _probe(root, "check", "--format", "json", "--output", "cold.json")
    assert cold == sorted(HEAVY), "the cold run analyses, so it imports them"
    warm, warm_code = _probe(
        root, "check", "--format", "json", "--output", "warm.json", watch=HEAVY + VALIDATOR
    )
    assert (warm, warm_code) == ([], code)  # unchanged files are not validated again either
    assert (root / "warm.json").read_bytes() == (root / "cold.json").read_bytes()
    # The console report and the matrix take the same path.
    assert _probe(root, "check", "--output", "console.txt")[0] == []
    assert _probe(root, "matrix", "--output", "MATRIX.md")[0] == []


def test_two_runs_at_once_leave_valid_entries(tmp_path):
    root = _demo(tmp_path)
    command = [sys.executable, "-m", "speclint", "check", "--format", "json", "--output"]
    runs = [
        subprocess.Popen([*command, f"out{i}.json"], cwd=root, env=_env(), stderr=subprocess.PIPE)
        for i in range(2)
    ]
    codes = [run.wait(timeout=300) for run in runs]
    for run in runs:
        assert run.stderr is not None
        assert b"Traceback" not in run.stderr.read()
        run.stderr.close()
    assert codes[0] == codes[1] == 1  # the demo carries deliberate errors
    first = (root / "out0.json").read_bytes()
    assert (root / "out1.json").read_bytes() == first
    entries = sorted((root / ".speclint_cache").rglob("*.json"))
    assert entries and not list((root / ".speclint_cache").rglob("*.tmp"))
    for entry in entries:
        assert json.loads(entry.read_text().partition("\n")[2])["key"] == entry.stem
    # What they left is what a fresh analysis gives, and a third run needs nothing more.
    fresh = subprocess.run(
        [*command, "fresh.json", "--no-cache"], cwd=root, env=_env(), check=False
    )
    assert fresh.returncode == 1
    assert (root / "fresh.json").read_bytes() == first
    assert _probe(root, "check", "--format", "json", "--output", "third.json") == ([], 1)
    assert (root / "third.json").read_bytes() == first


def test_a_loop_without_frequency_searches_needs_no_scipy(tmp_path):
    # scipy.optimize costs about half a second to import. The figures of a loop without dead
    # time are roots of polynomials; only a margin criterion's searches (or dead time) need
    # scipy, so a hook that rechecks a tracking requirement does not pay for it.
    spec = (
        'speclint: 1\nloops:\n  drive:\n    plant: "1/(s*(s + 2))"\n    controller: K\n'
        "    gain: {symbol: K, nominal: 1}\n"
        "requirements:\n  - id: R-1\n    loop: drive\n"
        "    tracking: {reference: ramp, magnitude: 1, max_error: 5}\n"
    )
    (tmp_path / "plain.yaml").write_text(spec)
    used, _ = _probe(tmp_path, "check", "plain.yaml", "--no-cache", "-o", "a.txt")
    assert used == ["numpy", "sympy"]
    margins = spec.replace(
        "tracking: {reference: ramp, magnitude: 1, max_error: 5}",
        "margins: {min_phase_margin_deg: 30}",
    )
    (tmp_path / "margins.yaml").write_text(margins)
    used, _ = _probe(tmp_path, "check", "margins.yaml", "--no-cache", "-o", "b.txt")
    assert "scipy" in used


def test_a_parallel_run_leaves_the_libraries_to_its_workers(tmp_path):
    # The workers are forked from a fork server that imported the analysis libraries once
    # (while this process was still reading the files): the process that reads the files
    # and writes the report never loads them, and the answer is a serial run's.
    loops = "".join(
        f'  axis-{i}:\n    plant: "{i + 2}/(s*(s + {i + 1}))"\n    controller: K\n'
        f"    gain: {{symbol: K, nominal: 1}}\n"
        for i in range(30)
    )
    (tmp_path / "axes.yaml").write_text(f"speclint: 1\nloops:\n{loops}")
    args = ("check", "axes.yaml", "--no-cache", "--format", "json")
    used, code = _probe(tmp_path, *args, "--jobs", "2", "-o", "parallel.json")
    assert (used, code) == ([], 0)
    assert _probe(tmp_path, *args, "--jobs", "1", "-o", "serial.json") == (sorted(HEAVY[:2]), 0)
    parallel = json.loads((tmp_path / "parallel.json").read_text())
    assert parallel == json.loads((tmp_path / "serial.json").read_text())
    assert [loop["type"] for loop in parallel["loops"]] == [1] * 30  # one integrator each


def test_ctrl_c_ends_a_parallel_run_with_one_line(tmp_path):
    # Ctrl-C reaches every process of the terminal's process group. The fork server and its
    # workers ignore it; the main process ends them and says so in one line, exit code 130
    # as shells report SIGINT (common practice: 128 + the signal's number).
    import signal
    import time

    from test_cache import _loops_file

    (tmp_path / "axes.yaml").write_text(_loops_file(400))
    run = subprocess.Popen(
        [sys.executable, "-m", "speclint", "check", "axes.yaml", "--no-cache", "--jobs", "2"],
        cwd=tmp_path,
        env=_env(),
        stdout=subprocess.DEVNULL,
        stderr=subprocess.PIPE,
        text=True,
    )
    time.sleep(2.5)  # into the analysis: about 6 s of work for two workers here
    run.send_signal(signal.SIGINT)
    _, err = run.communicate(timeout=120)
    if run.returncode in (0, 1):
        pytest.skip("the run ended before the interrupt arrived (a much faster machine)")
    assert (run.returncode, err) == (130, "speclint: interrupted\n")
