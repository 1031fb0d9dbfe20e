"""Focused runs (``speclint check --focus FILE ...``): check the whole configured spec set,
report on a few files.

A pre-commit hook is handed the files a commit changes. Checking only those would lose
every link into the rest of the set (a requirement's loop, the requirement it traces to),
so the whole configured set is loaded and checked as usual, and the result is narrowed
afterwards to what concerns the focused files:

* everything found in a focused file;
* a requirement in another file whose loop a focused file defines, and the findings
  about it: its verdict follows that loop, so editing the loop can change it;
* findings of the link rules (:data:`LINK_RULES`) wherever they are: these are the
  findings a change in one file can cause in another (a renamed loop leaves a requirement
  elsewhere pointing at nothing). A run sees no history, so it cannot tell a link this
  change broke from one that was already broken; it reports both rather than let a broken
  link through.

Findings that only their own file can cause (its syntax, schema or loop models) are left
out for files outside the focus. The exit status follows the narrowed findings only.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

from speclint.discover import ConfigError, display_path
from speclint.results import RunResult

# Findings that one file can cause in another. A new rule of that kind (a dangling trace
# link, a duplicate ID across files, a cycle) belongs here too.
LINK_RULES = frozenset({"SL311", "SL312"})


def selector(given: list[str], cwd: Path) -> Callable[[str], bool]:
    """A test for report paths: is this path one of `given` (files, or inside given folders)?"""
    files: set[str] = set()
    folders: list[str] = []
    for name in given:
        target = cwd / name
        if not target.exists():
            raise ConfigError(f"{name}: no such file or folder")
        shown = display_path(target, cwd)
        if target.is_dir():
            folders.append("" if shown == "." else shown.rstrip("/") + "/")
        else:
            files.add(shown)

    def chosen(path: str) -> bool:
        return path in files or any(path.startswith(folder) for folder in folders)

    return chosen


def narrow(result: RunResult, chosen: Callable[[str], bool]) -> RunResult:
    """What of `result` concerns the chosen files, as described in the module docstring."""
    their_loops = {loop.id for loop in result.loops if chosen(loop.path)}
    requirements = [r for r in result.requirements if chosen(r.path) or (r.loop in their_loops)]
    about = {(r.path, r.id) for r in requirements}
    findings = [
        f
        for f in result.findings
        if chosen(f.location.path) or f.rule in LINK_RULES or (f.location.path, f.subject) in about
    ]
    used = their_loops | {r.loop for r in requirements if r.loop is not None}
    touched = {r.path for r in requirements} | {f.location.path for f in findings}
    return RunResult(
        files=[p for p in result.files if chosen(p) or p in touched],
        findings=findings,
        loops=[loop for loop in result.loops if loop.id in used],
        requirements=requirements,
        sources=result.sources,
    )
