"""The docs are the truth: they must be whole and say what CI does."""

from __future__ import annotations

import re

from conftest import REPO

DOCS = ["README.md", "DEVELOPERS.md", "examples/README.md"]


def test_no_merge_conflict_markers_in_docs_or_code():
    paths = [REPO / d for d in DOCS] + sorted((REPO / "speclint").rglob("*.py"))
    for path in paths:
        text = path.read_text(encoding="utf-8")
        for marker in ("<<<<<<< ", "\n=======\n", ">>>>>>> "):
            assert marker not in text, (
                f"{path.relative_to(REPO)} holds a merge marker {marker.strip()!r}"
            )


def test_ci_runs_the_readme_test_command():
    readme = (REPO / "README.md").read_text(encoding="utf-8")
    block = re.search(r"## Quick start.*?```sh\n(.*?)```", readme, re.DOTALL)
    assert block is not None, "README has no quick-start block"
    commands = [line for line in block.group(1).splitlines() if line.strip()]
    assert len(commands) == 2, "the quick start is exactly two set-up commands"
    ci = (REPO / ".ci" / "run").read_text(encoding="utf-8")
    assert commands[1] in ci


def test_readme_carries_the_caution():
    readme = (REPO / "README.md").read_text(encoding="utf-8")
    for standard in ("IEC 61800-5-2", "IEC 61508", "ISO 13849-1"):
        assert standard in readme
